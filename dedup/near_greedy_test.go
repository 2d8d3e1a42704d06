package dedup

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// chainCorpus returns families of documents made by repeated editing: each
// child is its parent with edits words replaced, so neighbours in a family
// are near copies while the ends of a long family are not. The order is
// shuffled.
func chainCorpus(families, length, edits int, seed uint64) []string {
	rng := rand.New(rand.NewPCG(seed, 3))
	var texts []string
	for f := 0; f < families; f++ {
		w := strings.Fields(randomText(rng, 200+rng.IntN(100)))
		for g := 0; g < length; g++ {
			texts = append(texts, strings.Join(w, " "))
			w = append([]string(nil), w...)
			for e := 0; e < edits; e++ {
				w[rng.IntN(len(w))] = fmt.Sprintf("ed%d", rng.IntN(100000))
			}
		}
	}
	rng.Shuffle(len(texts), func(i, j int) { texts[i], texts[j] = texts[j], texts[i] })
	return texts
}

// checkNoChains checks the invariant of the greedy pass: every removed
// document's "of" is a kept document, ranked before it by the keep rule,
// whose similarity to it — recomputed here from the texts — is at least
// the threshold and equals the reported one.
func checkNoChains(t *testing.T, name string, texts []string, res []result, opt NearOptions, prio func(int) uint64) {
	t.Helper()
	m, _ := NewMinHasher(128, 5, opt.Seed)
	index := map[string]int{}
	for i := range texts {
		index[docID(i)] = i
	}
	for i, r := range res {
		if !r.removed {
			continue
		}
		k, ok := index[r.m.Of]
		if !ok {
			t.Fatalf("%s: doc %d removed of unknown %q", name, i, r.m.Of)
		}
		if res[k].removed {
			t.Errorf("%s: doc %d removed of %d, which is itself removed (a chain)", name, i, k)
		}
		if prio != nil && (prio(k) > prio(i) || prio(k) == prio(i) && k > i) {
			t.Errorf("%s: doc %d removed of %d, which the keep rule ranks after it", name, i, k)
		}
		var sim float64
		if opt.VerifyExact {
			sim = ExactJaccard(SortedSet(m.ShingleHashes(texts[i], nil)), SortedSet(m.ShingleHashes(texts[k], nil)))
		} else {
			a, _ := m.Signature(texts[i], nil)
			b, _ := m.Signature(texts[k], nil)
			sim = EstimateJaccard(a, b)
		}
		if sim < opt.Threshold || math.Abs(sim-r.m.Similarity) > 0.5e-4+1e-12 {
			t.Errorf("%s: doc %d removed of %d with similarity %.4f (reported %.4f), threshold %.2f", name, i, k, sim, r.m.Similarity, opt.Threshold)
		}
	}
}

// Families of 6 generations, 5 edits each (neighbours ≈ 0.85 Jaccard,
// ends ≈ 0.45): removed documents point at kept documents that are
// themselves similar enough, under every keep rule and both verifications;
// a document similar only to removed ones is kept.
func TestNearNoChains(t *testing.T) {
	texts := chainCorpus(40, 6, 5, 7)
	m, _ := NewMinHasher(128, 5, 0)
	sigs := make([][]uint32, len(texts))
	for i, s := range texts {
		sigs[i], _ = m.Signature(s, nil)
	}
	rules := map[string]KeepRule{"first": {}, "longest": {By: KeepLongest}}
	for name, rule := range rules {
		for _, exact := range []bool{false, true} {
			opt := NearOptions{VerifyExact: exact, Threshold: 0.8}
			prio := func(i int) uint64 { return rule.Priority(KeepFacts{Text: texts[i]}) }
			res, st := runNearKeep(t, texts, opt, 2, docID, prio)
			label := fmt.Sprintf("%s exact=%v", name, exact)
			checkNoChains(t, label, texts, res, opt, prio)
			// Kept documents whose only verified partners were removed: the
			// old cluster rule would have removed them through a chain.
			kept := 0
			for i, r := range res {
				if r.removed {
					continue
				}
				for j, q := range res {
					if q.removed && j != i && EstimateJaccard(sigs[i], sigs[j]) >= 0.8 {
						kept++
						break
					}
				}
			}
			if st.Removed == 0 || kept == 0 {
				t.Errorf("%s: removed %d, kept next to a removed copy %d: the corpus tests nothing", label, st.Removed, kept)
			}
		}
	}
}

