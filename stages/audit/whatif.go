package audit

import (
	"fmt"
	"math"
	"strings"

	"winnow/stages"
)

// What-if semantics. A scenario replaces the limits of some threshold
// stages' rules. Every document of the run is re-decided stage by stage
// from what the run stored, without reading any input:
//
//   - a changed threshold stage applies its new rule table
//     (stages.ApplyRules) to the document's metrics row;
//   - an unchanged stage keeps its recorded decision (the metrics row's
//     action, or its ledger record);
//   - rows with "dropped_by" are shadow measurements: a document an
//     earlier stage removed was still measured by the later per-document
//     stages of the same segment, so when a looser earlier rule lets it
//     through, those stages' recorded decisions on it are known exactly.
//
// The result is exact as long as every document reaches only stages that
// measured it. It becomes an estimate, and says so, when
//
//   - a document that is now kept reaches a global stage (exact_dedup,
//     near_dedup, decontaminate with a counting pass) that never saw it in
//     the run (it is assumed kept there), or any stage after one (the
//     runner does not shadow-measure across a global stage);
//   - a stage that edits the documents it keeps (lines) now keeps one it
//     removed: the later stages measured the text without that edit;
//   - a document a global stage saw is now removed before it: the global
//     stage's other decisions may change (when the removed document was
//     the kept twin of duplicates, one of those would be kept instead;
//     such duplicates are counted as estimates and assumed still removed).
//
// Only limits can change, and the allowed values of a label rule
// (stages.LabelRule: langid's languages, from the stored "lang"): a key
// that changes what a stage measures (n-gram sizes, word lists, candidate
// languages) needs a re-run (winnow run --set).
// Edits are never recomputed: a changed threshold stage only keeps or
// drops, so every later stage measured the same text it would measure in
// the scenario.

// WhatIfOptions are the changes to evaluate.
type WhatIfOptions struct {
	// Sets are "stage.key=value" limit changes, evaluated together and,
	// when there are several, each alone.
	Sets []string
	// Sweeps are "stage.key=from:to:step" (or "stage.key=v1,v2,...")
	// curves, each evaluated on top of Sets.
	Sweeps []string
	// Samples is the number of flipping ids listed per direction.
	Samples int
}

// WhatIf is the answer of `winnow whatif`.
type WhatIf struct {
	Run     string   `json:"run"`
	Changes []Change `json:"changes"`
	// Combined is all Sets together; PerSet each set alone (when more
	// than one).
	Combined *ScenarioResult   `json:"combined,omitempty"`
	PerSet   []*ScenarioResult `json:"per_set,omitempty"`
	Sweeps   []*SweepResult    `json:"sweeps,omitempty"`
	// Checks recompute each rebuilt threshold stage's decisions with the
	// run's own limits and compare them with what the run recorded.
	Checks      []Check  `json:"checks"`
	TokensKnown bool     `json:"tokens_known"`
	Notes       []string `json:"notes"`
}

// Change is one --set as understood: which rules of which stage move.
type Change struct {
	Set   string       `json:"set"`
	Stage string       `json:"stage"`
	Key   string       `json:"key"`
	Value string       `json:"value"`
	Rules []RuleChange `json:"rules"`
}

// RuleChange is one rule whose limit or enabled state a change moves.
type RuleChange struct {
	Rule        string  `json:"rule"`
	Metric      string  `json:"metric"`
	KeepWhen    string  `json:"keep_when"`
	FromLimit   float64 `json:"from_limit"`
	ToLimit     float64 `json:"to_limit"`
	FromEnabled bool    `json:"from_enabled"`
	ToEnabled   bool    `json:"to_enabled"`
	// A rule on a label (langid's language): the allowed values, run and
	// scenario; Metric is then the label and KeepWhen "in".
	FromAllowed []string `json:"from_allowed,omitempty"`
	ToAllowed   []string `json:"to_allowed,omitempty"`
}

