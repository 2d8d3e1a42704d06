package audit

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"

	"winnow/dedup"
	"winnow/stages"
	"winnow/stages/read"
)

// Sample is one removed (or edited) document with the reason, the text
// the stage saw when it can be recovered, and the offending part marked.
type Sample struct {
	ID     string `json:"id"`
	Source string `json:"source"`
	File   string `json:"file"`
	Line   int64  `json:"line"`
	Stage  string `json:"stage"`
	Rule   string `json:"rule"`
	Action string `json:"action"`
	Value  any    `json:"value,omitempty"`
	Limit  any    `json:"limit,omitempty"`
	// Reason is the decision in words.
	Reason  string             `json:"reason"`
	Extra   map[string]any     `json:"extra,omitempty"`
	Metrics map[string]float64 `json:"metrics,omitempty"`
	// Text is the document as the stage saw it ("" when unavailable);
	// TextNote says where it came from or why it is missing.
	Text     string `json:"text,omitempty"`
	TextNote string `json:"text_note"`
	// Marks are the offending parts; MarkNote says what they are.
	Marks    []Span `json:"marks"`
	MarkNote string `json:"mark_note,omitempty"`
	// Twin is the kept document of a duplicate.
	Twin *Twin `json:"twin,omitempty"`
}

// Twin is the document a duplicate was removed in favour of.
type Twin struct {
	ID string `json:"id"`
	// Similarity is the one the ledger recorded (estimated Jaccard for
	// near duplicates); Jaccard the exact word n-gram Jaccard computed
	// here on the recovered texts (-1 when a text is missing).
	Similarity float64 `json:"similarity"`
	Jaccard    float64 `json:"jaccard"`
	Text       string  `json:"text,omitempty"`
	TextNote   string  `json:"text_note"`
}

// SampleSet is the answer to `winnow audit RUN --rule R --samples N`.
type SampleSet struct {
	Rule string `json:"rule"`
	// Matched counts the run's decisions of the rule (all of them; only
	// the first Samples are shown).
	Matched int64     `json:"matched"`
	Samples []*Sample `json:"samples"`
	Notes   []string  `json:"notes"`
}

// pick is a chosen decision: trail, step (-1 for read) and record.
type pick struct {
	t    *Trail
	step int
	rec  Record
}

// matchRule reports whether "RULE", "STAGE/RULE" or "STAGE.RULE" names
// the decision (stage by name or kind).
func matchRule(spec, stage, kind, rule string) bool {
	if spec == rule {
		return true
	}
	for _, sep := range []string{"/", "."} {
		if st, ru, ok := strings.Cut(spec, sep); ok && ru == rule && (st == stage || st == kind) {
			return true
		}
	}
	return false
}

