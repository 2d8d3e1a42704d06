package dedup

import (
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"
)

// clusterCorpus returns clusters of near copies of one original each
// (sizes given), every copy the original with 0-10 words replaced (word
// 5-gram Jaccard to the original from 1 down to about 0.65, so some pairs
// of copies are below the threshold), plus singletons; shuffled. cluster[i]
// is the document's cluster (-1 for singletons).
//
// With drift, each copy is instead made from a random earlier member of
// its cluster with 1-4 words replaced (copies of copies, as mirrors of
// mirrors drift), so a cluster spreads far from its original.
func clusterCorpus(sizes []int, singletons int, drift bool, seed uint64) (texts []string, cluster []int) {
	rng := rand.New(rand.NewPCG(seed, 17))
	for c, n := range sizes {
		members := [][]string{strings.Fields(randomText(rng, 200+rng.IntN(100)))}
		for i := 0; i < n; i++ {
			src, edits := members[0], rng.IntN(11)
			if drift {
				src, edits = members[rng.IntN(len(members))], 1+rng.IntN(4)
			}
			w := append([]string(nil), src...)
			for e := edits; e > 0; e-- {
				w[rng.IntN(len(w))] = fmt.Sprintf("ed%d", rng.IntN(1000000))
			}
			members = append(members, w)
			texts, cluster = append(texts, strings.Join(w, " ")), append(cluster, c)
		}
	}
	for i := 0; i < singletons; i++ {
		texts, cluster = append(texts, randomText(rng, 200+rng.IntN(100))), append(cluster, -1)
	}
	rng.Shuffle(len(texts), func(i, j int) {
		texts[i], texts[j] = texts[j], texts[i]
		cluster[i], cluster[j] = cluster[j], cluster[i]
	})
	return texts, cluster
}

// The bucket cap's effect on recall, measured against the exhaustive
// greedy rule (every earlier kept document of the same cluster compared,
// no LSH), on clusters of up to 300 copies. The table is the one in
// docs/dedup.md (go test ./dedup -run BucketCapRecall -v).
func TestNearBucketCapRecall(t *testing.T) {
	sizes := []int{300, 100, 100}
	for i := 0; i < 5; i++ {
		sizes = append(sizes, 30)
	}
	for i := 0; i < 40; i++ {
		sizes = append(sizes, 3)
	}
	for _, drift := range []bool{false, true} {
		texts, cluster := clusterCorpus(sizes, 500, drift, 5)
		capRecall(t, texts, cluster, len(sizes), drift)
	}
}

func capRecall(t *testing.T, texts []string, cluster []int, clusters int, drift bool) {
	const thr = 0.8
	m, _ := NewMinHasher(128, 5, 0)
	sigs := make([][]uint32, len(texts))
	for i, s := range texts {
		sigs[i], _ = m.Signature(s, nil)
	}
	// Exhaustive greedy: in input order, a document is removed when an
	// earlier kept document of its cluster has estimated Jaccard >= thr.
	ideal := make([]bool, len(texts))
	keptOf := make([][]int, clusters)
	idealN, inClusters := 0, 0
	for i, c := range cluster {
		if c < 0 {
			continue
		}
		inClusters++
		for _, k := range keptOf[c] {
			if EstimateJaccard(sigs[i], sigs[k]) >= thr {
				ideal[i] = true
				idealN++
				break
			}
		}
		if !ideal[i] {
			keptOf[c] = append(keptOf[c], i)
		}
	}
	t.Logf("drift=%v: %d documents, %d in clusters; exhaustive greedy removes %d", drift, len(texts), inClusters, idealN)
	t.Logf("| cap | removed | of those also removed by the exhaustive rule | recall vs exhaustive | comparisons |")
	recall := map[int]float64{}
	for _, cap := range []int{1, 2, 4, 8, 16, 1 << 30} {
		res, st := runNearKeep(t, texts, NearOptions{Threshold: thr, BucketCap: cap}, 2, docID, nil)
		both := 0
		for i, r := range res {
			if r.removed && ideal[i] {
				both++
			}
		}
		recall[cap] = float64(both) / float64(idealN)
		name := fmt.Sprint(cap)
		if cap == 1<<30 {
			name = "none"
		}
		t.Logf("| %s | %d | %d | %.4f | %d |", name, st.Removed, both, recall[cap], st.Candidates)
	}
	// LSH alone misses pairs with probability 1-P(s) (P(0.8) = 0.947 at
	// 16 bands × 8 rows, MMDS ch. 3); the cap of 8 may cost at most a
	// point on top of that.
	if recall[1<<30] < 0.9 || recall[DefaultBucketCap] < recall[1<<30]-0.01 {
		t.Errorf("drift=%v: recall with cap %d: %.4f, without cap: %.4f", drift, DefaultBucketCap, recall[DefaultBucketCap], recall[1<<30])
	}
}