// ScenarioResult is what one scenario changes against the run. "Kept"
// means reaching the output writer (a mix may still sample from those).
type ScenarioResult struct {
	Label string   `json:"label"`
	Sets  []string `json:"sets"`
	// DocsKept/TokensKept are the scenario's; the *Run fields the run's.
	DocsKeptRun   int64 `json:"docs_kept_run"`
	DocsKept      int64 `json:"docs_kept"`
	TokensKeptRun int64 `json:"tokens_kept_run"`
	TokensKept    int64 `json:"tokens_kept"`
	// NewlyRemoved were kept by the run and are removed now; NewlyKept
	// the reverse; Moved are still removed but by another stage or rule.
	NewlyRemoved int64 `json:"newly_removed"`
	NewlyKept    int64 `json:"newly_kept"`
	Moved        int64 `json:"moved"`
	// Token figures of the flips; tokens of newly kept documents that
	// were never measured by the token stage are estimated from their
	// bytes (TokensEstimatedDocs of them).
	TokensNewlyRemoved  int64 `json:"tokens_newly_removed"`
	TokensNewlyKept     int64 `json:"tokens_newly_kept"`
	TokensEstimatedDocs int64 `json:"tokens_estimated_docs"`
	// Estimated counts documents whose outcome rests on an assumption
	// (see the package comment); Exact is true when there are none and
	// no global stage's input changed.
	Estimated int64         `json:"estimated_docs"`
	Exact     bool          `json:"exact"`
	Stages    []StageDelta  `json:"stages"`
	Rules     []RuleDelta   `json:"rules"`
	Sources   []SourceDelta `json:"sources"`
	// FlipsRemoved/FlipsKept are the first few flipping documents.
	FlipsRemoved []Flip   `json:"flips_removed"`
	FlipsKept    []Flip   `json:"flips_kept"`
	Notes        []string `json:"notes"`
}

// StageDelta is one stage's removals in the run and in the scenario.
type StageDelta struct {
	Stage      string `json:"stage"`
	Global     bool   `json:"global"`
	RemovedRun int64  `json:"removed_run"`
	Removed    int64  `json:"removed"`
	// Estimate is true for a global stage whose input changed; NewInput
	// and LostInput count documents it now sees but did not, and the
	// reverse.
	Estimate  bool  `json:"estimate"`
	NewInput  int64 `json:"new_input"`
	LostInput int64 `json:"lost_input"`
}

// RuleDelta is one rule's removals in the run and in the scenario.
type RuleDelta struct {
	Stage      string `json:"stage"`
	Rule       string `json:"rule"`
	RemovedRun int64  `json:"removed_run"`
	Removed    int64  `json:"removed"`
}

// SourceDelta is one source's kept documents and tokens.
type SourceDelta struct {
	Source      string `json:"source"`
	KeptRun     int64  `json:"kept_run"`
	Kept        int64  `json:"kept"`
	DeltaDocs   int64  `json:"delta_docs"`
	DeltaTokens int64  `json:"delta_tokens"`
}

// Flip is a document whose fate changes.
type Flip struct {
	ID     string `json:"id"`
	Source string `json:"source"`
	// Stage/Rule remove it now (FlipsRemoved) or removed it in the run
	// (FlipsKept); Value is the metric the rule tested.
	Stage string   `json:"stage"`
	Rule  string   `json:"rule"`
	Value *float64 `json:"value"`
	// Tokens is -1 when unknown.
	Tokens int64 `json:"tokens"`
}

// SweepResult is one curve of a --sweep.
type SweepResult struct {
	Stage  string       `json:"stage"`
	Key    string       `json:"key"`
	Points []SweepPoint `json:"points"`
}

