package run

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// A second attempt of the write phase that saw the run unfinished, while
// the first attempt finished it and moved the units away, ends with
// nothing to do: it neither fails nor brings the units directory back.
// (Found by two attempts started at once; here the order is forced.)
func TestLateWriteAttemptAfterFinish(t *testing.T) {
	p := defaultSpecFixture(t, 300, 7)
	_, want := wholeRun(t, p)
	s := loadSpec(t, p)
	inputs, err := spec.ResolveInputs(s)
	if err != nil {
		t.Fatal(err)
	}
	steps, err := s.BuildStages(stages.Env{SpecDir: s.Dir, Checking: true,
		Inputs: func() ([]read.InputFile, error) { return inputs, nil }})
	if err != nil {
		t.Fatal(err)
	}
	closeSteps(steps)
	out := filepath.Join(filepath.Dir(p), "split")
	opt := func(phase string) PhaseOptions {
		return PhaseOptions{RunOptions: RunOptions{Out: out, Workers: 1, Version: "t"}, Phase: phase, Tasks: 1}
	}
	for _, ph := range Phases(steps, record.PlannedOutput(s.Output)) {
		if ph.Name == PhaseWrite {
			continue
		}
		if _, err := RunPhase(context.Background(), loadSpec(t, p), opt(ph.Name)); err != nil {
			t.Fatalf("phase %s: %v", ph.Name, err)
		}
	}
	late := opt(PhaseWrite)
	finished := false
	late.afterCheck = func() {
		// The first attempt runs to the end in the window.
		res, err := RunPhase(context.Background(), loadSpec(t, p), opt(PhaseWrite))
		if err != nil || res.Manifest == nil {
			t.Fatalf("first attempt: %v", err)
		}
		finished = true
	}
	res, err := RunPhase(context.Background(), loadSpec(t, p), late)
	if err != nil {
		t.Fatalf("late attempt: %v", err)
	}
	if !finished || len(res.Units) != 0 {
		t.Errorf("late attempt ran units %v (first attempt finished: %v)", res.Units, finished)
	}
	if _, err := os.Stat(filepath.Join(out, unitsDir)); !os.IsNotExist(err) {
		t.Errorf("units directory after the run finished: %v", err)
	}
	sameRunDir(t, "write raced by a late attempt", runDirDigest(t, out), want)
}

// A split run whose every document is removed writes, through phase
// shards, the same empty output and manifest as one process (the mix
// report says "empty").
func TestSplitAllRemovedWithMix(t *testing.T) {
	dir := writeCorpus(t, 30)
	text := allRemovedMixSpec
	s := writeSpec(t, dir, text)
	plain := filepath.Join(dir, "plain")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: plain, Workers: 1, Version: "t"}); err != nil {
		t.Fatal(err)
	}
	split := filepath.Join(dir, "split")
	for _, ph := range []string{PhaseRead, PhaseShards, PhaseWrite} {
		for task := 0; task < 2; task++ {
			opt := PhaseOptions{RunOptions: RunOptions{Out: split, Workers: 1, Version: "t"}, Phase: ph, Task: task, Tasks: 2}
			if _, err := RunPhase(context.Background(), writeSpec(t, dir, text), opt); err != nil {
				t.Fatalf("phase %s task %d: %v", ph, task, err)
			}
		}
	}
	sameRunDir(t, "all removed, split", runDirDigest(t, split), runDirDigest(t, plain))
	m, err := record.ReadManifest(split)
	if err != nil {
		t.Fatal(err)
	}
	if mix, _ := json.Marshal(m.Mix); !strings.Contains(string(mix), `"mode":"empty"`) {
		t.Errorf("mix %s", mix)
	}
}
