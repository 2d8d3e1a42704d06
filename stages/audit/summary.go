package audit

import (
	"fmt"
	"math"
	"sort"

	"winnow/stages"
	"winnow/stages/record"
)

// Summary is what `winnow audit` prints: per stage and rule what was
// removed or edited, the flow of documents and tokens, a per-source
// breakdown, the contamination report and the input errors. The JSON
// field names are what `winnow audit --json` prints.
type Summary struct {
	Run         string        `json:"run"`
	Name        string        `json:"name"`
	ToolVersion string        `json:"tool_version"`
	ConfigHash  string        `json:"config_hash"`
	Interrupted bool          `json:"interrupted"`
	Totals      record.Totals `json:"totals"`
	// TokenStage names the stage whose "tokens" metric gives token
	// counts ("" when the run counted no tokens: every token figure is
	// then unknown).
	TokenStage string      `json:"token_stage"`
	Flow       []FlowRow   `json:"flow"`
	Rules      []RuleRow   `json:"rules"`
	Sources    []SourceRow `json:"sources"`
	// LeftOut says, per source, which surviving tokens the output left
	// out and why (the mix cap, a source absent from the mix or with
	// share 0); empty when nothing was.
	LeftOut []string `json:"left_out"`
	// Contamination is OUT/contamination.json when the run has one.
	Contamination *stages.ContamReport `json:"contamination,omitempty"`
	Inputs        []InputRow           `json:"inputs"`
	Errors        []record.RunError    `json:"errors"`
	ErrorCount    int64                `json:"error_count"`
	Histograms    []*Histogram         `json:"histograms,omitempty"`
	Notes         []string             `json:"notes"`
	// UnplacedRecords counts ledger records whose file is not a run
	// input (they are not in any other number).
	UnplacedRecords int64 `json:"unplaced_records,omitempty"`
	// Domain is the scores of every domain stage (domain.go).
	Domain []*DomainSelection `json:"domain,omitempty"`
	// WhatIf is the report's limit sweeps (filled by BuildReport only).
	WhatIf *ReportWhatIf `json:"whatif,omitempty"`
}

// FlowRow is one stage of the document and token flow. Token figures
// count the tokens of whole documents as the token stage measured them;
// when some removed document was never measured (removed before a global
// stage that precedes the token stage) TokensExact is false and the
// figures are lower bounds.
type FlowRow struct {
	Stage   string `json:"stage"`
	Kind    string `json:"kind"`
	DocsIn  int64  `json:"docs_in"`
	DocsOut int64  `json:"docs_out"`
	Dropped int64  `json:"dropped"`
	Edited  int64  `json:"edited"`
	// Skipped counts the documents outside the stage's `only:` scope:
	// in DocsIn and DocsOut, passed untouched and not measured.
	Skipped  int64 `json:"skipped,omitempty"`
	BytesIn  int64 `json:"bytes_in"`
	BytesOut int64 `json:"bytes_out"`
	// TokensIn/TokensOut are the tokens of the documents entering and
	// leaving the stage; TokensRemoved those of the documents it removed.
	TokensIn      int64 `json:"tokens_in"`
	TokensOut     int64 `json:"tokens_out"`
	TokensRemoved int64 `json:"tokens_removed"`
	// TokensUnknown counts removed documents without a token count.
	TokensUnknown int64 `json:"tokens_unknown_docs"`
	TokensExact   bool  `json:"tokens_exact"`
	// TokensKnown is false when the run counted no tokens.
	TokensKnown bool `json:"tokens_known"`
	// Shares of what the stage took in that it removed (see shares.go):
	// documents dropped, bytes dropped or cut by edits, tokens of the
	// dropped documents (null when not counted or not exact).
	DroppedShare float64  `json:"dropped_share"`
	BytesRemoved int64    `json:"bytes_removed"`
	BytesShare   float64  `json:"bytes_share"`
	TokensShare  *float64 `json:"tokens_share"`
}