// SweepPoint is one value of a sweep.
type SweepPoint struct {
	Value float64 `json:"value"`
	// RemovedByStage counts the swept stage's removals.
	RemovedByStage int64 `json:"removed_by_stage"`
	DocsKept       int64 `json:"docs_kept"`
	TokensKept     int64 `json:"tokens_kept"`
	NewlyRemoved   int64 `json:"newly_removed"`
	NewlyKept      int64 `json:"newly_kept"`
	Estimated      int64 `json:"estimated_docs"`
	// Exact is false when the point rests on an assumption (estimated
	// documents, or a global stage whose input changed).
	Exact bool `json:"exact"`
}

// Check is the recomputation of one stage at the run's own limits.
type Check struct {
	Stage      string   `json:"stage"`
	Rows       int64    `json:"rows"`
	Mismatches int64    `json:"mismatches"`
	Examples   []string `json:"examples"`
}

// Limits of a what-if.
const (
	// maxSweepPoints bounds one sweep (each point is a scenario
	// evaluated on every document).
	maxSweepPoints = 1000
	// maxTrackedRemovals bounds the ids of newly removed documents kept,
	// over all scenarios, to tell duplicates whose kept twin is now
	// removed (about 50 bytes each).
	maxTrackedRemovals = 1 << 22
)

// scenario is the engine's form of one scenario.
type scenario struct {
	res    *ScenarioResult
	rules  [][]stages.Rule   // per step; nil: recorded decisions
	labels [][]labelOverride // per step: metrics recomputed from stored labels
	// sweep point bookkeeping
	sweepStep int
	point     *SweepPoint
	// ids of newly removed documents (for duplicate twins)
	removed  map[string]bool
	overflow bool
	// per step and rule removals
	stepRemoved []int64
	ruleRemoved map[string]int64
	newInput    []int64
	lostInput   []int64
	srcKept     map[string]int64
	srcTokens   map[string]int64
}

// engine evaluates scenarios over one walk.
type engine struct {
	r     *Run
	base  [][]stages.Rule // the run's own rules of rebuilt steps
	ratio float64         // tokens per byte, for never-measured documents
	tok   int             // token step, -1 when none
	n     int             // flips listed
	// trackCap bounds each scenario's set of newly removed ids (0: not
	// needed, no global stage follows a change).
	trackCap int
}

