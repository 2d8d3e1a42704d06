package audit_test

import (
	"bytes"
	"strings"
	"testing"

	"winnow/stages/audit"
)

// TestAuditShowsOnlyScope: with the line rules scoped to the web source,
// audit (text, JSON and the HTML report) says how many documents the stage
// let through outside its scope, the metrics hold rows for web documents
// only, and what-if reproduces the run exactly, moving only web documents
// when the scoped stage's limit changes.
func TestAuditShowsOnlyScope(t *testing.T) {
	run := cachedRun(t, "only", `stages:
  - kind: normalize
  - kind: lines
    only: {sources: [web]}
  - kind: quality
output:
  tokenizer: cl100k_base
`)
	for _, row := range readJSONL(t, run+"/metrics/lines.jsonl.zst") {
		if row["source"] != "web" {
			t.Fatalf("lines measured a %v document", row["source"])
		}
	}
	m := readManifest(t, run)
	lines := manifestStage(t, m, "lines")
	skipped := num(lines["skipped"])
	if skipped == 0 || skipped+int64(len(readJSONL(t, run+"/metrics/lines.jsonl.zst"))) != num(lines["docs_in"]) {
		t.Fatalf("lines: %d skipped, %d in, %d rows", skipped, num(lines["docs_in"]), len(readJSONL(t, run+"/metrics/lines.jsonl.zst")))
	}
	r := openRun(t, run, audit.OpenOptions{})
	sum, _, err := audit.Summarize(r, audit.SummaryOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var text bytes.Buffer
	if err := sum.WriteText(&text); err != nil {
		t.Fatal(err)
	}
	want := "lines: " + audit.Group(skipped) + " of its " + audit.Group(num(lines["docs_in"])) + " documents in were outside its only: scope"
	if !strings.Contains(text.String(), want) {
		t.Errorf("audit text lacks %q", want)
	}
	for _, f := range sum.Flow {
		if f.Stage == "lines" && f.Skipped != skipped || f.Stage != "lines" && f.Skipped != 0 {
			t.Errorf("flow %s: skipped %d", f.Stage, f.Skipped)
		}
	}
	// explain says why a manuals document has no lines measurements
	var manual string
	for _, row := range readJSONL(t, run+"/metrics/quality.jsonl.zst") {
		if row["source"] == "manuals" {
			manual = row["doc"].(string)
			break
		}
	}
	ex := explain(t, r, manual)
	noted := false
	for _, d := range ex.Docs[0].Decisions {
		if d.Stage == "lines" {
			noted = len(d.Metrics) == 0 && strings.Contains(d.Note, "outside its only: scope (sources web)")
		}
	}
	if !noted {
		t.Errorf("explain %s: %+v", manual, ex.Docs[0].Decisions)
	}
	rep, err := audit.BuildReport(r, audit.ReportOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var html bytes.Buffer
	if err := rep.WriteHTML(&html); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(html.String(), `data-k="flow.lines.skipped">`+audit.Group(skipped)+`</span>`) {
		t.Errorf("report lacks the skipped count")
	}
	w := whatIf(t, run, audit.WhatIfOptions{Sets: []string{"lines.fewest_sentences=5"}, Sweeps: []string{"lines.fewest_sentences=1:9:4"}})
	for _, c := range w.Checks {
		if c.Mismatches != 0 {
			t.Errorf("check %s: %d mismatches %v", c.Stage, c.Mismatches, c.Examples)
		}
	}
	if sc := w.Combined; sc.NewlyKept != 0 || sc.NewlyRemoved != 0 || !sc.Exact {
		t.Errorf("at the run's limit: %+v", sc)
	}
	loose := whatIf(t, run, audit.WhatIfOptions{Sets: []string{"lines.fewest_sentences=1"}})
	for _, src := range loose.Combined.Sources {
		if src.Source != "web" && src.DeltaDocs != 0 {
			t.Errorf("source %s changes by %d documents, but the lines stage only applies to web", src.Source, src.DeltaDocs)
		}
	}
}

// TestLangidMetricsHoldLanguage: the langid stage's metrics hold the
// detected "lang" (a text label, not a metric what-if limits) and
// "lang_conf" for every document it saw, removed ones included, and they
// agree with the ledger's value for documents it removed by language.
func TestLangidMetricsHoldLanguage(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	rows := readJSONL(t, run+"/metrics/langid.jsonl.zst")
	m := readManifest(t, run)
	direct := 0
	for _, row := range rows {
		if row["dropped_by"] == nil {
			direct++
		}
	}
	if int64(direct) != num(manifestStage(t, m, "langid")["docs_in"]) || direct == len(rows) {
		t.Fatalf("%d langid rows (%d not removed before) for %d documents in", len(rows), direct, num(manifestStage(t, m, "langid")["docs_in"]))
	}
	langs := map[string]int{}
	for _, row := range rows {
		lang, ok := row["lang"].(string)
		if _, conf := row["lang_conf"].(float64); !ok || lang == "" || !conf {
			t.Fatalf("row without lang or lang_conf: %v", row)
		}
		langs[lang]++
	}
	if langs["en"] == 0 || len(langs) < 3 {
		t.Errorf("languages %v", langs)
	}
	byLedger := map[string]string{}
	for _, rec := range readJSONL(t, run+"/ledger/langid.jsonl.zst") {
		if rec["rule"] == "language" {
			byLedger[rec["doc"].(string)] = rec["value"].(string)
		}
	}
	r := openRun(t, run, audit.OpenOptions{})
	step := -1
	for i, st := range r.Steps {
		if st.Name == "langid" {
			step = i
		}
	}
	seen := 0
	if _, err := r.Walk(func(tr *audit.Trail) error {
		row := tr.Steps[step].Row
		if row == nil {
			return nil
		}
		if want, ok := byLedger[tr.ID]; ok {
			seen++
			if row.Labels["lang"] != want {
				t.Errorf("%s: metrics lang %q, ledger %q", tr.ID, row.Labels["lang"], want)
			}
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	for id, lang := range byLedger {
		ex := explain(t, r, id)
		if got := ex.Docs[0].Decisions[step].Labels["lang"]; got != lang {
			t.Errorf("explain %s: lang %q, want %q", id, got, lang)
		}
		break
	}
	if seen != len(byLedger) || seen == 0 {
		t.Errorf("%d of %d language removals seen", seen, len(byLedger))
	}
	for _, n := range r.Steps[step].MetricNames {
		if n == "lang" {
			t.Errorf("lang read as a metric: %v", r.Steps[step].MetricNames)
		}
	}
}
