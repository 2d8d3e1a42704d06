package run

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages/record"
	"winnow/stages/spec"
)

// A run stopped after a checkpoint and resumed writes a run directory
// byte-identical (apart from timings) to a run never stopped, for a stop
// after each of the default pipeline's global scans; a run stopped before
// any checkpoint cannot be resumed and says so.
func TestResumeMatchesUninterruptedRun(t *testing.T) {
	p := defaultSpecFixture(t, 1200, 5)
	dir := filepath.Dir(p)
	load := func() *spec.Spec {
		s, err := spec.LoadSpec(p)
		if err != nil {
			t.Fatal(err)
		}
		return s
	}
	whole := filepath.Join(dir, "whole")
	if _, err := RunSpec(context.Background(), load(), RunOptions{Out: whole, Workers: 2, Version: "t"}); err != nil {
		t.Fatal(err)
	}
	want := runDirDigest(t, whole)
	for _, stop := range []int{1, 2} {
		out := filepath.Join(dir, "stopped")
		res, err := RunSpec(context.Background(), load(), RunOptions{Out: out, Workers: 2, Version: "t", Force: true, stopAfter: stop})
		if !errors.Is(err, context.Canceled) || !res.Manifest.Interrupted {
			t.Fatalf("stop after %d: %v", stop, err)
		}
		var logged []string
		logf := func(f string, a ...any) { logged = append(logged, fmt.Sprintf(f, a...)) }
		if _, err := RunSpec(context.Background(), load(), RunOptions{Out: out, Workers: 1, Version: "t", Resume: true, Log: logf}); err != nil {
			t.Fatalf("resume after %d: %v", stop, err)
		}
		if len(logged) == 0 || !strings.Contains(logged[0], fmt.Sprintf("resumed after segment %d of 3", stop)) {
			t.Errorf("resume log: %q", logged)
		}
		got := runDirDigest(t, out)
		if len(got) != len(want) {
			t.Errorf("stop after %d: %d files, want %d (%v)", stop, len(got), len(want), keys(got))
		}
		for k, v := range want {
			if got[k] != v {
				t.Errorf("stop after %d: %s differs", stop, k)
			}
		}
	}
	// Nothing to resume: a finished run (its checkpoint is gone).
	if _, err := RunSpec(context.Background(), load(), RunOptions{Out: whole, Resume: true}); !errors.Is(err, record.ErrNoCheckpoint) {
		t.Errorf("resume of a finished run: %v", err)
	}
}

func keys(m map[string]string) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}
