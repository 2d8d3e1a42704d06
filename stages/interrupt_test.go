package stages

import (
	"context"
	"errors"
	"path/filepath"
	"testing"
)

// A Ctrl-C that arrives right after a checkpoint stops the run there: the
// run reports the interruption, and --resume continues to the same bytes
// as a run never stopped.
func TestInterruptJustAfterCheckpoint(t *testing.T) {
	p := defaultSpecFixture(t, 600, 9)
	dir := filepath.Dir(p)
	load := func() *Spec {
		s, err := LoadSpec(p)
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
	for _, at := range []int{1, 2} {
		ctx, cancel := context.WithCancel(context.Background())
		n := 0
		out := filepath.Join(dir, "stopped")
		res, err := RunSpec(ctx, load(), RunOptions{Out: out, Workers: 2, Version: "t", Force: true, afterCheckpoint: func() {
			if n++; n == at {
				cancel()
			}
		}})
		cancel()
		if !errors.Is(err, context.Canceled) || res == nil || !res.Manifest.Interrupted {
			t.Fatalf("cancel after checkpoint %d: err %v", at, err)
		}
		if _, err := RunSpec(context.Background(), load(), RunOptions{Out: out, Workers: 1, Version: "t", Resume: true}); err != nil {
			t.Fatalf("resume: %v", err)
		}
		got := runDirDigest(t, out)
		for k, v := range want {
			if got[k] != v {
				t.Errorf("cancel after checkpoint %d: %s differs", at, k)
			}
		}
	}
}
