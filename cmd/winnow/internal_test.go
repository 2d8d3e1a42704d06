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

	"winnow/stages"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// A stage kind that panics on one document, registered for this test
// binary only.
func init() {
	stages.Register(stages.Kind{Name: "cli_test_panic", Doc: "panics on one document (tests)",
		New: func(p *stages.Params, env stages.Env) (stages.Stage, error) {
			return &cliPanic{on: p.String("on", "")}, p.Done()
		}})
}

type cliPanic struct{ on string }

func (s *cliPanic) Name() string          { return "cli_test_panic" }
func (s *cliPanic) Kind() string          { return "cli_test_panic" }
func (s *cliPanic) MetricNames() []string { return nil }
func (s *cliPanic) Process(d *stages.Doc) stages.Decision {
	if d.ID == s.on {
		panic("boom on " + d.ID)
	}
	return stages.KeepDoc()
}

// A run in which a stage panicked on one document finishes, writes the
// manifest, and exits with the internal-error status (4), saying so in its
// last message, even with --allow-partial.
func TestRunExitStatusOnInternalError(t *testing.T) {
	dir := t.TempDir()
	var raw bytes.Buffer
	for i := 0; i < 50; i++ {
		fmt.Fprintf(&raw, `{"id":"d%d","text":"Varnish the tiller of hull %d twice."}`+"\n", i, i)
	}
	os.MkdirAll(filepath.Join(dir, "raw"), 0o755)
	os.WriteFile(filepath.Join(dir, "raw", "a.jsonl"), raw.Bytes(), 0o644)
	specPath := filepath.Join(dir, "spec.yaml")
	os.WriteFile(specPath, []byte("name: bug\ninputs:\n  - source: s\n    paths: [raw/]\nstages:\n  - kind: cli_test_panic\n    on: d17\n  - kind: normalize\noutput:\n  dir: out\n"), 0o644)
	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	for _, args := range [][]string{{"run", specPath, "-q"}, {"run", specPath, "-q", "--allow-partial", "--force"}} {
		_, err := runCLI(t, args...)
		if exitCode(err) != exitInternal || exitInternal == 0 || exitInternal == 1 || exitInternal == 3 || exitInternal == 130 {
			t.Fatalf("%v: want the internal-error status, got %v (code %d)", args, err, exitCode(err))
		}
		if !strings.Contains(err.Error(), "1 internal error") || !strings.Contains(err.Error(), "internal_error") {
			t.Errorf("message %q", err)
		}
		b, rerr := os.ReadFile(filepath.Join(dir, "out", "manifest.json"))
		var m record.Manifest
		if rerr != nil || json.Unmarshal(b, &m) != nil || m.InternalErrors != 1 || m.Totals.DocsOut != 49 {
			t.Fatalf("manifest: %v, %d internal, %d out", rerr, m.InternalErrors, m.Totals.DocsOut)
		}
	}
}

// A run interrupted before its first checkpoint does not promise a resume.
func TestInterruptBeforeCheckpointSaysNoResume(t *testing.T) {
	dir := t.TempDir()
	var raw bytes.Buffer
	for i := 0; i < 50; i++ {
		fmt.Fprintf(&raw, `{"id":"d%d","text":"Caulk the seams of hull %d before launch."}`+"\n", i, i)
	}
	os.MkdirAll(filepath.Join(dir, "raw"), 0o755)
	os.WriteFile(filepath.Join(dir, "raw", "a.jsonl"), raw.Bytes(), 0o644)
	specPath := filepath.Join(dir, "spec.yaml")
	os.WriteFile(specPath, []byte("name: early\ninputs:\n  - source: s\n    paths: [raw/]\nstages:\n  - kind: exact_dedup\n  - kind: normalize\noutput:\n  dir: out\n"), 0o644)
	s, err := spec.LoadSpec(specPath)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err = runLoaded(ctx, s, runFlags{quiet: true})
	if exitCode(err) != 130 || strings.Contains(err.Error(), "continues from") ||
		!strings.Contains(err.Error(), "--resume is not possible: it stopped before its first checkpoint") {
		t.Errorf("message: %v", err)
	}
}

// TestIntList: audit prints runs of three or more units as ranges, pairs
// and single units as numbers, and loses no unit.
func TestIntList(t *testing.T) {
	for _, c := range []struct {
		in   []int
		want string
	}{
		{nil, ""},
		{[]int{5}, "5"},
		{[]int{0, 1}, "0, 1"},
		{[]int{0, 1, 2}, "0-2"},
		{[]int{0, 2, 3, 4, 5, 9, 11, 12}, "0, 2-5, 9, 11, 12"},
		{[]int{3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23, 24, 25, 26, 27, 28, 29, 30, 31, 32, 33, 34, 35, 36, 37, 38, 39, 40, 41, 42, 43, 44, 45, 46, 47, 48, 49, 50, 51, 52, 53, 54, 55, 56, 57, 58, 59, 60, 61, 62, 63}, "3-63"},
	} {
		if got := intList(c.in); got != c.want {
			t.Errorf("intList(%v) = %q, want %q", c.in, got, c.want)
		}
	}
}