// RunWhatIf evaluates the scenarios of opt in one walk over the run's
// metrics and ledger.
func RunWhatIf(r *Run, opt WhatIfOptions) (*WhatIf, error) {
	if opt.Samples <= 0 {
		opt.Samples = 5
	}
	w := &WhatIf{Run: r.Dir, Changes: []Change{}, Checks: []Check{}, Notes: []string{}}
	var sets []parsedSet
	for _, s := range opt.Sets {
		ps, err := parseSet(s)
		if err != nil {
			return nil, err
		}
		sets = append(sets, ps)
	}
	e := &engine{r: r, n: opt.Samples, tok: -1}
	if t := r.TokenStep(); t != nil {
		e.tok = t.Index
		w.TokensKnown = true
	}
	var scs []*scenario
	newScenario := func(label string, ss []parsedSet, rules [][]stages.Rule, labels [][]labelOverride) *scenario {
		res := &ScenarioResult{Label: label, Sets: []string{}, FlipsRemoved: []Flip{}, FlipsKept: []Flip{}, Notes: []string{}}
		for _, s := range ss {
			res.Sets = append(res.Sets, s.raw)
		}
		sc := &scenario{res: res, rules: rules, labels: labels, sweepStep: -1, removed: map[string]bool{},
			stepRemoved: make([]int64, len(r.Steps)), ruleRemoved: map[string]int64{},
			newInput: make([]int64, len(r.Steps)), lostInput: make([]int64, len(r.Steps)),
			srcKept: map[string]int64{}, srcTokens: map[string]int64{}}
		scs = append(scs, sc)
		return sc
	}
	if len(sets) > 0 {
		rules, labels, changes, err := r.scenarioRules(sets)
		if err != nil {
			return nil, err
		}
		w.Changes = changes
		w.Combined = newScenario("combined", sets, rules, labels).res
		if len(sets) > 1 {
			for _, s := range sets {
				rs, ls, _, err := r.scenarioRules([]parsedSet{s})
				if err != nil {
					return nil, err
				}
				w.PerSet = append(w.PerSet, newScenario(s.raw, []parsedSet{s}, rs, ls).res)
			}
		}
	}
	for _, sw := range opt.Sweeps {
		ps, vals, err := parseSweep(sw)
		if err != nil {
			return nil, err
		}
		ts := r.targets(ps.stage)
		if len(ts) == 0 {
			return nil, fmt.Errorf("--sweep %s: the run has no stage %q", sw, ps.stage)
		}
		res := &SweepResult{Stage: ts[0].Name, Key: ps.key, Points: make([]SweepPoint, len(vals))}
		w.Sweeps = append(w.Sweeps, res)
		for k, v := range vals {
			pt := parsedSet{raw: ps.stage + "." + ps.key + "=" + fmtValue(v), stage: ps.stage, key: ps.key, value: fmtValue(v)}
			all := append(append([]parsedSet(nil), sets...), pt)
			rules, labels, _, err := r.scenarioRules(all)
			if err != nil {
				return nil, err
			}
			sc := newScenario(pt.raw, all, rules, labels)
			res.Points[k] = SweepPoint{Value: v}
			sc.point = &res.Points[k]
			sc.sweepStep = ts[0].Index
		}
	}
	// The run's own rules of every step a scenario touches, and of every
	// other measured step that removed something, for the check.
	e.base = make([][]stages.Rule, len(r.Steps))
	for i, st := range r.Steps {
		touched := false
		for _, sc := range scs {
			if sc.rules[i] != nil {
				touched = true
			}
		}
		if st.Global || st.MetricsPath == "" || (!touched && st.Counters.Dropped == 0) {
			continue
		}
		if rules, err := r.StepRules(st); err == nil {
			e.base[i] = rules
		} else if !strings.Contains(err.Error(), "not a threshold stage") {
			w.Notes = append(w.Notes, fmt.Sprintf("%v: its recorded decisions are used as they are", err))
		}
	}
	// Ids of newly removed documents are kept only when a global stage
	// that removes duplicates "of" a kept twin follows a changed stage,
	// within a total budget over all scenarios.
	first := len(r.Steps)
	for _, sc := range scs {
		for i, rs := range sc.rules {
			if rs != nil {
				first = min(first, i)
			}
		}
	}
	track := false
	for i := first + 1; i < len(r.Steps); i++ {
		track = track || r.Steps[i].Global
	}
	if len(scs) > 0 {
		e.trackCap = 0
		if track {
			e.trackCap = max(1<<12, maxTrackedRemovals/len(scs))
		}
	}
	if err := e.run(w, scs); err != nil {
		return nil, err
	}
	return w, nil
}

// outcome of one document under one scenario.
type outcome struct {
	step  int // removing step, -1 kept
	rule  string
	value float64
	est   bool
}

func dropRec(recs []Record) *Record {
	for i := range recs {
		if recs[i].Action == "drop" {
			return &recs[i]
		}
	}
	return nil
}

