package run

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"winnow/configs"
	"winnow/stages/synth"
)

// defaultSpecFixture writes a generated corpus laid out as
// configs/default.yaml expects (raw/<source>/, evals/hull-qa.jsonl) and a
// copy of that spec, and returns the spec's path.
func defaultSpecFixture(t *testing.T, docs int, seed uint64) string {
	t.Helper()
	dir := t.TempDir()
	if _, err := synth.Generate(synth.Options{Dir: filepath.Join(dir, "raw"), Docs: docs, Seed: seed}); err != nil {
		t.Fatal(err)
	}
	return writeDefaultSpec(t, dir, filepath.Join(dir, "raw", "evals", "hull-qa.jsonl"))
}

// writeDefaultSpec copies the eval set evalFile to dir/evals/hull-qa.jsonl
// (the eval set configs/default.yaml names) and that spec to
// dir/default.yaml, and returns the spec's path.
func writeDefaultSpec(t *testing.T, dir, evalFile string) string {
	t.Helper()
	os.MkdirAll(filepath.Join(dir, "evals"), 0o755)
	ev, _ := os.ReadFile(evalFile)
	os.WriteFile(filepath.Join(dir, "evals", "hull-qa.jsonl"), ev, 0o644)
	spec, _ := configs.FS.ReadFile("default.yaml")
	p := filepath.Join(dir, "default.yaml")
	os.WriteFile(p, spec, 0o644)
	return p
}

// The shipped default spec runs end to end on a generated corpus, and the
// run directory is byte-identical (apart from timings) for 1 and 4 workers
// and for a memory budget small enough to force the dedup indexes to spill.
func TestDefaultSpecDeterministic(t *testing.T) {
	p := defaultSpecFixture(t, 1500, 3)
	dir := filepath.Dir(p)

	var first map[string]string
	for _, c := range []struct {
		workers int
		memory  int64
	}{{1, 0}, {4, 0}, {2, 4 << 10}} {
		s := loadSpec(t, p)
		out := filepath.Join(dir, "out")
		res, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: c.workers, Memory: c.memory, Force: true, Version: "test"})
		if err != nil {
			t.Fatal(err)
		}
		m := res.Manifest
		if m.Totals.DocsOut == 0 || m.Totals.TokensOut == 0 || len(m.Outputs) == 0 {
			t.Fatalf("nothing written: %+v", m.Totals)
		}
		got := runDirDigest(t, out)
		if first == nil {
			first = got
			continue
		}
		sameRunDir(t, fmt.Sprintf("workers %d memory %d", c.workers, c.memory), got, first)
	}
}
