package run

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"winnow/stages"
	"winnow/stages/record"
)

// A Ctrl-C that arrives right after a checkpoint stops the run there: the
// run reports the interruption, and --resume continues to the same bytes
// as a run never stopped.
func TestInterruptJustAfterCheckpoint(t *testing.T) {
	p := defaultSpecFixture(t, 600, 9)
	dir := filepath.Dir(p)
	_, want := wholeRun(t, p)
	for _, at := range []int{1, 2} {
		ctx, cancel := context.WithCancel(context.Background())
		n := 0
		out := filepath.Join(dir, "stopped")
		res, err := RunSpec(ctx, loadSpec(t, p), RunOptions{Out: out, Workers: 2, Version: "t", Force: true, afterCheckpoint: func() {
			if n++; n == at {
				cancel()
			}
		}})
		cancel()
		if !errors.Is(err, context.Canceled) || res == nil || !res.Manifest.Interrupted {
			t.Fatalf("cancel after checkpoint %d: err %v", at, err)
		}
		if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Workers: 1, Version: "t", Resume: true}); err != nil {
			t.Fatalf("resume: %v", err)
		}
		sameRunDir(t, fmt.Sprintf("cancel after checkpoint %d", at), runDirDigest(t, out), want)
	}
}

// test_fail_reduce is a global stage whose Reduce fails while a file
// exists, as a full disk would make a spilling index fail.
func init() {
	stages.Register(stages.Kind{Name: "test_fail_reduce", Doc: "fails in Reduce while a file exists (tests)",
		NewGlobal: func(p *stages.Params, env stages.Env) (stages.GlobalStage, error) {
			g := &failReduce{flag: p.String("fail_while", "")}
			return g, p.Done()
		}})
}

type failReduce struct{ flag string }

func (g *failReduce) Name() string                               { return "test_fail_reduce" }
func (g *failReduce) Kind() string                               { return "test_fail_reduce" }
func (g *failReduce) Scan(d *stages.Doc) any                     { return nil }
func (g *failReduce) Collect(stages.OrderKey, string, any) error { return nil }
func (g *failReduce) Apply(d *stages.Doc) stages.Decision        { return stages.KeepDoc() }
func (g *failReduce) Close() error                               { return nil }
func (g *failReduce) Reduce() error {
	if _, err := os.Stat(g.flag); err == nil {
		return fmt.Errorf("write %s: no space left on device", filepath.Join(filepath.Dir(g.flag), "index.tmp"))
	}
	return nil
}

// A run that fails after a checkpoint (a full disk) says that --resume
// continues from that checkpoint, keeps what the resume needs, and the
// resumed run gives the bytes of a run that never failed. A run stopped
// before any checkpoint says that it cannot be resumed.
func TestFailureAfterCheckpointResumes(t *testing.T) {
	dir := writeCorpus(t, 400)
	flag := filepath.Join(dir, "disk-full")
	body := `name: fail
inputs:
  - source: yard
    paths: ["raw/*.zst"]
stages:
  - kind: normalize
  - kind: exact_dedup
  - kind: length
    min_chars: 5
  - kind: test_fail_reduce
    fail_while: ` + flag + `
  - kind: repetition
output:
  dir: out
`
	whole := filepath.Join(dir, "whole")
	if _, err := RunSpec(context.Background(), writeSpec(t, dir, body), RunOptions{Out: whole, Workers: 2}); err != nil {
		t.Fatal(err)
	}
	want := runDirDigest(t, whole)

	os.WriteFile(flag, nil, 0o644)
	out := filepath.Join(dir, "out")
	_, err := RunSpec(context.Background(), writeSpec(t, dir, body), RunOptions{Out: out, Workers: 2})
	if err == nil || !strings.Contains(err.Error(), "no space left on device") ||
		!strings.Contains(err.Error(), "--resume` continues from the checkpoint after segment 1 of 3 (stage exact_dedup)") {
		t.Fatalf("failure message: %v", err)
	}
	os.Remove(flag)
	if _, err := RunSpec(context.Background(), writeSpec(t, dir, body), RunOptions{Out: out, Workers: 1, Resume: true}); err != nil {
		t.Fatalf("resume after the failure: %v", err)
	}
	sameRunDir(t, "resumed after the failure", runDirDigest(t, out), want)

	// Stopped before the first checkpoint: no promise.
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	res, err := RunSpec(ctx, writeSpec(t, dir, body), RunOptions{Out: filepath.Join(dir, "early")})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("early stop: %v", err)
	}
	if ok, why := res.Runner.CanResume(); ok || !strings.Contains(why, "stopped before its first checkpoint") {
		t.Errorf("early stop: resumable %v, %q", ok, why)
	}
	if _, err := RunSpec(context.Background(), writeSpec(t, dir, body), RunOptions{Out: filepath.Join(dir, "early"), Resume: true}); !errors.Is(err, record.ErrNoCheckpoint) {
		t.Errorf("resume of an early stop: %v", err)
	}
}
