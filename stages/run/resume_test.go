package run

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages/record"
)

// A run stopped after a checkpoint and resumed writes a run directory
// byte-identical (apart from timings) to a run never stopped, for a stop
// after each of the default pipeline's global scans; a run stopped before
// any checkpoint cannot be resumed and says so.
func TestResumeMatchesUninterruptedRun(t *testing.T) {
	p := defaultSpecFixture(t, 1200, 5)
	dir := filepath.Dir(p)
	whole, want := wholeRun(t, p)
	for _, stop := range []int{1, 2} {
		out := filepath.Join(dir, "stopped")
		res, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Workers: 2, Version: "t", Force: true, stopAfter: stop})
		if !errors.Is(err, context.Canceled) || !res.Manifest.Interrupted {
			t.Fatalf("stop after %d: %v", stop, err)
		}
		logf, lines := logLines()
		if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Workers: 1, Version: "t", Resume: true, Log: logf}); err != nil {
			t.Fatalf("resume after %d: %v", stop, err)
		}
		if logged := lines(); len(logged) == 0 || !strings.Contains(logged[0], fmt.Sprintf("resumed after segment %d of 3", stop)) {
			t.Errorf("resume log: %q", logged)
		}
		sameRunDir(t, fmt.Sprintf("stop after %d", stop), runDirDigest(t, out), want)
	}
	// Nothing to resume: a finished run (its checkpoint is gone).
	if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: whole, Resume: true}); !errors.Is(err, record.ErrNoCheckpoint) {
		t.Errorf("resume of a finished run: %v", err)
	}
}

// --resume refuses, naming the files, when an input changed after the
// checkpoint: grown, same size with other bytes, new, or gone.
func TestResumeRefusesChangedInputs(t *testing.T) {
	p := defaultSpecFixture(t, 400, 4)
	dir := filepath.Dir(p)
	out := filepath.Join(dir, "out")
	stop := func() {
		if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Force: true, stopAfter: 1}); !errors.Is(err, context.Canceled) {
			t.Fatalf("stop: %v", err)
		}
	}
	files, _ := filepath.Glob(filepath.Join(dir, "raw", "*", "*.zst"))
	if len(files) < 2 {
		files, _ = filepath.Glob(filepath.Join(dir, "raw", "*.zst"))
	}
	if len(files) < 2 {
		t.Fatalf("fixture inputs: %v", files)
	}
	rel := func(f string) string { r, _ := filepath.Rel(dir, f); return filepath.ToSlash(r) }
	orig, _ := os.ReadFile(files[0])
	for _, c := range []struct {
		name   string
		change func()
		want   string
	}{
		{"grown", func() { os.WriteFile(files[0], append(append([]byte{}, orig...), 0), 0o644) }, rel(files[0]) + fmt.Sprintf(" (%d bytes, was %d)", len(orig)+1, len(orig))},
		{"same size", func() {
			b := append([]byte{}, orig...)
			b[len(b)/2] ^= 0xff
			os.WriteFile(files[0], b, 0o644)
		}, rel(files[0]) + " (same size, other content: xxh3 "},
		{"new", func() { os.WriteFile(files[0]+".extra.jsonl", []byte(`{"text":"new hull"}`+"\n"), 0o644) }, " (new since the checkpoint)"},
	} {
		os.WriteFile(files[0], orig, 0o644)
		os.Remove(files[0] + ".extra.jsonl")
		stop()
		c.change()
		_, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Resume: true})
		if err == nil || !strings.Contains(err.Error(), "cannot resume: the inputs changed since the checkpoint") || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v\nwant %s", c.name, err, c.want)
		}
	}
	// Unchanged inputs resume.
	os.WriteFile(files[0], orig, 0o644)
	os.Remove(files[0] + ".extra.jsonl")
	stop()
	if _, err := RunSpec(context.Background(), loadSpec(t, p), RunOptions{Out: out, Resume: true}); err != nil {
		t.Errorf("unchanged inputs: %v", err)
	}
}
