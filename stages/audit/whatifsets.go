package audit

// The --set and --sweep arguments of a what-if, and the rules they move.

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"winnow/stages"
)

// parsedSet is one "stage.key=value".
type parsedSet struct {
	raw, stage, key, value string
}

func parseSet(s string) (parsedSet, error) {
	k, v, ok := strings.Cut(s, "=")
	st, key, ok2 := strings.Cut(k, ".")
	if !ok || !ok2 || st == "" || key == "" {
		return parsedSet{}, fmt.Errorf("--set %q: want STAGE.KEY=VALUE", s)
	}
	return parsedSet{raw: s, stage: st, key: key, value: v}, nil
}

// targets returns the steps a set names (by name, else by kind, as
// `winnow run --set` does).
func (r *Run) targets(stage string) []*StepInfo {
	var out []*StepInfo
	for _, s := range r.Steps {
		if s.Name == stage || (s.Kind == stage && s.Spec != nil) {
			out = append(out, s)
		}
	}
	return out
}

// labelOverride recomputes one metric of a step from a stored label: 1
// when the label is allowed, else 0 (a stages.LabelRule with another
// Allowed).
type labelOverride struct {
	metric, label string
	allowed       map[string]bool
}

// relabel returns vals (named by names) with each override's metric
// recomputed from row's labels (a copy when anything is overridden).
func relabel(vals []float64, names []string, labels map[string]string, ovs []labelOverride) []float64 {
	if len(ovs) == 0 {
		return vals
	}
	out := append([]float64(nil), vals...)
	for _, ov := range ovs {
		if j := indexOf(names, ov.metric); j >= 0 && j < len(out) {
			out[j] = 0
			if ov.allowed[labels[ov.label]] {
				out[j] = 1
			}
		}
	}
	return out
}

// rulesFor rebuilds a step with sets applied and checks that only limits
// (or the allowed values of a label rule) moved.
func (r *Run) rulesFor(st *StepInfo, sets []parsedSet) ([]stages.Rule, []labelOverride, []Change, error) {
	if st.Global {
		return nil, nil, nil, fmt.Errorf("--set %s: %s is a global stage (%s): its decisions depend on every document and are not recomputed from stored metrics; re-run with winnow run --set", sets[0].raw, st.Name, st.Kind)
	}
	if st.MetricsPath == "" {
		return nil, nil, nil, fmt.Errorf("--set %s: stage %s stored no metrics in this run", sets[0].raw, st.Name)
	}
	base, err := r.StepRules(st)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("--set %s: %w", sets[0].raw, err)
	}
	baseLabels := map[string]stages.LabelRule{} // by key
	if bb, err := r.BuildStep(st, nil, true); err == nil {
		if lr, ok := bb.Stage.(stages.LabelRuler); ok {
			for _, l := range lr.LabelRules() {
				baseLabels[l.Key] = l
			}
		}
	}
	var raw []string
	for _, s := range sets {
		if _, isLabel := baseLabels[s.key]; !isLabel {
			if _, err := strconv.ParseFloat(strings.ReplaceAll(s.value, "_", ""), 64); err != nil {
				if _, berr := strconv.ParseBool(s.value); berr != nil {
					return nil, nil, nil, fmt.Errorf("--set %s: what-if changes numeric limits only; %q is not a number", s.raw, s.value)
				}
			}
		}
		raw = append(raw, st.Name+"."+s.key+"="+s.value)
	}
	b, err := r.BuildStep(st, raw, true)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("--set %s: %w", strings.Join(raw, " "), err)
	}
	rules := b.Rules()
	if len(rules) != len(base) {
		return nil, nil, nil, fmt.Errorf("--set %s: changes the rule table of %s, not just a limit: re-run with winnow run --set", raw[0], st.Name)
	}
	for i := range rules {
		a, c := base[i], rules[i]
		if a.Name != c.Name || a.Metric != c.Metric || a.Cmp != c.Cmp || a.Key != c.Key {
			return nil, nil, nil, fmt.Errorf("--set %s: changes what %s measures, not just a limit: re-run with winnow run --set", raw[0], st.Name)
		}
	}
	var keys []string
	for _, ru := range base {
		if ru.Key != "" && !contains(keys, ru.Key) {
			keys = append(keys, ru.Key)
		}
	}
	for k := range baseLabels {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	var newLabels map[string]stages.LabelRule
	if lr, ok := b.Stage.(stages.LabelRuler); ok {
		newLabels = map[string]stages.LabelRule{}
		for _, l := range lr.LabelRules() {
			newLabels[l.Key] = l
		}
	}
	var changes []Change
	var ovs []labelOverride
	for _, s := range sets {
		if !contains(keys, s.key) {
			return nil, nil, nil, fmt.Errorf("--set %s: %q is not a threshold of %s (its thresholds: %s); other keys change what is measured: re-run with winnow run --set", s.raw, s.key, st.Name, strings.Join(keys, ", "))
		}
		ch := Change{Set: s.raw, Stage: st.Name, Key: s.key, Value: s.value, Rules: []RuleChange{}}
		if from, ok := baseLabels[s.key]; ok {
			to := newLabels[s.key]
			ov := labelOverride{metric: to.Metric, label: to.Label, allowed: map[string]bool{}}
			for _, a := range to.Allowed {
				ov.allowed[a] = true
			}
			ovs = append(ovs, ov)
			ch.Rules = append(ch.Rules, RuleChange{Rule: to.Rule, Metric: to.Label, KeepWhen: "in",
				FromAllowed: from.Allowed, ToAllowed: to.Allowed, FromEnabled: true, ToEnabled: true})
			changes = append(changes, ch)
			continue
		}
		for i, ru := range rules {
			if ru.Key == s.key {
				ch.Rules = append(ch.Rules, RuleChange{Rule: ru.Name, Metric: ru.Metric, KeepWhen: ru.Cmp.String(),
					FromLimit: base[i].Limit, ToLimit: ru.Limit, FromEnabled: base[i].Enabled, ToEnabled: ru.Enabled})
			}
		}
		changes = append(changes, ch)
	}
	return rules, ovs, changes, nil
}

