package audit

import (
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"

	"winnow/stages"
	"winnow/stages/termtext"
)

// Explanation is the answer of `winnow explain RUN DOC_ID`: every
// document of the run with that id (ids are unique unless an input's
// id_field repeats them).
type Explanation struct {
	ID   string     `json:"id"`
	Docs []*DocPath `json:"docs"`
}

// DocPath is one document's way through the run.
type DocPath struct {
	ID     string `json:"id"`
	Source string `json:"source"`
	File   string `json:"file"`
	Line   int64  `json:"line"`
	// Order is the document's input position "input:record".
	Order     string     `json:"order"`
	Decisions []Decision `json:"decisions"`
	Result    Result     `json:"result"`
	// Copies are the documents a dedup stage removed as copies of this
	// one (their "of" is this id), in input order; at most maxCopies are
	// listed, CopiesTotal counts all.
	Copies      []Copy `json:"copies,omitempty"`
	CopiesTotal int    `json:"copies_total,omitempty"`
}

// Copy is a document removed as a copy of the explained one.
type Copy struct {
	ID     string `json:"id"`
	Source string `json:"source"`
	Stage  string `json:"stage"`
	Rule   string `json:"rule"`
	// Similarity is the estimated (or, under verify: exact, exact)
	// Jaccard similarity for near copies; 1 for exact copies.
	Similarity float64 `json:"similarity"`
}

// maxCopies bounds the copies listed for one document (a page mirrored
// thousands of times would otherwise flood the answer).
const maxCopies = 100

// Decision is what one stage did with the document.
type Decision struct {
	Stage string `json:"stage"`
	Kind  string `json:"kind"`
	// Action is keep, drop or edit; "measured after removal" rows are
	// Shadow (with the decision the stage would have made) and stages the
	// document never reached are "not reached".
	Action  string        `json:"action"`
	Shadow  bool          `json:"shadow,omitempty"`
	Rule    string        `json:"rule,omitempty"`
	Value   any           `json:"value,omitempty"`
	Limit   any           `json:"limit,omitempty"`
	Metrics []MetricValue `json:"metrics,omitempty"`
	// Labels are the text values measured with the metrics (lang).
	Labels  map[string]string `json:"labels,omitempty"`
	Changes map[string]int64  `json:"changes,omitempty"`
	Extra   map[string]any    `json:"extra,omitempty"`
	Note    string            `json:"note,omitempty"`
}

// MetricValue is one measured value and the rules that test it.
type MetricValue struct {
	Name string `json:"name"`
	// Value is nil when the metric does not apply.
	Value  *float64    `json:"value"`
	Checks []RuleCheck `json:"checks,omitempty"`
}

// RuleCheck is one rule held against a metric.
type RuleCheck struct {
	Rule     string  `json:"rule"`
	Key      string  `json:"key"`
	KeepWhen string  `json:"keep_when"`
	Limit    float64 `json:"limit"`
	Pass     bool    `json:"pass"`
}

// Result is where the document ended up.
type Result struct {
	// Status is "kept" (in the shards), "removed", "read_error" or
	// "not_in_shards" (it passed every stage but the output mix left it
	// out, or the run was interrupted).
	Status string `json:"status"`
	Stage  string `json:"stage,omitempty"`
	Rule   string `json:"rule,omitempty"`
	Reason string `json:"reason,omitempty"`
	// Shards are the shard lines holding it (several when the output
	// split it into pieces or repeated it).
	Shards []ShardLine `json:"shards,omitempty"`
}

// ShardLine is one line of an output shard.
type ShardLine struct {
	Path string `json:"path"`
	Line int64  `json:"line"`
	ID   string `json:"id"`
}

