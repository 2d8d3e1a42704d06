package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages/run"
	"winnow/stages/spec"
)

// Documents that share an id are counted in the manifest, named in a
// warning, and `explain` shows every one of them.
func TestDuplicateIDsCountedAndExplained(t *testing.T) {
	dir := t.TempDir()
	var a, b bytes.Buffer
	for i := 0; i < 40; i++ {
		fmt.Fprintf(&a, `{"id":"slip-%d","text":"Mooring line for slip %d, checked before the storm season."}`+"\n", i, i)
	}
	// The second file reuses three ids of the first; one of them is short.
	for _, i := range []int{3, 7, 11} {
		text := fmt.Sprintf("Second survey of slip %d: the cleats are loose and need new bolts.", i)
		if i == 7 {
			text = "short"
		}
		fmt.Fprintf(&b, `{"id":"slip-%d","text":%q}`+"\n", i, text)
	}
	os.MkdirAll(filepath.Join(dir, "raw"), 0o755)
	os.WriteFile(filepath.Join(dir, "raw", "a.jsonl"), a.Bytes(), 0o644)
	os.WriteFile(filepath.Join(dir, "raw", "b.jsonl"), b.Bytes(), 0o644)
	specPath := filepath.Join(dir, "spec.yaml")
	os.WriteFile(specPath, []byte("name: dup\ninputs:\n  - source: s\n    paths: [raw/]\nstages:\n  - kind: length\n    min_chars: 20\noutput:\n  dir: out\n"), 0o644)
	s, err := spec.LoadSpec(specPath)
	if err != nil {
		t.Fatal(err)
	}
	var logged []string
	res, err := runLoadedWithLog(s, &logged)
	if err != nil {
		t.Fatal(err)
	}
	if res.Manifest.DuplicateIDs != 3 {
		t.Errorf("duplicate ids %d, want 3", res.Manifest.DuplicateIDs)
	}
	log := strings.Join(logged, "\n")
	if !strings.Contains(log, `3 document(s) have an id an earlier document already had, e.g. "slip-3" (raw/b.jsonl:1), "slip-7" (raw/b.jsonl:2), "slip-11" (raw/b.jsonl:3)`) {
		t.Errorf("log %q", log)
	}
	out, err := runCLI(t, "explain", res.Dir, "slip-7", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var ex struct {
		Docs []struct {
			File   string
			Line   int64
			Result struct{ Status string }
		}
	}
	json.Unmarshal([]byte(out), &ex)
	if len(ex.Docs) != 2 || ex.Docs[0].File != "raw/a.jsonl" || ex.Docs[0].Result.Status != "kept" ||
		ex.Docs[1].File != "raw/b.jsonl" || ex.Docs[1].Result.Status != "removed" {
		t.Errorf("explain slip-7: %s", out)
	}
	text, _ := runCLI(t, "explain", res.Dir, "slip-7")
	if !strings.HasPrefix(text, "2 documents have the id slip-7") {
		t.Errorf("explain text:\n%s", text)
	}
}

// runLoadedWithLog runs a spec as `winnow run` does, collecting log lines.
func runLoadedWithLog(s *spec.Spec, logged *[]string) (*run.RunResult, error) {
	return run.RunSpec(context.Background(), s, run.RunOptions{Version: version, Log: func(f string, a ...any) {
		*logged = append(*logged, fmt.Sprintf(f, a...))
	}})
}
