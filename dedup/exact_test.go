package dedup

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
)

type result struct {
	removed bool
	m       Match
}

func runExact(t *testing.T, texts []string, opt ExactOptions) ([]result, IndexStats) {
	t.Helper()
	if opt.TempDir == "" {
		opt.TempDir = t.TempDir()
	}
	x, err := NewExactIndex(opt)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	for i, s := range texts {
		h, ok := ExactHash(s, opt.Norm)
		if !ok {
			continue
		}
		if err := x.Add(uint64(i*3+1), fmt.Sprintf("d%d", i), h); err != nil {
			t.Fatal(err)
		}
	}
	if err := x.Reduce(); err != nil {
		t.Fatal(err)
	}
	out := make([]result, len(texts))
	for i := range texts {
		m, ok := x.Lookup(uint64(i*3 + 1))
		out[i] = result{ok, m}
	}
	return out, x.Stats()
}

func TestNormalization(t *testing.T) {
	cases := []struct {
		in   string
		norm Normalization
		want string
	}{
		{"  Hello,\n\tWORLD!  ", Normalization{}, "hello, world!"},
		{"Hello, world!", Normalization{FoldPunct: true}, "hello world"},
		{"a , b", Normalization{FoldPunct: true}, "a b"},
		{"Version 2.15 of 2024", Normalization{FoldDigits: true}, "version 0.00 of 0000"},
		{"ÉCOLE\u00a0Élan", Normalization{}, "école élan"},
		{" \n ", Normalization{}, ""},
	}
	for _, c := range cases {
		if got := string(c.norm.Append(nil, c.in)); got != c.want {
			t.Errorf("%q %+v: got %q, want %q", c.in, c.norm, got, c.want)
		}
	}
}

func TestExactDedupKeepsEarliest(t *testing.T) {
	texts := []string{
		"The keel bolts were replaced.",   // 0 kept
		"Varnish the teak rail twice.",    // 1 kept
		"the KEEL bolts  were\nreplaced.", // 2 copy of 0
		"The keel bolts were replaced",    // 3 differs by punctuation
		"Varnish the teak rail twice.",    // 4 copy of 1
		"   ",                             // 5 empty: not indexed
		"   ",                             // 6 empty
		"the keel bolts were replaced.",   // 7 copy of 0
	}
	res, st := runExact(t, texts, ExactOptions{})
	want := map[int]string{2: "d0", 4: "d1", 7: "d0"}
	for i, r := range res {
		if of, dup := want[i]; dup != r.removed || r.m.Of != of {
			t.Errorf("doc %d: removed=%v of=%q, want removed=%v of=%q", i, r.removed, r.m.Of, dup, of)
		}
	}
	if st.Docs != 6 || st.Removed != 3 {
		t.Errorf("stats %+v", st)
	}
	// With fold_punct, doc 3 is a copy too.
	res, _ = runExact(t, texts, ExactOptions{Norm: Normalization{FoldPunct: true}})
	if !res[3].removed || res[3].m.Of != "d0" {
		t.Errorf("fold_punct: doc 3 %+v", res[3])
	}
}

func exactCorpus(n int) []string {
	rng := rand.New(rand.NewPCG(11, 12))
	var texts []string
	for i := 0; i < n; i++ {
		if i > 10 && rng.IntN(3) == 0 {
			texts = append(texts, texts[rng.IntN(len(texts))])
			continue
		}
		texts = append(texts, randomText(rng, 5+rng.IntN(30)))
	}
	return texts
}

// The spill path (a budget of a few records, hundreds of runs) decides
// exactly like the in-memory path.
func TestExactSpillIdentical(t *testing.T) {
	texts := exactCorpus(2000)
	mem, st1 := runExact(t, texts, ExactOptions{MemoryBudget: 1 << 30})
	spill, st2 := runExact(t, texts, ExactOptions{MemoryBudget: 200})
	if st1.Runs != 0 || st2.Runs < maxFanIn {
		t.Fatalf("runs: memory %d, spill %d", st1.Runs, st2.Runs)
	}
	if st1.Removed == 0 {
		t.Fatal("corpus has no copies")
	}
	for i := range mem {
		if mem[i] != spill[i] {
			t.Fatalf("doc %d: memory %+v, spill %+v", i, mem[i], spill[i])
		}
	}
	if st2.ResidentBytes > 200+exactRecLen*minRunRecords {
		t.Errorf("resident %d bytes over a 200-byte budget", st2.ResidentBytes)
	}
}

func TestExactAgainstPreviousRun(t *testing.T) {
	dir := t.TempDir()
	prev := filepath.Join(dir, "run1", "keys", "exact_dedup")
	first := []string{"alpha hull", "beta keel", "alpha hull", "gamma mast"}
	runExact(t, first, ExactOptions{KeysOut: prev})
	second := []string{"beta keel", "delta boom", "Gamma  MAST", "delta boom", "alpha hull"}
	res, st := runExact(t, second, ExactOptions{Against: prev, KeysOut: filepath.Join(dir, "run2", "keys", "exact_dedup")})
	want := []result{
		{true, Match{Of: "d1", Similarity: 1, Against: true}},
		{false, Match{}},
		{true, Match{Of: "d3", Similarity: 1, Against: true}},
		{true, Match{Of: "d1", Similarity: 1}},
		{true, Match{Of: "d0", Similarity: 1, Against: true}},
	}
	for i := range want {
		if res[i] != want[i] {
			t.Errorf("doc %d: %+v, want %+v", i, res[i], want[i])
		}
	}
	if st.RemovedPrev != 3 {
		t.Errorf("RemovedPrev %d, want 3", st.RemovedPrev)
	}
	// Normalization mismatch is refused with a clear error.
	if _, err := NewExactIndex(ExactOptions{Against: prev, Norm: Normalization{FoldDigits: true}, TempDir: t.TempDir()}); err == nil {
		t.Fatal("mismatched normalization accepted")
	}
	if _, err := NewExactIndex(ExactOptions{Against: filepath.Join(dir, "nope"), TempDir: t.TempDir()}); err == nil {
		t.Fatal("missing keys accepted")
	}
}

func TestExactOutOfOrder(t *testing.T) {
	x, err := NewExactIndex(ExactOptions{TempDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	h, _ := ExactHash("a", Normalization{})
	x.Add(5, "a", h)
	if err := x.Add(5, "b", h); err == nil {
		t.Fatal("repeated order key accepted")
	}
}