// Explain collects every decision about the document(s) with id.
func Explain(r *Run, id string) (*Explanation, error) {
	ex := &Explanation{ID: id, Docs: []*DocPath{}}
	var trails []*Trail
	var copies []Copy
	total := 0
	if _, err := r.Walk(func(t *Trail) error {
		for _, st := range t.Steps {
			for i := range st.Recs {
				rc := &st.Recs[i]
				if rc.ExtraString("of") != id || rc.Extra["against"] != nil {
					continue
				}
				total++
				if len(copies) < maxCopies {
					sim := 1.0
					if v, ok := rc.Extra["similarity"].(float64); ok {
						sim = v
					}
					copies = append(copies, Copy{ID: t.ID, Source: t.Source, Stage: rc.Stage, Rule: rc.Rule, Similarity: sim})
				}
			}
		}
		if t.ID == id {
			trails = append(trails, t.Clone())
			return nil
		}
		for _, rc := range t.Read {
			if rc.Doc == id {
				trails = append(trails, t.Clone())
				return nil
			}
		}
		return nil
	}); err != nil {
		return nil, err
	}
	shards, err := r.findInShards(id)
	if err != nil {
		return nil, err
	}
	if len(trails) == 0 && len(shards) == 0 {
		return nil, fmt.Errorf("document %q is not in run %s: no ledger record, metrics row or shard line has that id", id, r.Dir)
	}
	if len(trails) == 0 {
		// Kept by every stage and measured by none.
		p := &DocPath{ID: id, Decisions: []Decision{}}
		for _, st := range r.Steps {
			p.Decisions = append(p.Decisions, Decision{Stage: st.Name, Kind: st.Kind, Action: "keep", Note: "no record: kept without measuring"})
		}
		p.Result = Result{Status: "kept", Shards: shards}
		p.Copies, p.CopiesTotal = copies, total
		ex.Docs = append(ex.Docs, p)
		return ex, nil
	}
	for _, t := range trails {
		ex.Docs = append(ex.Docs, r.explainTrail(t, shards))
	}
	for _, p := range ex.Docs {
		p.Copies, p.CopiesTotal = copies, total
	}
	return ex, nil
}