// simulate re-decides one document (orig is the step that removed it in
// the run, -1 when kept).
func (e *engine) simulate(t *Trail, orig int, sc *scenario) outcome {
	est := false
	for i, st := range e.r.Steps {
		entered := orig < 0 || i <= orig
		tr := &t.Steps[i]
		if st.Global {
			if !entered {
				est = true // the stage never saw this document
				continue
			}
			if rc := dropRec(tr.Recs); rc != nil {
				if of := rc.ExtraString("of"); of != "" && (sc.removed[of] || sc.overflow) {
					est = true // its kept twin is removed now
				}
				return outcome{step: i, rule: rc.Rule, value: math.NaN(), est: est}
			}
			continue
		}
		if rules := sc.rules[i]; rules != nil && tr.Row != nil {
			dec := stages.ApplyRules(rules, st.MetricNames, relabel(tr.Row.Values, st.MetricNames, tr.Row.Labels, sc.labels[i]))
			if dec.Action == stages.Drop {
				return outcome{step: i, rule: dec.Rule, value: floatOf(dec.Value, math.NaN()), est: est}
			}
			if tr.Row.Action == "drop" && st.Counters.Edited > 0 {
				// A stage that also edits what it keeps (lines) would now
				// keep, and maybe edit, a document it removed: the later
				// stages measured the unedited text.
				est = true
			}
			continue
		}
		if tr.Row != nil {
			if tr.Row.Action == "drop" {
				return outcome{step: i, rule: tr.Row.Rule, value: e.ruleValue(i, tr.Row), est: est}
			}
			continue
		}
		if entered {
			if rc := dropRec(tr.Recs); rc != nil {
				return outcome{step: i, rule: rc.Rule, value: floatOf(rc.Value, math.NaN()), est: est}
			}
			continue
		}
		// Not measured here in the run: the document never reached this
		// stage's segment. A stage that measures nothing and removed
		// nothing in the run is assumed to keep it.
		if st.MetricsPath != "" || st.Counters.Dropped > 0 || sc.rules[i] != nil {
			est = true
		}
	}
	return outcome{step: -1, est: est}
}

// ruleValue returns the metric a recorded drop's rule tested.
func (e *engine) ruleValue(i int, row *MetricRow) float64 {
	for _, ru := range e.base[i] {
		if ru.Name == row.Rule {
			if j := indexOf(e.r.Steps[i].MetricNames, ru.Metric); j >= 0 && j < len(row.Values) {
				return row.Values[j]
			}
		}
	}
	return math.NaN()
}

func indexOf(ss []string, s string) int {
	for i, x := range ss {
		if x == s {
			return i
		}
	}
	return -1
}

