package run

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"testing"

	"winnow/stages/spec"
)

func writeFile(t *testing.T, dir, name, content string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// loadSpec loads the spec file at p, failing the test on an error.
func loadSpec(t *testing.T, p string) *spec.Spec {
	t.Helper()
	s, err := spec.LoadSpec(p)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// wholeRun runs the spec file at p to the end, never stopped, into
// whole beside it, and returns that run directory and its digest: what a
// stopped and resumed run must reproduce.
func wholeRun(t *testing.T, p string) (string, map[string]string) {
	t.Helper()
	whole := filepath.Join(filepath.Dir(p), "whole")
	if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: whole, Workers: 2, Version: "t"}); err != nil {
		t.Fatal(err)
	}
	return whole, runDirDigest(t, whole)
}

// logLines returns a RunOptions.Log that keeps every line, safe for the
// goroutines that log at once, and a function that returns the lines.
func logLines() (func(format string, args ...any), func() []string) {
	var mu sync.Mutex
	var lines []string
	logf := func(format string, args ...any) {
		mu.Lock()
		lines = append(lines, fmt.Sprintf(format, args...))
		mu.Unlock()
	}
	return logf, func() []string {
		mu.Lock()
		defer mu.Unlock()
		return slices.Clone(lines)
	}
}