func ptrFloat(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func (r *Run) explainTrail(t *Trail, shards []ShardLine) *DocPath {
	file, line := r.Location(t)
	p := &DocPath{ID: t.ID, Source: t.Source, File: file, Line: line, Order: t.Order.String(), Decisions: []Decision{}}
	step, rem := t.Removal()
	for _, rc := range t.Read {
		d := Decision{Stage: "read", Kind: "read", Action: rc.Action, Rule: rc.Rule, Value: rc.Value, Extra: rc.Extra}
		p.Decisions = append(p.Decisions, d)
	}
	if step == -2 {
		p.Result = Result{Status: "read_error", Stage: "read", Rule: rem.Rule, Reason: r.reason(nil, rem)}
		return p
	}
	for i, st := range r.Steps {
		tr := &t.Steps[i]
		d := Decision{Stage: st.Name, Kind: st.Kind, Action: "keep"}
		after := step >= 0 && i > step
		if tr.Row != nil {
			d.Action = tr.Row.Action
			d.Rule = tr.Row.Rule
			d.Shadow = tr.Row.Shadow()
			d.Labels = tr.Row.Labels
			rules, _ := r.StepRules(st)
			for j, name := range st.MetricNames {
				v := math.NaN()
				if j < len(tr.Row.Values) {
					v = tr.Row.Values[j]
				}
				mv := MetricValue{Name: name, Value: ptrFloat(v)}
				for _, ru := range rules {
					if ru.Enabled && ru.Metric == name {
						mv.Checks = append(mv.Checks, RuleCheck{Rule: ru.Name, Key: ru.Key, KeepWhen: ru.Cmp.String(), Limit: ru.Limit, Pass: ru.Cmp.Keeps(v, ru.Limit)})
					}
				}
				d.Metrics = append(d.Metrics, mv)
			}
			if d.Shadow {
				d.Note = "measured after removal by " + tr.Row.DroppedBy + " (shadow measurement): the decision it would have made"
			}
		} else if sc := stepScope(st); sc != nil && !r.inScope(sc, t, i) {
			d.Note = "outside its only: scope (" + sc.String() + "): passed untouched, not measured"
			if after {
				d.Action = "not reached"
			}
		} else if after {
			d.Action = "not reached"
			if r.crossesGlobal(step, i) {
				d.Note = "removed before a global stage: later stages never saw it"
			} else {
				d.Note = "removed earlier; this stage records no measurements"
			}
		}
		for _, rc := range tr.Recs {
			d.Action, d.Rule, d.Value, d.Limit = rc.Action, rc.Rule, rc.Value, rc.Limit
			d.Changes, d.Extra, d.Shadow = rc.Changes, rc.Extra, false
			d.Note = ""
		}
		p.Decisions = append(p.Decisions, d)
	}
	for _, rc := range t.Other {
		p.Decisions = append(p.Decisions, Decision{Stage: rc.Stage, Kind: rc.Stage, Action: rc.Action, Rule: rc.Rule, Changes: rc.Changes, Extra: rc.Extra})
	}
	var mine []ShardLine
	for _, s := range shards {
		if s.ID == t.ID || strings.HasPrefix(s.ID, t.ID+"#") {
			mine = append(mine, s)
		}
	}
	switch {
	case step >= 0:
		p.Result = Result{Status: "removed", Stage: r.Steps[step].Name, Rule: rem.Rule, Reason: r.reason(r.Steps[step], rem)}
	case len(mine) > 0:
		p.Result = Result{Status: "kept", Shards: mine}
	default:
		reason := "it passed every stage but is in no shard: the output mix left it out (token budget or shares)"
		if r.Manifest.Interrupted {
			reason = "it passed every stage but is in no shard: the run was interrupted"
		}
		p.Result = Result{Status: "not_in_shards", Reason: reason}
	}
	return p
}

// crossesGlobal reports whether a global stage lies in (from, to].
func (r *Run) crossesGlobal(from, to int) bool {
	for i := from + 1; i <= to && i < len(r.Steps); i++ {
		if r.Steps[i].Global {
			return true
		}
	}
	return false
}

// findInShards scans the output shards for lines with id (or its pieces
// "id#N").
func (r *Run) findInShards(id string) ([]ShardLine, error) {
	var out []ShardLine
	for _, f := range r.Manifest.Outputs {
		path := filepath.Join(r.Dir, filepath.FromSlash(f.Path))
		if !fileExists(path) {
			continue
		}
		lr, err := openLines(path)
		if err != nil {
			return nil, err
		}
		for {
			b, err := lr.next()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				lr.close()
				return nil, err
			}
			got := shardID(b)
			if got == id || strings.HasPrefix(got, id+"#") {
				out = append(out, ShardLine{Path: f.Path, Line: lr.line, ID: got})
			}
		}
		lr.close()
	}
	return out, nil
}

// shardID returns the "id" of a shard line without decoding its text
// (shard lines start with the id).
func shardID(b []byte) string {
	sc := flatScanner{b: b}
	sc.ws()
	if sc.i < len(b) && b[sc.i] == '{' {
		sc.i++
		sc.ws()
		if k, err := sc.str(); err == nil && string(k) == "id" {
			sc.ws()
			if sc.i < len(b) && b[sc.i] == ':' {
				sc.i++
				sc.ws()
				if v, err := sc.str(); err == nil {
					return string(v)
				}
			}
		}
	}
	// Not in the usual layout: find the key the slow way.
	var id string
	sc = flatScanner{b: b}
	sc.object(func(key []byte, str string, num float64, kind byte) error {
		if string(key) == "id" && kind == 's' {
			id = str
		}
		return nil
	})
	return id
}

