package run

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"winnow/stages"
	"winnow/stages/read"
)

// CheckContamination over the multiple-choice set DuckDB wrote as Parquet
// (testdata/evalsets, questions from the npm package's docs): the document
// quoting a 15-word question is found (13-gram overlap, Brown et al. 2020,
// appendix C, from memory), the JSON handed back is contamination.json as
// kept in Out and agrees with the stage's report, and a broken input line
// is counted, not fatal.
func TestCheckContamination(t *testing.T) {
	dir := t.TempDir()
	docs := `{"id":"d1","text":"From the manual: Create a new user in the specified registry, and save the credentials to the .npmrc file. Done."}
{"id":"d2","text":"Enables tab-completion in all npm commands."}
{"id":"d3","text":
`
	if err := os.WriteFile(filepath.Join(dir, "docs.jsonl"), []byte(docs), 0o644); err != nil {
		t.Fatal(err)
	}
	set, err := stages.LoadEvalSet(stages.EvalSpec{Name: "npm", Paths: []string{"../../testdata/evalsets/npm-mc.parquet"},
		Fields: []string{"question", "choices[label]"}, IDField: "id", Format: "auto"})
	if err != nil {
		t.Fatal(err)
	}
	cfg := stages.DefaultDecontamConfig()
	cfg.Ngram, cfg.Action, cfg.MinItemWords = 13, "flag", 8
	d, err := stages.NewDecontaminate("decontaminate", cfg, []*stages.EvalSet{set})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	res, err := CheckContamination(context.Background(), []string{filepath.Join(dir, "docs.jsonl")}, d, ContamOptions{
		Read: read.ReadOptions{Source: "t", Format: "auto", TextField: "text", IDField: "id"}, Workers: 1, Out: out, JSON: true})
	if err != nil {
		t.Fatal(err)
	}
	kept, err := os.ReadFile(filepath.Join(out, "contamination.json"))
	if err != nil || !bytes.Equal(kept, res.JSON) {
		t.Fatalf("JSON differs from the kept contamination.json (%v)", err)
	}
	var r stages.ContamReport
	if err := json.Unmarshal(res.JSON, &r); err != nil {
		t.Fatal(err)
	}
	e := r.Evals[0]
	if len(e.Contaminated) != 1 || e.Contaminated[0].Item != "npm-q02" || !slices.Equal(e.Contaminated[0].Docs, []string{"d1"}) {
		t.Errorf("report %+v", e)
	}
	if got := d.Report().Evals[0].Contaminated; len(got) != 1 || got[0].Item != "npm-q02" {
		t.Errorf("stage report %+v", got)
	}
	if res.Interrupted || res.InternalErrors != 0 || res.FatalInputs != 0 || res.ErrCount != 1 {
		t.Errorf("result %+v, want one skipped record", res)
	}
}