// RuleSamples finds the first n documents a rule removed or edited, in
// input order, and recovers their text.
func RuleSamples(r *Run, rule string, n int) (*SampleSet, error) {
	set := &SampleSet{Rule: rule, Samples: []*Sample{}, Notes: []string{}}
	var picks []pick
	labels := map[string]bool{}
	_, err := r.Walk(func(t *Trail) error {
		var cl *Trail
		take := func(step int, rc *Record) {
			set.Matched++
			if len(picks) < n {
				if cl == nil {
					cl = t.Clone()
				}
				picks = append(picks, pick{t: cl, step: step, rec: *rc})
			}
		}
		for i := range t.Read {
			labels["read/"+t.Read[i].Rule] = true
			if matchRule(rule, "read", "read", t.Read[i].Rule) {
				take(-1, &t.Read[i])
			}
		}
		for i, st := range r.Steps {
			for j := range t.Steps[i].Recs {
				rc := &t.Steps[i].Recs[j]
				labels[st.Name+"/"+rc.Rule] = true
				if matchRule(rule, st.Name, st.Kind, rc.Rule) {
					take(i, rc)
				}
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if set.Matched == 0 {
		known := sortedKeys(labels)
		if len(known) == 0 {
			return nil, fmt.Errorf("rule %q: the run removed and edited nothing", rule)
		}
		return nil, fmt.Errorf("rule %q removed or edited nothing in this run (rules with decisions: %s)", rule, strings.Join(known, ", "))
	}
	set.Samples = r.buildSamples(picks, &set.Notes)
	return set, nil
}

// fetched is a document's text re-read from its input.
type fetched struct {
	text string
	ok   bool
	note string
}

// fetchTexts re-reads the documents of trails from the run's inputs (the
// readers are the run's own, so ids, lines and UTF-8 repair match). One
// sequential read per input file, stopping after the last wanted line.
func (r *Run) fetchTexts(trails []*Trail) map[stages.OrderKey]fetched {
	out := map[stages.OrderKey]fetched{}
	byInput := map[int][]*Trail{}
	for _, t := range trails {
		byInput[t.Order.Input()] = append(byInput[t.Order.Input()], t)
	}
	for _, idx := range sortedKeys(byInput) {
		ts := byInput[idx]
		fail := func(note string) {
			for _, t := range ts {
				out[t.Order] = fetched{note: note}
			}
		}
		if idx < 0 || idx >= len(r.Inputs) {
			fail("the document's input is not in the manifest")
			continue
		}
		in := r.Inputs[idx]
		switch in.Status {
		case "missing":
			fail(fmt.Sprintf("input %s is gone (looked for %s; pass --spec-dir if the run's spec directory moved): the text cannot be shown", in.InputSummary.Path, in.Path))
			continue
		case "changed":
			fail(fmt.Sprintf("input %s changed size since the run: the text cannot be shown reliably", in.InputSummary.Path))
			continue
		case "stdin":
			fail("the document came from standard input: its text cannot be read again")
			continue
		}
		if in.Format == read.FormatParquet {
			fail(fmt.Sprintf("input %s is Parquet: re-reading single rows is not supported by audit", in.InputSummary.Path))
			continue
		}
		want := map[int64]*Trail{}
		var last int64
		for _, t := range ts {
			want[t.Order.Record()] = t
			last = max(last, t.Order.Record())
		}
		err := readRecords(in, idx, last, func(d *stages.Doc) {
			t := want[d.Line]
			if t == nil {
				return
			}
			if d.ID != t.ID {
				out[t.Order] = fetched{note: fmt.Sprintf("the record at %s:%d now has id %s, not %s: the input changed since the run", in.InputSummary.Path, d.Line, d.ID, t.ID)}
				return
			}
			out[t.Order] = fetched{text: d.Text, ok: true, note: fmt.Sprintf("re-read from %s:%d", in.InputSummary.Path, d.Line)}
		})
		for _, t := range ts {
			if _, done := out[t.Order]; done {
				continue
			}
			note := fmt.Sprintf("record %s:%d not found in the input", in.InputSummary.Path, t.Order.Record())
			if err != nil {
				note += fmt.Sprintf(" (%v)", err)
			}
			out[t.Order] = fetched{note: note}
		}
	}
	return out
}

// readRecords reads one input with the run's readers up to record last.
func readRecords(in InputState, idx int, last int64, fn func(d *stages.Doc)) error {
	f, err := read.OpenFile(in.Path)
	if err != nil {
		return err
	}
	defer f.Close()
	dec, err := read.Decode(f)
	if err != nil {
		return err
	}
	defer dec.Close()
	rr, _, err := read.NewRecordReader(dec, in.InputSummary.Path, idx, in.Options)
	if err != nil {
		return err
	}
	for {
		rec, err := rr.Next()
		if rec.Doc != nil {
			fn(stages.DocFromRead(rec.Doc))
			if rec.Doc.Line >= last {
				return nil
			}
		}
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

type replayEntry struct {
	b   Built
	err error
}

// fullStage returns a step built for running (not checking), cached.
func (r *Run) fullStage(st *StepInfo) (Built, error) {
	if r.replays == nil {
		r.replays = map[string]replayEntry{}
	}
	if e, ok := r.replays[st.Name]; ok {
		return e.b, e.err
	}
	b, err := r.BuildStep(st, nil, false)
	r.replays[st.Name] = replayEntry{b, err}
	return b, err
}

// replayStage returns a per-document step built for running.
func (r *Run) replayStage(st *StepInfo) (Built, error) {
	b, err := r.fullStage(st)
	if err == nil && b.Stage == nil {
		err = fmt.Errorf("stage %s is a global stage: its edits depend on the whole run", st.Name)
	}
	return b, err
}

// textAt turns a document's input text into the text step k saw, by
// replaying the edits earlier stages made to it (their ledger records say
// which). It returns the text and a note on what was replayed.
func (r *Run) textAt(t *Trail, k int, text string) (string, string) {
	var notes []string
	d := &stages.Doc{ID: t.ID, Text: text, Source: t.Source, File: t.File, Line: t.Line, Order: t.Order}
	for j := 0; j < k && j < len(r.Steps); j++ {
		edited := false
		for _, rc := range t.Steps[j].Recs {
			if rc.Action == "edit" {
				edited = true
			}
		}
		if !edited {
			continue
		}
		st := r.Steps[j]
		b, err := r.replayStage(st)
		if err != nil {
			notes = append(notes, fmt.Sprintf("%s edited it before (not replayed: %v)", st.Name, err))
			continue
		}
		dec := b.Stage.Process(d)
		if dec.Action != stages.Edit {
			notes = append(notes, fmt.Sprintf("%s edited it in the run but not on replay", st.Name))
			continue
		}
		d.Text = dec.Text
		notes = append(notes, "edit of "+st.Name+" replayed")
	}
	return d.Text, strings.Join(notes, "; ")
}

// buildSamples recovers text, twins and marks for picked decisions.
func (r *Run) buildSamples(picks []pick, notes *[]string) []*Sample {
	var trails []*Trail
	for _, p := range picks {
		trails = append(trails, p.t)
	}
	texts := r.fetchTexts(trails)
	// Twins of duplicates, found by a second walk.
	twinIDs := map[string]bool{}
	for _, p := range picks {
		if of := p.rec.ExtraString("of"); of != "" && p.rec.ExtraString("against") == "" {
			twinIDs[of] = true
		}
	}
	twins := map[string]*Trail{}
	if len(twinIDs) > 0 {
		r.Walk(func(t *Trail) error {
			if twinIDs[t.ID] && twins[t.ID] == nil {
				twins[t.ID] = t.Clone()
			}
			return nil
		})
		var tt []*Trail
		for _, id := range sortedKeys(twins) {
			tt = append(tt, twins[id])
		}
		for k, v := range r.fetchTexts(tt) {
			texts[k] = v
		}
	}
	var out []*Sample
	for _, p := range picks {
		out = append(out, r.sample(p, texts, twins))
	}
	return out
}

func (r *Run) sample(p pick, texts map[stages.OrderKey]fetched, twins map[string]*Trail) *Sample {
	rc := p.rec
	file, line := r.Location(p.t)
	s := &Sample{ID: p.t.ID, Source: p.t.Source, File: file, Line: line, Stage: rc.Stage, Rule: rc.Rule, Action: rc.Action,
		Value: rc.Value, Limit: rc.Limit, Extra: rc.Extra, Marks: []Span{}}
	if s.ID == "" {
		s.ID = rc.Doc
	}
	var st *StepInfo
	if p.step >= 0 {
		st = r.Steps[p.step]
		if row := p.t.Steps[p.step].Row; row != nil {
			s.Metrics = map[string]float64{}
			for i, n := range st.MetricNames {
				if i < len(row.Values) && !math.IsNaN(row.Values[i]) {
					s.Metrics[n] = row.Values[i]
				}
			}
		}
	}
	s.Reason = r.reason(st, &rc)
	if p.step < 0 {
		s.TextNote = "a read error: the record never became a document"
		if msg := rc.ExtraString("message"); msg != "" {
			s.TextNote += " (" + msg + ")"
		}
		return s
	}
	f := texts[p.t.Order]
	if !f.ok {
		s.TextNote = f.note
		if of := rc.ExtraString("of"); of != "" {
			s.Twin = &Twin{ID: of, Similarity: floatOf(rc.Extra["similarity"], 1), Jaccard: -1, TextNote: "not recovered"}
		}
		return s
	}
	text, replayNote := r.textAt(p.t, p.step, f.text)
	s.Text = text
	s.TextNote = f.note
	if replayNote != "" {
		s.TextNote += "; " + replayNote
	}
	desc := rc.Rule
	if rules, err := r.StepRules(st); err == nil {
		for _, ru := range rules {
			if ru.Name == rc.Rule {
				desc += " " + ru.Metric + " " + ru.Key
			}
		}
	}
	switch {
	case rc.Action == "edit":
		b, err := r.replayStage(st)
		if err != nil {
			s.MarkNote = fmt.Sprintf("the edit cannot be replayed to show what changed: %v", err)
			break
		}
		d := &stages.Doc{ID: s.ID, Text: text, Source: s.Source, File: p.t.File, Line: p.t.Line, Order: p.t.Order}
		dec := b.Stage.Process(d)
		if dec.Action != stages.Edit {
			s.MarkNote = "the edit did not happen again on replay"
			break
		}
		s.Marks = lineDiff(text, dec.Text)
		s.MarkNote = "lines the edit removed or changed"
		if len(s.Marks) == 0 {
			s.MarkNote = "the edit changed no whole line (" + changesText(rc.Changes) + ")"
		}
	case rc.ExtraString("of") != "":
		s.Twin = r.twin(p, texts, twins)
		if s.Twin.Text != "" {
			n := configInt(st, "ngram", 5)
			j, marks := shingleDiff(text, s.Twin.Text, n)
			s.Twin.Jaccard = roundTo(j, 4)
			s.Marks = marks
			s.MarkNote = fmt.Sprintf("words not shared with the kept twin %s (word %d-grams)", s.Twin.ID, n)
		}
	case rc.ExtraString("eval") != "" || st.Kind == "decontaminate":
		s.Marks, s.MarkNote = r.contamMarks(st, &rc, text)
	default:
		s.Marks, s.MarkNote = markRule(desc, text)
	}
	if s.Marks == nil {
		s.Marks = []Span{}
	} else {
		s.Marks = mergeSpans(s.Marks)
	}
	if s.MarkNote == "" && len(s.Marks) == 0 {
		s.MarkNote = "the rule measures the document as a whole: nothing to mark"
	}
	return s
}

func (r *Run) twin(p pick, texts map[stages.OrderKey]fetched, twins map[string]*Trail) *Twin {
	rc := p.rec
	tw := &Twin{ID: rc.ExtraString("of"), Similarity: floatOf(rc.Extra["similarity"], 1), Jaccard: -1}
	if prev := rc.ExtraString("against"); prev != "" {
		tw.TextNote = "the twin is in the earlier run " + prev
		return tw
	}
	tt := twins[tw.ID]
	if tt == nil {
		tw.TextNote = "the twin left no record in this run (no metrics or ledger rows)"
		return tw
	}
	f := texts[tt.Order]
	if !f.ok {
		tw.TextNote = f.note
		return tw
	}
	text, note := r.textAt(tt, p.step, f.text)
	tw.Text = text
	tw.TextNote = f.note
	if note != "" {
		tw.TextNote += "; " + note
	}
	return tw
}

// contamMarks marks the eval n-grams a contaminated document matched:
// with the stage's own index when its eval sets can be loaded, else from
// the matched text in contamination.json.
func (r *Run) contamMarks(st *StepInfo, rc *Record, text string) ([]Span, string) {
	label := rc.ExtraString("eval") + "/" + rc.ExtraString("item")
	type indexer interface{ Index() *dedup.ContamIndex }
	var idx *dedup.ContamIndex
	b, err := r.fullStage(st)
	if err == nil {
		if x, ok := b.Global.(indexer); ok {
			idx = x.Index()
		} else if x, ok := b.Stage.(indexer); ok {
			idx = x.Index()
		} else {
			err = fmt.Errorf("stage %s has no n-gram index", st.Name)
		}
	}
	if idx != nil {
		sc := idx.NewScanner()
		var spans []Span
		for _, h := range sc.Scan(text, nil) {
			a, e := sc.ByteSpan(h.Start, h.End)
			spans = append(spans, Span{Start: a, End: e, Label: label})
		}
		return spans, fmt.Sprintf("text matching eval n-grams (%s and any other item)", label)
	}
	if r.Contam != nil {
		for _, ev := range r.Contam.Evals {
			if ev.Name != rc.ExtraString("eval") {
				continue
			}
			for _, it := range ev.Contaminated {
				if it.Item == rc.ExtraString("item") {
					n := r.Contam.Ngram
					return markExcerpt(text, it.Text, n), fmt.Sprintf("text matching the excerpt of %s in contamination.json (the eval set could not be loaded: %v)", label, err)
				}
			}
		}
	}
	return nil, fmt.Sprintf("matched %s; the eval set could not be loaded to mark the n-grams (%v)", label, err)
}

// reason describes a decision in words.
func (r *Run) reason(st *StepInfo, rc *Record) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s %s by %s", rc.Stage, actionPast(rc.Action), rc.Rule)
	var rule *stages.Rule
	if st != nil {
		if rules, err := r.StepRules(st); err == nil {
			for i := range rules {
				if rules[i].Name == rc.Rule {
					rule = &rules[i]
					break
				}
			}
		}
	}
	switch {
	case rule != nil && isNumber(rc.Value):
		fmt.Fprintf(&b, ": %s = %s, kept only when %s %s %s", rule.Metric, fmtAny(rc.Value), rule.Metric, rule.Cmp, fmtAny(rc.Limit))
	case rc.Value != nil && rc.Limit != nil:
		fmt.Fprintf(&b, ": value %s, limit %s", fmtAny(rc.Value), fmtAny(rc.Limit))
	case rc.Value != nil:
		fmt.Fprintf(&b, ": value %s", fmtAny(rc.Value))
	}
	if of := rc.ExtraString("of"); of != "" {
		fmt.Fprintf(&b, "; copy of %s", of)
		if sim, ok := rc.Extra["similarity"]; ok {
			fmt.Fprintf(&b, " (similarity %s)", fmtAny(sim))
		}
	}
	if ev := rc.ExtraString("eval"); ev != "" {
		fmt.Fprintf(&b, "; eval %s item %s, %s matched n-gram(s)", ev, rc.ExtraString("item"), fmtAny(rc.Extra["matches"]))
	}
	if msg := rc.ExtraString("message"); msg != "" {
		fmt.Fprintf(&b, "; %s", msg)
	}
	if ch := changesText(rc.Changes); ch != "" {
		fmt.Fprintf(&b, "; changes: %s", ch)
	}
	return b.String()
}

func actionPast(a string) string {
	switch a {
	case "drop":
		return "removed"
	case "edit":
		return "edited"
	}
	return a
}

// fmtAny formats a JSON value compactly.
func fmtAny(v any) string {
	switch x := v.(type) {
	case nil:
		return "null"
	case float64:
		return fmtFloat(x)
	case string:
		return x
	case []any:
		parts := make([]string, len(x))
		for i, e := range x {
			parts[i] = fmtAny(e)
		}
		return "[" + strings.Join(parts, ", ") + "]"
	}
	return fmt.Sprint(v)
}

func fmtFloat(f float64) string {
	if math.IsNaN(f) {
		return "n/a"
	}
	if f == math.Trunc(f) && math.Abs(f) < 1e15 {
		return Group(int64(f))
	}
	return fmt.Sprintf("%.4g", f)
}

func floatOf(v any, def float64) float64 {
	if f, ok := v.(float64); ok {
		return f
	}
	return def
}

func roundTo(f float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(f*p) / p
}

// configInt reads an integer parameter of a step from the manifest's
// config (def when absent).
func configInt(st *StepInfo, key string, def int) int {
	if st == nil || st.Spec == nil {
		return def
	}
	cfg := st.Spec.Params
	if cfg == nil || !cfg.Has(key) {
		return def
	}
	return int(cfg.Int(key, int64(def), math.MinInt32, math.MaxInt32))
}

// Text display limits of WriteText.
const (
	// sampleShowBytes of a sample's text are printed; the window starts a
	// little before the first mark so the offending part is visible.
	sampleShowBytes = 2400
	sampleLeadBytes = 300
)

// Excerpt returns the part of text to show (at most max bytes, starting
// shortly before the first mark), the marks shifted into it, and whether
// it was cut.
func Excerpt(text string, marks []Span, maxBytes int) (string, []Span, bool) {
	if len(text) <= maxBytes {
		return text, marks, false
	}
	start := 0
	if len(marks) > 0 && marks[0].Start > sampleLeadBytes {
		start = marks[0].Start - sampleLeadBytes
		if i := strings.LastIndexByte(text[:start], '\n'); i >= 0 && start-i < sampleLeadBytes {
			start = i + 1
		}
	}
	end := min(len(text), start+maxBytes)
	for end < len(text) && end > start && !utf8Start(text[end]) {
		end--
	}
	for start < end && !utf8Start(text[start]) {
		start++
	}
	var out []Span
	for _, m := range marks {
		if m.End <= start || m.Start >= end {
			continue
		}
		out = append(out, Span{Start: max(m.Start, start) - start, End: min(m.End, end) - start, Label: m.Label})
	}
	return text[start:end], out, true
}

func utf8Start(b byte) bool { return b&0xC0 != 0x80 }

// WriteText prints the samples with marks between [[ and ]].
func (s *SampleSet) WriteText(w io.Writer) error {
	fmt.Fprintf(w, "%s: %s decision(s) in the run; showing %d\n", s.Rule, Group(s.Matched), len(s.Samples))
	for i, sm := range s.Samples {
		fmt.Fprintf(w, "\n[%d] %s (source %s, %s:%d)\n    %s\n", i+1, sm.ID, sm.Source, sm.File, sm.Line, sm.Reason)
		if len(sm.Metrics) > 0 {
			var parts []string
			for _, k := range sortedKeys(sm.Metrics) {
				parts = append(parts, k+"="+fmtFloat(sm.Metrics[k]))
			}
			fmt.Fprintf(w, "    measured: %s\n", strings.Join(parts, " "))
		}
		if sm.Twin != nil {
			fmt.Fprintf(w, "    kept twin: %s (recorded similarity %s", sm.Twin.ID, fmtFloat(sm.Twin.Similarity))
			if sm.Twin.Jaccard >= 0 {
				fmt.Fprintf(w, "; exact word n-gram Jaccard of the texts below %s", fmtFloat(sm.Twin.Jaccard))
			}
			fmt.Fprintln(w, ")")
		}
		fmt.Fprintf(w, "    text: %s\n", sm.TextNote)
		if sm.Text == "" {
			continue
		}
		switch {
		case len(sm.Marks) > 0:
			fmt.Fprintf(w, "    marked [[...]]: %s (%d span(s))\n", sm.MarkNote, len(sm.Marks))
		case sm.MarkNote != "":
			fmt.Fprintf(w, "    %s\n", sm.MarkNote)
		}
		ex, marks, cut := Excerpt(sm.Text, sm.Marks, sampleShowBytes)
		body := Render(ex, marks, "[[", "]]")
		fmt.Fprintln(w, "    ----")
		for _, l := range strings.Split(body, "\n") {
			fmt.Fprintf(w, "    | %s\n", l)
		}
		if cut {
			fmt.Fprintf(w, "    | ... (%s of %s bytes shown)\n", Group(int64(len(ex))), Group(int64(len(sm.Text))))
		}
		if sm.Twin != nil && sm.Twin.Text != "" {
			tex, _, tcut := Excerpt(sm.Twin.Text, nil, sampleShowBytes/2)
			fmt.Fprintf(w, "    ---- kept twin %s (%s)\n", sm.Twin.ID, sm.Twin.TextNote)
			for _, l := range strings.Split(tex, "\n") {
				fmt.Fprintf(w, "    | %s\n", l)
			}
			if tcut {
				fmt.Fprintln(w, "    | ...")
			}
		}
	}
	for _, n := range s.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}

func isNumber(v any) bool {
	_, ok := v.(float64)
	return ok
}
