package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// A run whose input is cut short keeps what it could read, names the file
// in the manifest, and exits 3 unless --allow-partial.
func TestRunExitStatusOnTruncatedInput(t *testing.T) {
	dir := t.TempDir()
	var raw bytes.Buffer
	for i := 0; i < 20000; i++ {
		fmt.Fprintf(&raw, `{"id":"d%d","text":"Winterize the outboard %x before the first frost."}`+"\n", i, uint64(i)*0x9E3779B97F4A7C15)
	}
	var z bytes.Buffer
	w, _ := zstd.NewWriter(&z)
	w.Write(raw.Bytes())
	w.Close()
	os.MkdirAll(filepath.Join(dir, "raw"), 0o755)
	os.WriteFile(filepath.Join(dir, "raw", "cut.jsonl.zst"), z.Bytes()[:z.Len()*9/10], 0o644)
	spec := filepath.Join(dir, "spec.yaml")
	os.WriteFile(spec, []byte("name: cut\ninputs:\n  - source: s\n    paths: [raw/]\nstages:\n  - kind: normalize\noutput:\n  dir: out\n"), 0o644)

	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	_, err := runCLI(t, "run", spec, "-q")
	if err == nil || exitCode(err) != 3 || !strings.Contains(err.Error(), "could not be read to the end") {
		t.Fatalf("want exit 3, got %v (code %d)", err, exitCode(err))
	}
	if _, err := runCLI(t, "run", spec, "-q", "--allow-partial"); err != nil {
		t.Fatalf("--allow-partial: %v", err)
	}
	m, err := os.ReadFile(filepath.Join(dir, "out", "manifest.json"))
	if err != nil || !bytes.Contains(m, []byte(`"file": "raw/cut.jsonl.zst"`)) || !bytes.Contains(m, []byte(`"fatal": true`)) {
		t.Errorf("manifest errors missing: %v", err)
	}
}

// check --json lists every stage with its enabled rules and its scope.
func TestCheckJSON(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "a.jsonl"), []byte(`{"text":"x"}`+"\n"), 0o644)
	spec := filepath.Join(dir, "spec.yaml")
	os.WriteFile(spec, []byte("name: c\ninputs:\n  - source: s\n    paths: [a.jsonl]\nstages:\n  - kind: length\n    min_chars: 9\n    only: {sources: [s]}\noutput:\n  dir: out\n"), 0o644)
	checkJSON = false
	defer func() { checkJSON = false }()
	got, err := runCLI(t, "check", spec, "--json") // check prints to the command's output
	out := bytes.NewBufferString(got)
	if err != nil {
		t.Fatal(err)
	}
	var plan struct {
		Stages []struct {
			Name  string
			Only  struct{ Sources []string }
			Rules []struct {
				Rule  string
				Keep  string `json:"keep_when"`
				Limit float64
			}
		}
	}
	if err := json.Unmarshal(out.Bytes(), &plan); err != nil {
		t.Fatalf("%v: %s", err, out.String())
	}
	if len(plan.Stages) != 1 || plan.Stages[0].Name != "length" || len(plan.Stages[0].Rules) != 1 || plan.Stages[0].Rules[0].Limit != 9 || plan.Stages[0].Rules[0].Keep != ">=" ||
		len(plan.Stages[0].Only.Sources) != 1 || plan.Stages[0].Only.Sources[0] != "s" {
		t.Errorf("plan %s", out.String())
	}
}
