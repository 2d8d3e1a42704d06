package shard

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

// buildRanges writes docs as a planned output in ranges: the documents
// cut into parts (each saved by its own Builder), the output into n
// ranges written by `tasks` writers (ranges i, i+tasks, ...), then
// assembled. It returns the report, the run directory and the left-out
// documents range 0's writer reported.
func buildRanges(t *testing.T, docs []Doc, opt Options, parts, n, tasks int) (*Report, string, []LeftOut) {
	t.Helper()
	run := t.TempDir()
	opt.Dir = filepath.Join(run, "shards")
	if opt.Name == "" {
		opt.Name = "demo"
	}
	var partDirs []string
	for p := 0; p < parts; p++ {
		po := opt
		po.Dir = filepath.Join(run, fmt.Sprintf("p%d", p), "shards")
		po.TempDir = filepath.Join(run, fmt.Sprintf("p%d", p), "tmp")
		po.Parts = true
		b, err := NewBuilder(po)
		if err != nil {
			t.Fatal(err)
		}
		if !b.Planned() {
			t.Fatal("not planned")
		}
		for i := p * len(docs) / parts; i < (p+1)*len(docs)/parts; i++ {
			if err := b.Add(&docs[i]); err != nil {
				t.Fatal(err)
			}
		}
		d := filepath.Join(run, fmt.Sprintf("part%d", p))
		if err := b.SavePart(d); err != nil {
			t.Fatal(err)
		}
		partDirs = append(partDirs, d)
	}
	results := make([]*RangeResult, n)
	dirs := make([]string, n)
	var whole *Whole
	var left []LeftOut
	for task := tasks - 1; task >= 0; task-- {
		var mine []int
		for i := task; i < n; i += tasks {
			mine = append(mine, i)
		}
		wo := opt
		wo.TempDir = filepath.Join(run, fmt.Sprintf("w%d", task))
		w, err := WriteRanges(wo, partDirs, n, mine, func(i int) string { return filepath.Join(run, fmt.Sprintf("range%d", i)) },
			func(i int, r *RangeResult) error {
				if results[i] != nil {
					return fmt.Errorf("range %d done twice", i)
				}
				// Through JSON, as a marker keeps it.
				b, err := json.Marshal(r)
				if err != nil {
					return err
				}
				var back RangeResult
				if err := json.Unmarshal(b, &back); err != nil {
					return err
				}
				results[i], dirs[i] = &back, filepath.Join(run, fmt.Sprintf("range%d", i))
				return nil
			}, func(l LeftOut) error { left = append(left, l); return nil })
		if err != nil {
			t.Fatal(err)
		}
		if (task == 0) != (w != nil) {
			t.Fatalf("task %d: whole report %v", task, w)
		}
		if w != nil {
			whole = w
		}
	}
	for i, r := range results {
		if r == nil {
			t.Fatalf("range %d never done", i)
		}
	}
	rep, err := AssembleRanges(opt, whole, dirs, results)
	if err != nil {
		t.Fatal(err)
	}
	return rep, run, left
}

// A planned output written in ranges by several writers from parts saved
// by several builders is the output of one Builder, byte for byte, with
// the same report and the same left-out documents in the same order: for
// a mix (with long documents split before mixing and cuts inside
// documents), an up-sampled mix with a budget, token files, a small
// memory budget (bucket files), a shuffle with a budget, and more ranges
// than shards.
func TestRangesMatchOneBuilder(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(11, tok)
	shares := map[string]float64{"manuals": 0.4, "forum": 0.4, "dealer": 0.2}
	cases := []struct {
		name                 string
		opt                  Options
		parts, ranges, tasks int
	}{
		{"mix", Options{Tokenizer: tok, ShardTokens: 5000, Mix: shares, Seed: 3}, 3, 4, 2},
		{"mix, token files, buckets", Options{Tokenizer: tok, ShardTokens: 3000, Mix: shares, Seed: 5, TokenFiles: true, MemoryBudget: 40 << 10}, 4, 7, 3},
		{"upsampled", Options{Tokenizer: tok, ShardTokens: 8000, Mix: shares, BudgetTokens: 120000, MaxEpochs: 10, Seed: 1}, 2, 5, 2},
		{"cuts inside documents", Options{Tokenizer: tok, ShardTokens: 2000, SplitTokens: 1500, Mix: shares, Seed: 2}, 3, 6, 2},
		{"shuffle with budget", Options{Tokenizer: tok, ShardTokens: 2000, Shuffle: true, Seed: 7, BudgetTokens: 30000}, 2, 4, 2},
		{"more ranges than shards", Options{Tokenizer: tok, ShardTokens: 50000, Mix: shares, Seed: 3}, 3, 16, 3},
		{"one range", Options{Tokenizer: tok, ShardTokens: 5000, Mix: shares, Seed: 3}, 1, 1, 1},
		{"input order", Options{Tokenizer: tok, ShardTokens: 4000}, 3, 5, 2},
		{"input order, budget, long documents split", Options{Tokenizer: tok, ShardTokens: 3000, SplitTokens: 700, BudgetTokens: 40000}, 4, 6, 3},
		{"input order, budget inside a split document", Options{Tokenizer: tok, ShardTokens: 2000, SplitTokens: 300, BudgetTokens: 20011, TokenFiles: true}, 3, 4, 2},
	}
	for _, c := range cases {
		want, wantRun, wantLeft := buildLeftOut(t, docs, c.opt)
		got, gotRun, gotLeft := buildRanges(t, docs, c.opt, c.parts, c.ranges, c.tasks)
		if len(want.Files) < 2 && c.name != "more ranges than shards" {
			t.Fatalf("%s: only %d shards: the case tests nothing", c.name, len(want.Files))
		}
		nb := 0
		for _, sp := range want.Splits {
			if sp.Reason == "shard_boundary" {
				nb++
			}
		}
		t.Logf("%s: %d shards, %d splits (%d at shard boundaries), %d left out", c.name, len(want.Files), len(want.Splits), nb, len(wantLeft))
		a, b := shardBytes(t, wantRun, want), shardBytes(t, gotRun, got)
		if len(a) != len(b) {
			t.Fatalf("%s: %d shards, want %d", c.name, len(b), len(a))
		}
		for i := range a {
			if !bytes.Equal(a[i], b[i]) {
				t.Fatalf("%s: shard %d differs", c.name, i)
			}
		}
		for i, f := range want.Files {
			if f.TokenFile == nil {
				continue
			}
			for _, p := range []string{f.TokenFile.Path, f.TokenFile.Index} {
				x, _ := os.ReadFile(filepath.Join(wantRun, p))
				y, err := os.ReadFile(filepath.Join(gotRun, p))
				if err != nil || !bytes.Equal(x, y) {
					t.Fatalf("%s: token file %s of shard %d differs (%v)", c.name, p, i, err)
				}
			}
		}
		wj, _ := json.Marshal(want)
		gj, _ := json.Marshal(got)
		if !bytes.Equal(wj, gj) {
			t.Errorf("%s: report differs:\n got %s\nwant %s", c.name, gj, wj)
		}
		for i := range gotLeft {
			gotLeft[i].Part = 0 // the part a document came from: one Builder has one
		}
		if !reflect.DeepEqual(wantLeft, gotLeft) {
			t.Errorf("%s: %d left-out documents, want %d (or another order)", c.name, len(gotLeft), len(wantLeft))
		}
	}
}
