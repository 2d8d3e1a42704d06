package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"winnow/stages"
	"winnow/stages/synth"
)

func TestEvalName(t *testing.T) {
	for in, want := range map[string]string{
		"evals/hull-qa.jsonl":     "hull-qa",
		"evals/hull-qa.jsonl.zst": "hull-qa",
		"a/b/items.txt.gz":        "items",
		"plain":                   "plain",
	} {
		if got := evalName(in); got != want {
			t.Errorf("evalName(%q) = %q, want %q", in, got, want)
		}
	}
}

// On a generated corpus (stages/synth truth file), `winnow contam` must
// report every item planted verbatim or re-cased (13-gram overlap, Brown
// et al. 2020, appendix C, from memory) and name the documents.
func TestContamCommandOnSynthCorpus(t *testing.T) {
	dir := t.TempDir()
	truth, err := synth.Generate(synth.Options{Dir: dir, Docs: 600, Seed: 9})
	if err != nil {
		t.Fatal(err)
	}
	f := contamFlags{evals: []string{truth.EvalPath}, fields: []string{"question", "answer"}, idField: "id",
		evalFormat: "auto", ngram: 13, minWords: 8, source: "synth", format: "auto", textField: "text", docID: "id",
		workers: 2, asJSON: true, quiet: true, out: filepath.Join(dir, "out")}
	var out bytes.Buffer
	if err := runContam(context.Background(), f, []string{filepath.Join(dir, "forum"), filepath.Join(dir, "web")}, &out); err != nil {
		t.Fatal(err)
	}
	var r stages.ContamReport
	if err := json.Unmarshal(out.Bytes(), &r); err != nil {
		t.Fatalf("%v: %s", err, out.String())
	}
	found := map[string]map[string]bool{}
	for _, c := range r.Evals[0].Contaminated {
		found[c.Item] = map[string]bool{}
		for _, d := range c.Docs {
			found[c.Item][d] = true
		}
	}
	n := 0
	for _, td := range truth.Docs {
		if td.Leak != synth.LeakVerbatim && td.Leak != synth.LeakRecased {
			continue
		}
		for _, it := range td.EvalItems {
			n++
			if !found[it][td.ID] {
				t.Errorf("%s item %s planted in %s not reported", td.Leak, it, td.ID)
			}
		}
	}
	if n == 0 || r.Evals[0].Name != "hull-qa" || r.DocsScanned == 0 {
		t.Errorf("nothing planted or scanned: %d plants, report %+v", n, r)
	}
	var table bytes.Buffer
	if err := stages.PrintContamination(&table, filepath.Join(dir, "out"), false); err != nil || !bytes.Contains(table.Bytes(), []byte("hull-qa")) {
		t.Errorf("table from --out: %v\n%s", err, table.String())
	}
}

// `winnow contam` over the multiple-choice set DuckDB wrote as Parquet
// (testdata/evalsets, questions from the npm package's docs), with the gold
// answer chosen by choices[label]: a document quoting a 15-word question is
// reported, a 6-word question is listed as too short, not matched.
func TestContamCommandParquetChoices(t *testing.T) {
	dir := t.TempDir()
	docs := `{"id":"d1","text":"From the manual: Create a new user in the specified registry, and save the credentials to the .npmrc file. Done."}
{"id":"d2","text":"Enables tab-completion in all npm commands."}
`
	if err := os.WriteFile(filepath.Join(dir, "docs.jsonl"), []byte(docs), 0o644); err != nil {
		t.Fatal(err)
	}
	f := contamFlags{evals: []string{"npm=../../testdata/evalsets/npm-mc.parquet"}, fields: []string{"question", "choices[label]"},
		idField: "id", evalFormat: "auto", ngram: 13, minWords: 8, source: "t", format: "auto", textField: "text", docID: "id",
		workers: 1, asJSON: true, quiet: true}
	var out bytes.Buffer
	if err := runContam(context.Background(), f, []string{filepath.Join(dir, "docs.jsonl")}, &out); err != nil {
		t.Fatal(err)
	}
	var r stages.ContamReport
	if err := json.Unmarshal(out.Bytes(), &r); err != nil {
		t.Fatalf("%v: %s", err, out.String())
	}
	e := r.Evals[0]
	if e.Items != 48 || len(e.Contaminated) != 1 || e.Contaminated[0].Item != "npm-q02" ||
		!slices.Equal(e.Contaminated[0].Docs, []string{"d1"}) || !slices.Contains(e.TooShort, "npm-q08") || e.ItemsTooShort != len(e.TooShort) {
		t.Errorf("report %+v", e)
	}
}