// RuleRow is one (stage, rule, action) of the audit table.
type RuleRow struct {
	Stage  string `json:"stage"`
	Kind   string `json:"kind"`
	Rule   string `json:"rule"`
	Action string `json:"action"`
	Docs   int64  `json:"docs"`
	// Bytes removed: for drops the size of the removed documents as they
	// entered the stage; for edits the bytes the edit took out (net).
	// BytesExact is false when part of it is estimated from an earlier
	// stage's measurement; BytesKnown false when nothing is known.
	Bytes      int64 `json:"bytes"`
	BytesExact bool  `json:"bytes_exact"`
	BytesKnown bool  `json:"bytes_known"`
	// Tokens of the removed documents (drops only), from the token
	// stage's measurement; TokensDocs is how many of Docs had one.
	Tokens     int64 `json:"tokens"`
	TokensDocs int64 `json:"tokens_docs"`
	// Share is Docs over the stage's documents in.
	Share float64 `json:"share"`
	// BytesShare is Bytes over the bytes the stage took in (null when the
	// bytes are not known); TokensShare is Tokens over the tokens of the
	// documents the stage took in, null ("not counted") unless the run
	// counted tokens and every removed document had a count: always for
	// edits, whose removed text is never tokenized. See shares.go.
	BytesShare  *float64         `json:"bytes_share"`
	TokensShare *float64         `json:"tokens_share"`
	Changes     map[string]int64 `json:"changes,omitempty"`
	Samples     []string         `json:"samples"`
	// BySource counts Docs per source.
	BySource map[string]int64 `json:"by_source"`

	bytesEst int64 // documents whose bytes were estimated or unknown
	bytesUnk int64
	bytesRec int64 // documents whose ledger record says its bytes
	step     int
}

// Label is "stage/rule".
func (r *RuleRow) Label() string { return r.Stage + "/" + r.Rule }

// TokensKnownAll reports whether every removed document had a token count.
func (r *RuleRow) TokensKnownAll() bool {
	return r.Action == "drop" && r.TokensDocs == r.Docs && r.Docs > 0
}

// SourceRow is one source's flow.
type SourceRow struct {
	Source string `json:"source"`
	// DocsRead are the documents read (records that parsed).
	DocsRead int64 `json:"docs_read"`
	// ReadErrors are records of the source that could not be read.
	ReadErrors int64 `json:"read_errors"`
	// Removed counts removed documents by stage, in stage order.
	Removed []StageCount `json:"removed"`
	// ToOutput are the documents that reached the output writer.
	ToOutput int64 `json:"to_output"`
	// TokensToOutput are their tokens (when counted).
	TokensToOutput int64 `json:"tokens_to_output"`
	TokensRemoved  int64 `json:"tokens_removed"`
	// OutputDocs/OutputTokens are what the shards hold (after mixing and
	// splitting), from the manifest; -1 when the manifest does not say.
	OutputDocs   int64 `json:"output_docs"`
	OutputTokens int64 `json:"output_tokens"`
}

// StageCount is a number of documents at one stage.
type StageCount struct {
	Stage string `json:"stage"`
	Docs  int64  `json:"docs"`
}

// InputRow is one input file and whether it can still be read.
type InputRow struct {
	Path   string `json:"path"`
	Source string `json:"source"`
	Docs   int64  `json:"docs"`
	Issues int64  `json:"issues"`
	// Status is "ok", "missing", "changed" or "stdin".
	Status string `json:"status"`
	// Complete is false when the file could not be read to its end.
	Complete bool `json:"complete"`
}

// SummaryOptions tune Summarize.
type SummaryOptions struct {
	// Samples is the number of sample ids kept per rule.
	Samples int
	// Histograms also bins every metric (one extra pass over the
	// metrics files).
	Histograms bool
	// DomainDocs highest and lowest scoring documents are kept per
	// domain stage (default 5); DomainTrails keeps their trails, for
	// showing their text.
	DomainDocs   int
	DomainTrails bool
	// KeepTrails, when > 0, keeps the trails of up to that many removed
	// documents per rule (for showing their text).
	KeepTrails int
}

