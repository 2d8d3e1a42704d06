package dedup

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
)

// nearCorpus returns originals, near copies (a few words replaced: word
// 5-gram Jaccard ≈ 0.9), exact copies and unrelated documents, with the
// index of the original each copy was made from (-1 for none).
func nearCorpus(n int, seed uint64) (texts []string, copyOf []int) {
	rng := rand.New(rand.NewPCG(seed, seed+1))
	for i := 0; i < n; i++ {
		switch {
		case i > 20 && rng.IntN(5) == 0:
			src := rng.IntN(i)
			for copyOf[src] >= 0 {
				src = copyOf[src]
			}
			w := strings.Fields(texts[src])
			for e := 0; e < 2; e++ {
				w[rng.IntN(len(w))] = fmt.Sprintf("edit%d", rng.IntN(1000))
			}
			texts, copyOf = append(texts, strings.Join(w, " ")), append(copyOf, src)
		case i > 20 && rng.IntN(10) == 0:
			src := rng.IntN(i)
			for copyOf[src] >= 0 {
				src = copyOf[src]
			}
			texts, copyOf = append(texts, texts[src]), append(copyOf, src)
		default:
			texts, copyOf = append(texts, randomText(rng, 150+rng.IntN(150))), append(copyOf, -1)
		}
	}
	return texts, copyOf
}

func order(i int) uint64 { return uint64(i)*5 + 2 }

// runNear scans texts with the given number of goroutines in a shuffled
// order, adds keys in input order, reduces and looks every document up.
func runNear(t *testing.T, texts []string, opt NearOptions, workers int, ids func(int) string) ([]result, IndexStats) {
	t.Helper()
	return runNearKeep(t, texts, opt, workers, ids, nil)
}

// runNearKeep is runNear with a keep priority per document (nil: all 0).
func runNearKeep(t testing.TB, texts []string, opt NearOptions, workers int, ids func(int) string, prio func(int) uint64) ([]result, IndexStats) {
	t.Helper()
	if opt.TempDir == "" {
		opt.TempDir = t.TempDir()
	}
	if opt.Threshold == 0 {
		opt.Threshold = 0.8
	}
	x, err := NewNearIndex(opt)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	keys := make([]*NearKey, len(texts))
	perm := rand.New(rand.NewPCG(uint64(workers), 99)).Perm(len(texts))
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for j := w; j < len(perm); j += workers {
				keys[perm[j]] = x.Key(texts[perm[j]])
			}
		}(w)
	}
	wg.Wait()
	for i, k := range keys {
		if k != nil && prio != nil {
			k.Priority = prio(i)
		}
		if err := x.Add(order(i), ids(i), k); err != nil {
			t.Fatal(err)
		}
	}
	if err := x.Reduce(); err != nil {
		t.Fatal(err)
	}
	out := make([]result, len(texts))
	for i := range texts {
		m, ok := x.Lookup(order(i))
		out[i] = result{ok, m}
	}
	return out, x.Stats()
}

func docID(i int) string { return fmt.Sprintf("doc-%04d", i) }

func TestNearDedupFindsPlantedCopies(t *testing.T) {
	texts, copyOf := nearCorpus(600, 1)
	res, st := runNear(t, texts, NearOptions{}, 1, docID)
	copies := 0
	for i, r := range res {
		if copyOf[i] < 0 {
			if r.removed {
				t.Errorf("original %d removed as copy of %s (similarity %v)", i, r.m.Of, r.m.Similarity)
			}
			continue
		}
		copies++
		if !r.removed {
			t.Errorf("copy %d of %d kept", i, copyOf[i])
			continue
		}
		if r.m.Of != docID(copyOf[i]) {
			t.Errorf("copy %d: of %s, want %s", i, r.m.Of, docID(copyOf[i]))
		}
		if r.m.Similarity < 0.8 || r.m.Similarity > 1 {
			t.Errorf("copy %d: similarity %v", i, r.m.Similarity)
		}
	}
	if copies < 100 || st.Removed != int64(copies) {
		t.Errorf("copies %d, removed %d", copies, st.Removed)
	}
}