// WriteText prints the explanation.
func (ex *Explanation) WriteText(w io.Writer) error {
	if len(ex.Docs) > 1 {
		fmt.Fprintf(w, "%d documents have the id %s (the input repeats it); each is shown:\n\n", len(ex.Docs), termtext.Escape(ex.ID))
	}
	for n, p := range ex.Docs {
		if n > 0 {
			fmt.Fprintln(w)
		}
		fmt.Fprintf(w, "%s  source %s, %s:%d (order %s)\n", termtext.Escape(p.ID), termtext.Escape(p.Source), termtext.Escape(p.File), p.Line, p.Order)
		for i, d := range p.Decisions {
			act := d.Action
			switch {
			case d.Shadow:
				act = "(after removal: would " + d.Action + ")"
			case d.Action == "drop":
				act = "DROP"
			}
			fmt.Fprintf(w, "  %2d %-14s %-10s %s", i+1, d.Stage, act, d.Rule)
			if d.Value != nil && !d.Shadow {
				fmt.Fprintf(w, " value=%s", fmtAny(d.Value))
			}
			if d.Limit != nil && !d.Shadow {
				fmt.Fprintf(w, " limit=%s", fmtAny(d.Limit))
			}
			if ch := changesText(d.Changes); ch != "" {
				fmt.Fprintf(w, " (%s)", ch)
			}
			for _, k := range sortedKeys(d.Extra) {
				fmt.Fprintf(w, " %s=%s", k, termtext.Escape(fmtAny(d.Extra[k])))
			}
			fmt.Fprintln(w)
			for _, k := range sortedKeys(d.Labels) {
				fmt.Fprintf(w, "       %s = %s\n", k, termtext.Escape(d.Labels[k]))
			}
			for _, m := range d.Metrics {
				v := "null"
				if m.Value != nil {
					v = fmtFloat(*m.Value)
				}
				fmt.Fprintf(w, "       %s = %s", m.Name, v)
				for _, c := range m.Checks {
					verdict := "ok"
					if !c.Pass {
						verdict = "FAIL"
					}
					fmt.Fprintf(w, "   [%s: keep when %s %s: %s]", c.Rule, c.KeepWhen, fmtFloat(c.Limit), verdict)
				}
				fmt.Fprintln(w)
			}
			if d.Note != "" {
				fmt.Fprintf(w, "       %s\n", d.Note)
			}
		}
		switch p.Result.Status {
		case "kept":
			var parts []string
			for _, s := range p.Result.Shards {
				part := fmt.Sprintf("%s line %d", termtext.Escape(s.Path), s.Line)
				if s.ID != p.ID {
					part += " (as " + termtext.Escape(s.ID) + ")"
				}
				parts = append(parts, part)
			}
			fmt.Fprintf(w, "result: kept, written to %s\n", strings.Join(parts, "; "))
		case "removed", "read_error":
			fmt.Fprintf(w, "result: %s\n", termtext.Escape(p.Result.Reason))
		default:
			fmt.Fprintf(w, "result: %s\n", p.Result.Reason)
		}
		if p.CopiesTotal > 0 {
			fmt.Fprintf(w, "copies removed in its favour: %d\n", p.CopiesTotal)
			for _, c := range p.Copies {
				fmt.Fprintf(w, "  %s  source %s, %s %s, similarity %s\n", c.ID, c.Source, c.Stage, c.Rule, fmtFloat(c.Similarity))
			}
			if p.CopiesTotal > len(p.Copies) {
				fmt.Fprintf(w, "  ... and %d more (winnow audit RUN --rule STAGE/RULE lists them all)\n", p.CopiesTotal-len(p.Copies))
			}
		}
	}
	return nil
}

// stepScope returns the stage's `only:` scope, or nil.
func stepScope(st *StepInfo) *stages.Scope {
	if st.Spec == nil {
		return nil
	}
	return st.Spec.Only
}

// inScope reports whether the document of t is inside scope sc of step
// i: its source, and the language the last langid stage before step i
// recorded in its metrics.
func (r *Run) inScope(sc *stages.Scope, t *Trail, i int) bool {
	d := &stages.Doc{Source: t.Source}
	for j := i - 1; j >= 0; j-- {
		if row := t.Steps[j].Row; row != nil && r.Steps[j].Kind == "langid" {
			d.Meta = map[string]any{"lang": row.Labels["lang"]}
			break
		}
	}
	return sc.Match(d)
}