// Summarize reads the whole run once (twice with histograms).
func Summarize(r *Run, opt SummaryOptions) (*Summary, map[string][]*Trail, error) {
	m := r.Manifest
	s := &Summary{Run: r.Dir, Name: m.Name, ToolVersion: m.ToolVersion, ConfigHash: m.ConfigHash,
		Interrupted: m.Interrupted, Totals: m.Totals, Errors: m.Errors, ErrorCount: m.ErrorCount,
		Contamination: r.Contam, Notes: append([]string(nil), r.Notes...), LeftOut: append([]string{}, m.LeftOut()...)}
	if s.Errors == nil {
		s.Errors = []record.RunError{}
	}
	tok := r.TokenStep()
	tokIdx := -1
	if tok != nil {
		s.TokenStage = tok.Name
		tokIdx = tok.Index
	}
	for _, in := range r.Inputs {
		s.Inputs = append(s.Inputs, InputRow{Path: in.InputSummary.Path, Source: in.Source, Docs: in.Docs, Issues: in.Issues,
			Status: in.Status, Complete: in.Complete})
	}

	var hs *histSet
	if opt.Histograms {
		var err error
		if hs, err = newHistSet(r); err != nil {
			return nil, nil, err
		}
	}

	ds := newDomainSet(r, opt.DomainDocs, opt.DomainTrails)
	rows := map[string]*RuleRow{}
	var order []string
	ruleRow := func(step int, stage, kind, rule, action string) *RuleRow {
		key := stage + "\x00" + rule + "\x00" + action
		rr := rows[key]
		if rr == nil {
			rr = &RuleRow{Stage: stage, Kind: kind, Rule: rule, Action: action, Samples: []string{}, BySource: map[string]int64{}, step: step}
			rows[key] = rr
			order = append(order, key)
		}
		return rr
	}
	type srcAcc struct {
		readErr  int64
		removed  []int64
		tokOut   int64
		tokRem   int64
		toOutput int64
	}
	srcs := map[string]*srcAcc{}
	src := func(name string) *srcAcc {
		a := srcs[name]
		if a == nil {
			a = &srcAcc{removed: make([]int64, len(r.Steps))}
			srcs[name] = a
		}
		return a
	}
	stepTokRemoved := make([]int64, len(r.Steps))
	stepTokUnknown := make([]int64, len(r.Steps))
	var sinkTokens int64
	trails := map[string][]*Trail{}

	tokensOf := func(t *Trail) (int64, bool) {
		if tokIdx < 0 {
			return 0, false
		}
		row := t.Steps[tokIdx].Row
		if row == nil || len(row.Values) == 0 {
			return 0, false
		}
		v := row.Values[0]
		if math.IsNaN(v) {
			return 0, false
		}
		return int64(v), true
	}

	stats, err := r.Walk(func(t *Trail) error {
		if hs != nil {
			hs.add(t)
		}
		ds.add(t)
		step, _ := t.Removal()
		for i := range t.Read {
			rc := &t.Read[i]
			rr := ruleRow(-1, "read", "read", rc.Rule, rc.Action)
			rr.Docs++
			rr.BySource[rc.Source]++
			if v, ok := rc.Value.(float64); ok {
				rr.Bytes += int64(v)
			} else {
				rr.bytesUnk++
			}
			addSample(rr, rc.Doc, opt.Samples)
			if rc.Action == "drop" {
				src(rc.Source).readErr++
			}
		}
		if step == -2 {
			return nil
		}
		toks, tokOK := tokensOf(t)
		for i, st := range r.Steps {
			for j := range t.Steps[i].Recs {
				rc := &t.Steps[i].Recs[j]
				rr := ruleRow(i, st.Name, st.Kind, rc.Rule, rc.Action)
				rr.Docs++
				rr.BySource[rc.Source]++
				for k, v := range rc.Changes {
					if rr.Changes == nil {
						rr.Changes = map[string]int64{}
					}
					rr.Changes[k] += v
				}
				if rc.HasBytes && (rc.Action == "drop" || rc.Action == "edit") {
					rr.Bytes += rc.Bytes
					rr.bytesRec++
				} else if rc.Action == "drop" {
					if b, exact := t.BytesAt(i); b > 0 || exact {
						rr.Bytes += b
						if !exact {
							rr.bytesEst++
						}
					} else {
						rr.bytesUnk++
					}
				}
				if rc.Action == "drop" {
					if tokOK {
						rr.Tokens += toks
						rr.TokensDocs++
						stepTokRemoved[i] += toks
					} else {
						stepTokUnknown[i]++
					}
				}
				if opt.KeepTrails > 0 && len(trails[rr.Label()]) < opt.KeepTrails && (rc.Action == "drop" || rc.Action == "edit") {
					trails[rr.Label()] = append(trails[rr.Label()], t.Clone())
				}
				addSample(rr, rc.Doc, opt.Samples)
			}
		}
		for i := range t.Other {
			rc := &t.Other[i]
			rr := ruleRow(len(r.Steps), rc.Stage, rc.Stage, rc.Rule, rc.Action)
			rr.Docs++
			rr.BySource[rc.Source]++
			rr.bytesUnk++
			for k, v := range rc.Changes {
				if rr.Changes == nil {
					rr.Changes = map[string]int64{}
				}
				rr.Changes[k] += v
			}
			addSample(rr, rc.Doc, opt.Samples)
		}
		a := src(t.Source)
		if step >= 0 {
			a.removed[step]++
			if tokOK {
				a.tokRem += toks
			}
		} else if tokOK {
			a.tokOut += toks
			sinkTokens += toks
		}
		return nil
	})
	if err != nil {
		return nil, nil, err
	}
	s.UnplacedRecords = stats.Unplaced
	if stats.Unplaced > 0 {
		s.Notes = append(s.Notes, fmt.Sprintf("%d ledger record(s) name a file that is not among the run's inputs and are not counted", stats.Unplaced))
	}

	// Rules in stage order (read first, then steps, then the sink),
	// within a stage by documents.
	for _, k := range order {
		s.Rules = append(s.Rules, *rows[k])
	}
	sort.SliceStable(s.Rules, func(i, j int) bool {
		a, b := &s.Rules[i], &s.Rules[j]
		if a.step != b.step {
			return a.step < b.step
		}
		if a.Docs != b.Docs {
			return a.Docs > b.Docs
		}
		if a.Rule != b.Rule {
			return a.Rule < b.Rule
		}
		return a.Action < b.Action
	})
	s.fixBytes(r)
	for i := range s.Rules {
		rr := &s.Rules[i]
		in := int64(0)
		if rr.step == -1 {
			in = r.readCounters().DocsIn
			if rr.Action == "skip" {
				// Skipped records never became documents: their share is
				// of all records that could have.
				for _, n := range r.Manifest.ReadSkips {
					in += n
				}
			}
		} else if rr.step < len(r.Steps) {
			in = r.Steps[rr.step].Counters.DocsIn
		} else {
			in = r.writeCounters().DocsIn
		}
		if in > 0 {
			rr.Share = float64(rr.Docs) / float64(in)
		}
	}

	// Flow: tokens after stage i are the tokens reaching the writer plus
	// those removed later.
	rd, wr := r.readCounters(), r.writeCounters()
	known := tokIdx >= 0
	after := make([]int64, len(r.Steps)+1)
	exactAfter := make([]bool, len(r.Steps)+1)
	after[len(r.Steps)] = sinkTokens
	exactAfter[len(r.Steps)] = true
	for i := len(r.Steps) - 1; i >= 0; i-- {
		after[i] = after[i+1] + stepTokRemoved[i]
		exactAfter[i] = exactAfter[i+1] && stepTokUnknown[i] == 0
	}
	first := after[0]
	firstExact := exactAfter[0]
	s.Flow = append(s.Flow, FlowRow{Stage: "read", Kind: "read", DocsIn: rd.DocsIn, DocsOut: rd.DocsOut, Dropped: rd.Dropped,
		Edited: rd.Edited, BytesIn: rd.BytesIn, BytesOut: rd.BytesOut, TokensIn: first, TokensOut: first,
		TokensExact: firstExact, TokensKnown: known})
	for i, st := range r.Steps {
		c := st.Counters
		s.Flow = append(s.Flow, FlowRow{Stage: st.Name, Kind: st.Kind, DocsIn: c.DocsIn, DocsOut: c.DocsOut, Dropped: c.Dropped,
			Edited: c.Edited, Skipped: c.Skipped, BytesIn: c.BytesIn, BytesOut: c.BytesOut, TokensIn: after[i], TokensOut: after[i+1],
			TokensRemoved: stepTokRemoved[i], TokensUnknown: stepTokUnknown[i], TokensExact: exactAfter[i], TokensKnown: known})
	}
	wTokOut := wr.TokensOut
	s.Flow = append(s.Flow, FlowRow{Stage: "write", Kind: "write", DocsIn: wr.DocsIn, DocsOut: wr.DocsOut, Dropped: wr.Dropped,
		Edited: wr.Edited, BytesIn: wr.BytesIn,
		BytesOut: wr.BytesOut, TokensIn: sinkTokens, TokensOut: wTokOut, TokensExact: true, TokensKnown: known})

	// Sources in input order of first appearance.
	var names []string
	seen := map[string]bool{}
	docsRead := map[string]int64{}
	for _, in := range m.Inputs {
		if !seen[in.Source] {
			seen[in.Source] = true
			names = append(names, in.Source)
		}
		docsRead[in.Source] += in.Docs
	}
	var extra []string
	for k := range srcs {
		if !seen[k] {
			extra = append(extra, k)
		}
	}
	sort.Strings(extra)
	names = append(names, extra...)
	outDocs, outToks, haveOut := map[string]int64{}, map[string]int64{}, false
	for _, f := range m.Outputs {
		if f.SourceDocs != nil {
			haveOut = true
		}
		for k, v := range f.SourceDocs {
			outDocs[k] += v
		}
		for k, v := range f.Source {
			outToks[k] += v
		}
	}
	for _, name := range names {
		a := src(name)
		row := SourceRow{Source: name, DocsRead: docsRead[name], ReadErrors: a.readErr, TokensToOutput: a.tokOut,
			TokensRemoved: a.tokRem, OutputDocs: -1, OutputTokens: -1}
		removed := int64(0)
		for i, st := range r.Steps {
			if a.removed[i] > 0 {
				row.Removed = append(row.Removed, StageCount{Stage: st.Name, Docs: a.removed[i]})
				removed += a.removed[i]
			}
		}
		if row.Removed == nil {
			row.Removed = []StageCount{}
		}
		row.ToOutput = row.DocsRead - removed
		if haveOut {
			row.OutputDocs, row.OutputTokens = outDocs[name], outToks[name]
		}
		s.Sources = append(s.Sources, row)
	}
	if !known {
		s.Notes = append(s.Notes, "the run counted no tokens (no output.tokenizer): token figures are n/a")
	} else if !firstExact {
		s.Notes = append(s.Notes, "some removed documents were removed before a global stage and never reached the token stage: token figures marked ≥ are lower bounds")
	}
	s.fillShares(r)
	if hs != nil {
		s.Histograms = hs.finish()
	}
	s.Domain = ds.finish()
	return s, trails, nil
}