// Scan order and worker count do not change any decision, and the spill
// path (tiny budget) decides exactly like the in-memory path.
func TestNearDeterministicAndSpill(t *testing.T) {
	texts, _ := nearCorpus(400, 2)
	base, st0 := runNear(t, texts, NearOptions{MemoryBudget: 1 << 30}, 1, docID)
	if st0.Runs != 0 {
		t.Fatalf("in-memory run spilled %d runs", st0.Runs)
	}
	for _, c := range []struct {
		workers int
		budget  int64
	}{{4, 1 << 30}, {3, 256}, {1, 64}} {
		got, st := runNear(t, texts, NearOptions{MemoryBudget: c.budget}, c.workers, docID)
		if c.budget < 1000 && st.Runs < maxFanIn {
			t.Errorf("budget %d: only %d runs", c.budget, st.Runs)
		}
		for i := range base {
			if got[i] != base[i] {
				t.Fatalf("workers %d budget %d: doc %d %+v, want %+v", c.workers, c.budget, i, got[i], base[i])
			}
		}
		if st.Candidates != st0.Candidates || st.Removed != st0.Removed {
			t.Errorf("stats differ: %+v vs %+v", st, st0)
		}
	}
}

func TestNearVerifyExact(t *testing.T) {
	texts, copyOf := nearCorpus(300, 3)
	res, _ := runNear(t, texts, NearOptions{VerifyExact: true, MemoryBudget: 512}, 2, docID)
	m, _ := NewMinHasher(128, 5, 0)
	for i, r := range res {
		if copyOf[i] < 0 {
			if r.removed {
				t.Errorf("original %d removed", i)
			}
			continue
		}
		ex := ExactJaccard(SortedSet(m.ShingleHashes(texts[i], nil)), SortedSet(m.ShingleHashes(texts[copyOf[i]], nil)))
		if ex >= 0.8 && !r.removed {
			t.Errorf("copy %d (exact J %.3f) kept", i, ex)
		}
		if r.removed && r.m.Of == docID(copyOf[i]) && fmt.Sprintf("%.4f", r.m.Similarity) != fmt.Sprintf("%.4f", ex) {
			t.Errorf("copy %d: similarity %v, exact Jaccard %.4f", i, r.m.Similarity, ex)
		}
	}
}

func TestNearAgainstPreviousRun(t *testing.T) {
	dir := t.TempDir()
	texts, _ := nearCorpus(200, 4)
	for _, exact := range []bool{false, true} {
		prefix := filepath.Join(dir, fmt.Sprint(exact), "run1", "keys", "near_dedup")
		first, st1 := runNear(t, texts[:100], NearOptions{KeysOut: prefix, VerifyExact: exact}, 1, func(i int) string { return fmt.Sprintf("old-%d", i) })
		// The second run re-reads every document of the first run (all of
		// them are copies of kept ones, or removed there) plus new ones.
		res, st2 := runNear(t, texts, NearOptions{Against: prefix, VerifyExact: exact}, 2, docID)
		for i := 0; i < 100; i++ {
			r := res[i]
			if !r.removed || !r.m.Against {
				t.Fatalf("exact=%v: doc %d (in the previous run) not removed against it: %+v", exact, i, r)
			}
			if !first[i].removed && r.m.Of != fmt.Sprintf("old-%d", i) {
				t.Errorf("doc %d kept by run 1 should be removed of old-%d, got %s", i, i, r.m.Of)
			}
		}
		if st2.RemovedPrev < 100 || st1.Docs != 100 {
			t.Errorf("exact=%v: stats %+v / %+v", exact, st1, st2)
		}
	}
	// Parameters must match the previous run.
	prefix := filepath.Join(dir, "false", "run1", "keys", "near_dedup")
	if _, err := NewNearIndex(NearOptions{Against: prefix, Seed: 5, TempDir: t.TempDir()}); err == nil || !strings.Contains(err.Error(), "seed") {
		t.Fatalf("seed mismatch: %v", err)
	}
}

func BenchmarkNearIndex(b *testing.B) {
	texts, _ := nearCorpus(2000, 5)
	total := 0
	for _, s := range texts {
		total += len(s)
	}
	b.SetBytes(int64(total))
	for i := 0; i < b.N; i++ {
		x, err := NewNearIndex(NearOptions{Threshold: 0.8, TempDir: b.TempDir()})
		if err != nil {
			b.Fatal(err)
		}
		for j, s := range texts {
			x.Add(order(j), docID(j), x.Key(s))
		}
		if err := x.Reduce(); err != nil {
			b.Fatal(err)
		}
		x.Close()
	}
}

func TestSortBandKeysRadix(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	keys := make([]uint64, 100000)
	for i := range keys {
		keys[i] = bandKey(rng.Uint32()%5000, uint32(i)) // many equal hashes
	}
	want := slices.Clone(keys)
	slices.Sort(want)
	sortBandKeys(keys, make([]uint64, len(keys)), false)
	if !slices.Equal(keys, want) {
		t.Fatal("radix sort of band keys differs from a comparison sort")
	}
}