func contains(ss []string, s string) bool {
	for _, x := range ss {
		if x == s {
			return true
		}
	}
	return false
}

// scenarioRules turns sets into per-step rule tables and label overrides.
func (r *Run) scenarioRules(sets []parsedSet) ([][]stages.Rule, [][]labelOverride, []Change, error) {
	per := map[int][]parsedSet{}
	for _, s := range sets {
		ts := r.targets(s.stage)
		if len(ts) == 0 {
			var names []string
			for _, st := range r.Steps {
				names = append(names, st.Name)
			}
			return nil, nil, nil, fmt.Errorf("--set %s: the run has no stage %q (stages: %s)", s.raw, s.stage, strings.Join(names, ", "))
		}
		for _, t := range ts {
			per[t.Index] = append(per[t.Index], s)
		}
	}
	rules := make([][]stages.Rule, len(r.Steps))
	labels := make([][]labelOverride, len(r.Steps))
	var changes []Change
	for _, i := range sortedKeys(per) {
		rs, ovs, ch, err := r.rulesFor(r.Steps[i], per[i])
		if err != nil {
			return nil, nil, nil, err
		}
		rules[i], labels[i] = rs, ovs
		changes = append(changes, ch...)
	}
	return rules, labels, changes, nil
}

// parseSweep expands "stage.key=from:to:step" or "stage.key=a,b,c".
func parseSweep(s string) (parsedSet, []float64, error) {
	ps, err := parseSet(s)
	if err != nil {
		return ps, nil, fmt.Errorf("--sweep %q: want STAGE.KEY=FROM:TO:STEP", s)
	}
	num := func(x string) (float64, error) {
		f, err := strconv.ParseFloat(strings.ReplaceAll(strings.TrimSpace(x), "_", ""), 64)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return 0, fmt.Errorf("--sweep %s: %q is not a number", s, x)
		}
		return f, nil
	}
	var vals []float64
	if parts := strings.Split(ps.value, ":"); len(parts) == 3 {
		from, err1 := num(parts[0])
		to, err2 := num(parts[1])
		step, err3 := num(parts[2])
		if err := errors.Join(err1, err2, err3); err != nil {
			return ps, nil, err
		}
		if step == 0 || (to-from)/step < 0 {
			return ps, nil, fmt.Errorf("--sweep %s: the step must move from %v towards %v", s, from, to)
		}
		n := int(math.Floor((to-from)/step+1e-9)) + 1
		if n > maxSweepPoints {
			return ps, nil, fmt.Errorf("--sweep %s: %d points; at most %d", s, n, maxSweepPoints)
		}
		for i := 0; i < n; i++ {
			vals = append(vals, roundTo(from+float64(i)*step, 9))
		}
	} else {
		for _, p := range strings.Split(ps.value, ",") {
			f, err := num(p)
			if err != nil {
				return ps, nil, err
			}
			vals = append(vals, f)
		}
		if len(vals) > maxSweepPoints {
			return ps, nil, fmt.Errorf("--sweep %s: at most %d points", s, maxSweepPoints)
		}
	}
	return ps, vals, nil
}

// fmtValue writes a sweep value the way YAML reads it back.
func fmtValue(f float64) string {
	return strconv.FormatFloat(f, 'g', -1, 64)
}