func addSample(rr *RuleRow, id string, n int) {
	if len(rr.Samples) < n {
		rr.Samples = append(rr.Samples, id)
	}
}

// fixBytes makes byte figures exact where the manifest's counters allow:
// a stage's bytes in minus bytes out is what its drops and edits took
// out, so a stage's only unexact rule gets the remainder.
func (s *Summary) fixBytes(r *Run) {
	byStep := map[int][]*RuleRow{}
	for i := range s.Rules {
		rr := &s.Rules[i]
		byStep[rr.step] = append(byStep[rr.step], rr)
		rr.BytesExact = rr.bytesEst == 0 && rr.bytesUnk == 0 && (rr.Action == "drop" || rr.bytesRec == rr.Docs)
		rr.BytesKnown = rr.bytesUnk < rr.Docs && rr.Action == "drop" || rr.bytesRec == rr.Docs
		if rr.step == -1 {
			rr.BytesExact = rr.bytesUnk == 0
			rr.BytesKnown = rr.bytesUnk < rr.Docs
		}
	}
	for i, st := range r.Steps {
		rs := byStep[i]
		total := st.Counters.BytesIn - st.Counters.BytesOut
		var known int64
		var open []*RuleRow
		for _, rr := range rs {
			if rr.BytesExact {
				known += rr.Bytes
			} else {
				open = append(open, rr)
			}
		}
		if len(open) == 1 {
			open[0].Bytes = total - known
			open[0].BytesExact, open[0].BytesKnown = true, true
		}
	}
}

func (r *Run) readCounters() *record.Counters {
	if len(r.Manifest.Stages) > 0 && r.Manifest.Stages[0].Name == "read" {
		return r.Manifest.Stages[0]
	}
	return &record.Counters{Name: "read", Kind: "read"}
}

func (r *Run) writeCounters() *record.Counters {
	if n := len(r.Manifest.Stages); n > 0 && r.Manifest.Stages[n-1].Name == "write" {
		return r.Manifest.Stages[n-1]
	}
	return &record.Counters{Name: "write", Kind: "write"}
}