func (e *engine) run(w *WhatIf, scs []*scenario) error {
	r := e.r
	checks := make([]Check, len(r.Steps))
	for i, st := range r.Steps {
		checks[i].Stage = st.Name
		checks[i].Examples = []string{}
	}
	docsRead := map[string]int64{}
	var sources []string
	for _, in := range r.Manifest.Inputs {
		if _, ok := docsRead[in.Source]; !ok {
			sources = append(sources, in.Source)
		}
		docsRead[in.Source] += in.Docs
	}
	srcRemovedRun := map[string]int64{}
	stepRemovedRun := make([]int64, len(r.Steps))
	ruleRemovedRun := map[string]int64{}
	var keptTokens int64
	srcTokensRun := map[string]int64{}
	wr := r.writeCounters()
	_, err := r.Walk(func(t *Trail) error {
		step, _ := t.Removal()
		if step == -2 {
			return nil // a read error: never a document
		}
		// Consistency: the run's own rules must give the recorded
		// decisions.
		for i, rules := range e.base {
			row := t.Steps[i].Row
			if rules == nil || row == nil {
				continue
			}
			c := &checks[i]
			c.Rows++
			dec := stages.ApplyRules(rules, r.Steps[i].MetricNames, row.Values)
			recDrop, decDrop := row.Action == "drop", dec.Action == stages.Drop
			if recDrop != decDrop || recDrop && dec.Rule != row.Rule {
				c.Mismatches++
				if len(c.Examples) < 5 {
					c.Examples = append(c.Examples, fmt.Sprintf("%s: recorded %s %s, rules give %s %s", t.ID, row.Action, row.Rule, dec.Action, dec.Rule))
				}
			}
		}
		toks, tokOK := e.tokens(t)
		if step >= 0 {
			stepRemovedRun[step]++
			srcRemovedRun[t.Source]++
			if rc := dropRec(t.Steps[step].Recs); rc != nil {
				ruleRemovedRun[r.Steps[step].Name+"\x00"+rc.Rule]++
			}
		} else if tokOK {
			keptTokens += toks
			srcTokensRun[t.Source] += toks
		}
		for _, sc := range scs {
			o := e.simulate(t, step, sc)
			e.tally(sc, t, step, o, toks, tokOK)
		}
		return nil
	})
	if err != nil {
		return err
	}
	for i := range checks {
		if e.base[i] != nil {
			w.Checks = append(w.Checks, checks[i])
			if checks[i].Mismatches > 0 {
				w.Notes = append(w.Notes, fmt.Sprintf("stage %s: %d of %d recorded decisions differ from its rules at the run's own limits: what-if on it is unreliable (was the run made by another winnow version?)",
					checks[i].Stage, checks[i].Mismatches, checks[i].Rows))
			}
		}
	}
	keptRun := wr.DocsIn
	for _, sc := range scs {
		res := sc.res
		res.DocsKeptRun = keptRun
		res.DocsKept = keptRun - res.NewlyRemoved + res.NewlyKept
		res.TokensKeptRun = keptTokens
		res.TokensKept = keptTokens - res.TokensNewlyRemoved + res.TokensNewlyKept
		res.Exact = res.Estimated == 0
		for i, st := range r.Steps {
			d := StageDelta{Stage: st.Name, Global: st.Global, RemovedRun: stepRemovedRun[i], Removed: sc.stepRemoved[i],
				NewInput: sc.newInput[i], LostInput: sc.lostInput[i]}
			d.Estimate = st.Global && (d.NewInput > 0 || d.LostInput > 0)
			if d.Estimate {
				res.Exact = false
				res.Notes = append(res.Notes, fmt.Sprintf("%s (global) now sees %d document(s) it did not see and loses %d it saw: its figures are an estimate (new documents assumed kept, its other decisions assumed unchanged)", st.Name, d.NewInput, d.LostInput))
			}
			res.Stages = append(res.Stages, d)
		}
		keys := map[string]bool{}
		for k := range ruleRemovedRun {
			keys[k] = true
		}
		for k := range sc.ruleRemoved {
			keys[k] = true
		}
		for _, st := range r.Steps {
			for _, k := range sortedKeys(keys) {
				name, rule, _ := strings.Cut(k, "\x00")
				if name != st.Name {
					continue
				}
				if ruleRemovedRun[k] == 0 && sc.ruleRemoved[k] == 0 {
					continue
				}
				res.Rules = append(res.Rules, RuleDelta{Stage: name, Rule: rule, RemovedRun: ruleRemovedRun[k], Removed: sc.ruleRemoved[k]})
			}
		}
		for _, src := range sources {
			run := docsRead[src] - srcRemovedRun[src]
			res.Sources = append(res.Sources, SourceDelta{Source: src, KeptRun: run, Kept: run + sc.srcKept[src],
				DeltaDocs: sc.srcKept[src], DeltaTokens: sc.srcTokens[src]})
		}
		if sc.overflow {
			res.Notes = append(res.Notes, fmt.Sprintf("more than %d documents newly removed: every duplicate a global stage removed after them is counted as an estimate", e.trackCap))
		}
		if res.TokensEstimatedDocs > 0 {
			res.Notes = append(res.Notes, fmt.Sprintf("%d newly kept document(s) were never measured by the token stage: their tokens are estimated from their bytes at the run's tokens per byte", res.TokensEstimatedDocs))
		}
		if pt := sc.point; pt != nil {
			pt.DocsKept, pt.TokensKept = res.DocsKept, res.TokensKept
			pt.NewlyRemoved, pt.NewlyKept, pt.Estimated = res.NewlyRemoved, res.NewlyKept, res.Estimated
			pt.Exact = res.Exact
			pt.RemovedByStage = sc.stepRemoved[sc.sweepStep]
		}
	}
	if !w.TokensKnown {
		w.Notes = append(w.Notes, "the run counted no tokens (no output.tokenizer): token figures are 0")
	}
	return nil
}