// Decisions and work do not depend on the partition count, the number of
// scanning goroutines or the memory budget (spilling), for any keep rule.
func TestNearPartitionInvariance(t *testing.T) {
	texts, _ := nearCorpus(200, 9)
	texts = append(texts, chainCorpus(10, 5, 4, 9)...)
	rules := []KeepRule{{}, {By: KeepLongest}}
	for _, rule := range rules {
		prio := func(i int) uint64 { return rule.Priority(KeepFacts{Text: texts[i]}) }
		base, st0 := runNearKeep(t, texts, NearOptions{MemoryBudget: 1 << 30}, 1, docID, prio)
		if st0.Removed == 0 {
			t.Fatal("nothing removed")
		}
		for _, c := range []struct {
			parts, workers int
			budget         int64
		}{{1, 1, 1 << 30}, {5, 3, 1 << 30}, {300, 2, 1 << 30}, {7, 4, 2000}} {
			got, st := runNearKeep(t, texts, NearOptions{Partitions: c.parts, MemoryBudget: c.budget}, c.workers, docID, prio)
			for i := range base {
				if got[i] != base[i] {
					t.Fatalf("%v partitions %d workers %d budget %d: doc %d %+v, want %+v", rule, c.parts, c.workers, c.budget, i, got[i], base[i])
				}
			}
			if st.Candidates != st0.Candidates || st.Verified != st0.Verified || st.Removed != st0.Removed {
				t.Errorf("%v partitions %d: stats %+v, want %+v", rule, c.parts, st, st0)
			}
			if c.budget < 1<<20 && st.Runs == 0 {
				t.Errorf("budget %d did not spill", c.budget)
			}
			// Past the budget: the partition sort and the pair sort (3/4
			// and 1/4 of it; a run holds at least 4 records), the smallest
			// pair table (1024 entries) and, for a keep rule, the rank
			// tables (8 bytes/doc) and 1 bit/doc.
			if limit := c.budget + 8*16 + 8*1024 + 9*int64(len(texts)); c.budget < 1<<20 && st.ResidentBytes > limit {
				t.Errorf("budget %d: %d bytes resident, want at most %d", c.budget, st.ResidentBytes, limit)
			}
		}
	}
}

// 100,000 documents sharing one band key cost BucketCap comparisons each,
// not 5·10^9; and 10,000 identical documents are all removed of the first.
func TestNearBucketCapBoundsWork(t *testing.T) {
	const n, k, bands = 100000, 16, 4
	x, err := NewNearIndex(NearOptions{Permutations: k, Bands: bands, Threshold: 0.8, TempDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	rng := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < n; i++ {
		sig := make([]uint32, k)
		for j := range sig {
			sig[j] = rng.Uint32()
		}
		copy(sig, []uint32{1, 2, 3, 4}) // band 0 equal for all
		if err := x.Add(uint64(i), docID(i), &NearKey{Sig: sig, Bands: x.Banding().Hashes(sig, nil)}); err != nil {
			t.Fatal(err)
		}
	}
	if err := x.Reduce(); err != nil {
		t.Fatal(err)
	}
	st := x.Stats()
	const c = DefaultBucketCap
	want := int64(c*(n-c) + c*(c-1)/2) // member i meets min(i, cap) heads
	// Other bands collide by chance (3 bands · n²/2^33 ≈ 3.5 pairs).
	if st.Candidates < want || st.Candidates > want+100 || st.Removed != 0 {
		t.Fatalf("comparisons %d, want %d (+ a few chance collisions); removed %d", st.Candidates, want, st.Removed)
	}

	const m = 10000
	sig := make([]uint32, k)
	for j := range sig {
		sig[j] = rng.Uint32()
	}
	texts := make([]*NearKey, m)
	y, err := NewNearIndex(NearOptions{Permutations: k, Bands: bands, Threshold: 0.8, TempDir: t.TempDir(), MemoryBudget: 1 << 16})
	if err != nil {
		t.Fatal(err)
	}
	defer y.Close()
	for i := range texts {
		if err := y.Add(uint64(i), docID(i), &NearKey{Sig: sig, Bands: y.Banding().Hashes(sig, nil)}); err != nil {
			t.Fatal(err)
		}
	}
	if err := y.Reduce(); err != nil {
		t.Fatal(err)
	}
	st = y.Stats()
	if st.Candidates != bands*int64(c*(m-c)+c*(c-1)/2) || st.Removed != m-1 {
		t.Fatalf("identical documents: %d comparisons, %d removed", st.Candidates, st.Removed)
	}
	for i := 1; i < m; i++ {
		if mt, ok := y.Lookup(uint64(i)); !ok || mt.Of != docID(0) || mt.Similarity != 1 {
			t.Fatalf("doc %d: %+v %v", i, mt, ok)
		}
	}
}

// A previous run's kept documents win whatever this run's keep rule says:
// a longer near copy in this run is removed "of" the previous run's one.
func TestNearAgainstPreviousRunKeepsPrevious(t *testing.T) {
	dir := t.TempDir()
	texts := chainCorpus(20, 2, 3, 11) // pairs of near copies
	prefix := dir + "/run1/keys/near_dedup"
	first, _ := runNearKeep(t, texts[:20], NearOptions{KeysOut: prefix}, 1, func(i int) string { return fmt.Sprintf("old-%d", i) }, nil)
	longest := KeepRule{By: KeepLongest}
	prio := func(i int) uint64 { return longest.Priority(KeepFacts{Text: texts[i]}) }
	res, st := runNearKeep(t, texts, NearOptions{Against: prefix}, 2, docID, prio)
	for i := 0; i < 20; i++ {
		// Its own text was kept by run 1 (similarity 1); "of" may name an
		// earlier kept document of run 1 that is also similar.
		if !first[i].removed && (!res[i].removed || !res[i].m.Against || !strings.HasPrefix(res[i].m.Of, "old-")) {
			t.Errorf("doc %d (kept by run 1): %+v, want removed against run 1", i, res[i])
		}
	}
	for i, r := range res {
		if r.removed && !r.m.Against && strings.HasPrefix(r.m.Of, "old-") {
			t.Errorf("doc %d: of %s without against", i, r.m.Of)
		}
	}
	if st.RemovedPrev < 10 {
		t.Errorf("removed against the previous run: %d", st.RemovedPrev)
	}
}
