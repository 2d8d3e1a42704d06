package stages_test

import (
	"context"
	"os"
	"path/filepath"
	"regexp"
	"testing"

	"winnow/configs"
	"winnow/stages"
	"winnow/stages/synth"
)

var secondsField = regexp.MustCompile(`"seconds": [0-9.e+-]+`)

// The shipped default spec runs end to end on a generated corpus, and the
// run directory is byte-identical (apart from timings) for 1 and 4 workers
// and for a memory budget small enough to force the dedup indexes to spill.
func TestDefaultSpecDeterministic(t *testing.T) {
	dir := t.TempDir()
	if _, err := synth.Generate(synth.Options{Dir: filepath.Join(dir, "raw"), Docs: 1500, Seed: 3}); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll(filepath.Join(dir, "evals"), 0o755)
	ev, _ := os.ReadFile(filepath.Join(dir, "raw", "evals", "hull-qa.jsonl"))
	os.WriteFile(filepath.Join(dir, "evals", "hull-qa.jsonl"), ev, 0o644)
	spec, _ := configs.FS.ReadFile("default.yaml")
	p := filepath.Join(dir, "default.yaml")
	os.WriteFile(p, spec, 0o644)

	var first map[string]string
	for _, c := range []struct {
		workers int
		memory  int64
	}{{1, 0}, {4, 0}, {2, 4 << 10}} {
		s, err := stages.LoadSpec(p)
		if err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(dir, "out")
		res, err := stages.RunSpec(context.Background(), s, stages.RunOptions{Out: out, Workers: c.workers, Memory: c.memory, Force: true, Version: "test"})
		if err != nil {
			t.Fatal(err)
		}
		m := res.Manifest
		if m.Totals.DocsOut == 0 || m.Totals.TokensOut == 0 || len(m.Outputs) == 0 {
			t.Fatalf("nothing written: %+v", m.Totals)
		}
		got := map[string]string{}
		filepath.Walk(out, func(path string, info os.FileInfo, err error) error {
			if err != nil || info.IsDir() {
				return err
			}
			rel, _ := filepath.Rel(out, path)
			b, _ := os.ReadFile(path)
			if rel == "manifest.json" {
				b = secondsField.ReplaceAll(b, []byte(`"seconds": 0`))
			}
			got[rel] = string(b)
			return nil
		})
		if first == nil {
			first = got
			continue
		}
		if len(got) != len(first) {
			t.Errorf("workers %d memory %d: %d files, want %d", c.workers, c.memory, len(got), len(first))
		}
		for k, v := range first {
			if got[k] != v {
				t.Errorf("workers %d memory %d: %s differs", c.workers, c.memory, k)
			}
		}
	}
}
