package domain

import (
	"math"
	"sort"

	"github.com/zeebo/xxh3"
)

// Sampling without replacement in proportion to importance weights, as
// Xie et al. 2023 resample: with the Gumbel top-k trick, adding an
// independent standard Gumbel variable to each log weight and keeping the
// k largest sums draws k items without replacement with probability
// proportional to the weights (Kool, van Hoof, Welling 2019, "Stochastic
// Beams and Where to Find Them", section 3; the k = 1 case is the
// Gumbel-max trick). The Gumbel variable of a document comes from a hash
// of the seed and the document's key, not from a generator stepped in
// input order, so the sample is the same for any number of workers.

// GumbelKey returns logWeight + G, where G = −ln(−ln U) is a standard
// Gumbel variable and U ∈ (0, 1) is derived from xxh3(key) with the seed.
func GumbelKey(logWeight float64, seed uint64, key string) float64 {
	h := mix64(xxh3.HashStringSeed(key, seed))
	// 53 random bits, shifted off 0 and 1: U ∈ (0, 1).
	u := (float64(h>>11) + 0.5) / (1 << 53)
	return logWeight - math.Log(-math.Log(u))
}

// TopK returns the indexes of the k largest keys, largest first; equal
// keys keep index order. k is clamped to [0, len(keys)].
func TopK(keys []float64, k int) []int {
	if k > len(keys) {
		k = len(keys)
	}
	if k <= 0 {
		return nil
	}
	idx := make([]int, len(keys))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return keys[idx[a]] > keys[idx[b]] })
	return idx[:k]
}

// KeepCount is the number of documents kept by keep_fraction f of n
// documents: round(f·n), at least 1 when f > 0 and n > 0.
func KeepCount(f float64, n int) int {
	if f <= 0 || n <= 0 {
		return 0
	}
	k := int(math.Round(f * float64(n)))
	if k < 1 {
		k = 1
	}
	if k > n {
		k = n
	}
	return k
}

func nan() float64 { return math.NaN() }
