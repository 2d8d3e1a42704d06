package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// `winnow check` on a spec whose eval set is the multiple-choice CSV DuckDB
// wrote (testdata/evalsets) prints the set's items, fields, items too
// short and n-grams indexed, warns about the short ones, and predicts the
// sources the mix leaves out.
func TestCheckEvalSetsAndMix(t *testing.T) {
	dir := t.TempDir()
	evals, err := filepath.Abs("../../testdata/evalsets/npm-mc.csv")
	if err != nil {
		t.Fatal(err)
	}
	for _, src := range []string{"manuals", "forum", "web"} {
		os.MkdirAll(filepath.Join(dir, src), 0o755)
		os.WriteFile(filepath.Join(dir, src, "a.jsonl"), []byte(`{"id":"1","text":"Re-bed the stanchion bases before the autumn lift-out."}`+"\n"), 0o644)
	}
	spec := `name: chk
inputs:
  - {source: manuals, paths: ["manuals/"]}
  - {source: forum, paths: ["forum/"]}
  - {source: web, paths: ["web/"]}
stages:
  - kind: decontaminate
    evals:
      - {name: npm, paths: ["` + evals + `"], fields: [question, "choices[label]"]}
output:
  dir: out/
  tokenizer: cl100k_base
  mix: {manuals: 0.8, forum: 0.2, web: 0}
`
	p := filepath.Join(dir, "spec.yaml")
	os.WriteFile(p, []byte(spec), 0o644)
	var out bytes.Buffer
	rootCmd.SetOut(&out)
	rootCmd.SetArgs([]string{"check", p})
	defer func() { rootCmd.SetArgs(nil); rootCmd.SetOut(nil) }()
	if err := rootCmd.Execute(); err != nil {
		t.Fatal(err)
	}
	got := out.String()
	for _, want := range []string{
		"eval set npm (" + evals + ", csv): 48 items; fields question, choices[label]; ",
		"too short to check (< 8 words); ",
		" n-grams indexed",
		"warning: eval set npm: ",
		"web: every token will be left out: share 0 in mix",
	} {
		if !strings.Contains(got, want) {
			t.Errorf("check output lacks %q:\n%s", want, got)
		}
	}
}