// tokens returns a document's token count from the token stage's row.
func (e *engine) tokens(t *Trail) (int64, bool) {
	if e.tok < 0 {
		return 0, false
	}
	row := t.Steps[e.tok].Row
	if row == nil || len(row.Values) == 0 || math.IsNaN(row.Values[0]) {
		return 0, false
	}
	return int64(row.Values[0]), true
}

// tally adds one document's scenario outcome.
func (e *engine) tally(sc *scenario, t *Trail, orig int, o outcome, toks int64, tokOK bool) {
	r := e.r
	res := sc.res
	if o.est {
		res.Estimated++
	}
	if o.step >= 0 {
		sc.stepRemoved[o.step]++
		sc.ruleRemoved[r.Steps[o.step].Name+"\x00"+o.rule]++
	}
	// Global stages whose input changes.
	for i, st := range r.Steps {
		if !st.Global {
			continue
		}
		was := orig < 0 || orig >= i
		now := o.step < 0 || o.step >= i
		switch {
		case now && !was:
			sc.newInput[i]++
		case was && !now:
			sc.lostInput[i]++
		}
	}
	switch {
	case orig < 0 && o.step >= 0:
		res.NewlyRemoved++
		if tokOK {
			res.TokensNewlyRemoved += toks
			sc.srcTokens[t.Source] -= toks
		}
		sc.srcKept[t.Source]--
		if len(sc.removed) < e.trackCap {
			sc.removed[t.ID] = true
		} else if e.trackCap > 0 {
			sc.overflow = true
		}
		if len(res.FlipsRemoved) < e.n {
			res.FlipsRemoved = append(res.FlipsRemoved, Flip{ID: t.ID, Source: t.Source, Stage: r.Steps[o.step].Name, Rule: o.rule,
				Value: ptrFloat(o.value), Tokens: tokOr(toks, tokOK)})
		}
	case orig >= 0 && o.step < 0:
		res.NewlyKept++
		if !tokOK {
			if e.tok >= 0 {
				// Estimate from the bytes last measured.
				b, _ := t.BytesAt(len(r.Steps))
				toks = int64(math.Round(float64(b) * e.tokenRatio()))
				res.TokensEstimatedDocs++
			}
		}
		res.TokensNewlyKept += toks
		sc.srcTokens[t.Source] += toks
		sc.srcKept[t.Source]++
		if len(res.FlipsKept) < e.n {
			rc := dropRec(t.Steps[orig].Recs)
			f := Flip{ID: t.ID, Source: t.Source, Stage: r.Steps[orig].Name, Tokens: tokOr(toks, tokOK)}
			if rc != nil {
				f.Rule = rc.Rule
				f.Value = ptrFloat(floatOf(rc.Value, math.NaN()))
			}
			res.FlipsKept = append(res.FlipsKept, f)
		}
	case orig >= 0 && o.step >= 0:
		rc := dropRec(t.Steps[orig].Recs)
		if o.step != orig || rc == nil || rc.Rule != o.rule {
			res.Moved++
		}
	}
}

func tokOr(t int64, ok bool) int64 {
	if ok {
		return t
	}
	return -1
}

// tokenRatio is the run's tokens per byte of the documents that reached
// the writer, computed once from the manifest and the first walk's sums.
func (e *engine) tokenRatio() float64 {
	if e.ratio == 0 {
		wr := e.r.writeCounters()
		if wr.BytesIn > 0 && wr.TokensOut > 0 {
			e.ratio = float64(wr.TokensOut) / float64(wr.BytesIn)
		} else {
			e.ratio = 0.25 // a common rule of thumb for English BPE: about 4 bytes per token
		}
	}
	return e.ratio
}
