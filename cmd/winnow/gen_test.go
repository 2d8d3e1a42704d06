package main

import (
	"bytes"
	"encoding/json"
	"io"
	"path/filepath"
	"strings"
	"testing"
)

// runGenArgs runs `winnow gen ARGS` and returns its standard output.
func runGenArgs(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out bytes.Buffer
	// Flags keep their values between Execute calls: reset the ones the
	// tests vary.
	genOpts.docs, genOpts.bytes, genOpts.force, genOpts.jsonOut = 0, "", false, false
	genOpts.format, genOpts.files = "jsonl.zst", 1
	for _, name := range []string{"docs", "bytes"} {
		if f := genCmd.Flags().Lookup(name); f != nil {
			f.Changed = false
		}
	}
	rootCmd.SetOut(&out)
	rootCmd.SetErr(io.Discard)
	defer func() { rootCmd.SetOut(nil); rootCmd.SetErr(nil); rootCmd.SetArgs(nil) }()
	rootCmd.SetArgs(append([]string{"gen"}, args...))
	err := rootCmd.Execute()
	return out.String(), err
}

func TestGenCommand(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "corpus")
	out, err := runGenArgs(t, "--out", dir, "--docs", "150", "--seed", "4", "--files", "2", "--format", "jsonl.gz", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var sum struct {
		Docs   int                 `json:"docs"`
		Bytes  int64               `json:"bytes"`
		Files  map[string][]string `json:"files"`
		Counts map[string]int      `json:"counts"`
		Eval   string              `json:"eval"`
	}
	if err := json.Unmarshal([]byte(out), &sum); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	if sum.Docs != 150 || len(sum.Files["manuals"]) != 2 || !strings.HasSuffix(sum.Files["web"][1], "web-00001.jsonl.gz") {
		t.Fatalf("summary: %+v", sum)
	}
	if sum.Eval != filepath.Join(dir, "evals", "hull-qa.jsonl") {
		t.Fatalf("eval path %s", sum.Eval)
	}
	// A non-empty directory needs --force.
	if _, err := runGenArgs(t, "--out", dir, "--docs", "50"); err == nil || !strings.Contains(err.Error(), "--force") {
		t.Fatalf("non-empty directory: %v", err)
	}
	out, err = runGenArgs(t, "--out", dir, "--bytes", "200KB", "--force")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "truth:") || !strings.Contains(out, "manuals-00000.jsonl.zst") {
		t.Fatalf("table output: %s", out)
	}
	if _, err := runGenArgs(t, "--out", dir, "--bytes", "lots", "--force"); err == nil || !strings.Contains(err.Error(), "--bytes") {
		t.Fatalf("bad size: %v", err)
	}
	if _, err := runGenArgs(t, "--out", dir, "--format", "csv", "--force"); err == nil || !strings.Contains(err.Error(), "csv") {
		t.Fatalf("bad format: %v", err)
	}
}
