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
