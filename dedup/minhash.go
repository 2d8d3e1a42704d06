package dedup

// MinHash signatures over word n-gram shingles (Broder 1997, "On the
// resemblance and containment of documents").
//
// A document's shingles are its overlapping runs of n words (words as cut
// by AppendWords: lower-cased runs of letters and digits, joined by single
// spaces); a document with fewer than n words has one shingle made of all
// its words, and a document with no words has no signature. Each shingle
// is hashed once with 64-bit xxh3. The k "permutations" are cheap
// strongly universal hash functions (Dietzfelbinger's multiply-add-shift:
// h_i(x) = (a_i·x + b_i) mod 2^64 >> 32 for the 32-bit input x = the high
// half of the shingle hash, with a_i, b_i drawn from a splitmix64 stream of
// the run seed). Signature value i is the minimum of h_i over the
// document's shingles, kept as 32 bits, so the fraction of equal values in
// two signatures estimates the Jaccard similarity of their shingle sets
// with standard error sqrt(J(1-J)/k); truncating to 32 bits adds a bias of
// at most 2^-32.
//
// The hot loop runs permutation-major: the shingle hashes of one document
// are materialized once, then each group of permutations sweeps them
// keeping running minima in registers: 32 at a time in AVX-512 vector
// registers where the CPU has AVX-512F/DQ (minhash_amd64.s), four at a time
// in the portable loop otherwise; both give the same bits. There is no
// allocation per word or per shingle (scratch buffers are pooled).
//
// Memory: the signature is 4·k bytes per document (512 bytes at k = 128);
// the near-duplicate index writes it to a temp file, never keeps it.
//
// Not implemented: weighted MinHash, one-permutation hashing with
// densification, b-bit signatures below 32 bits.

import (
	"fmt"
	"math"
	"slices"
	"sync"

	"github.com/zeebo/xxh3"
)

// Tuning constants of MinHash.
const (
	// maxPermutations bounds k; beyond 1024 the estimate gains little and
	// signatures get large.
	maxPermutations = 1024
	// maxPooledScratch drops scratch buffers grown by huge documents so a
	// single 50 MB page does not stay resident in every pool slot.
	maxPooledScratch = 4 << 20
	// seedSalt separates the permutation stream from other uses of the
	// run seed.
	seedSalt = 0x6d696e68617368 // "minhash"
)

// MinHasher computes MinHash signatures with k permutations over word
// n-gram shingles. It is immutable and safe for concurrent use.
type MinHasher struct {
	k, n int
	seed uint64
	a, b []uint64
}

// NewMinHasher returns a MinHasher with k permutations over n-word
// shingles, its permutations derived from seed.
func NewMinHasher(k, n int, seed uint64) (*MinHasher, error) {
	if k < 1 || k > maxPermutations {
		return nil, fmt.Errorf("dedup: permutations %d out of range [1, %d]", k, maxPermutations)
	}
	if n < 1 {
		return nil, fmt.Errorf("dedup: ngram %d must be at least 1", n)
	}
	m := &MinHasher{k: k, n: n, seed: seed, a: make([]uint64, k), b: make([]uint64, k)}
	st := seed ^ seedSalt
	for i := 0; i < k; i++ {
		m.a[i] = splitmix64(&st)
		m.b[i] = splitmix64(&st)
	}
	return m, nil
}

// splitmix64 advances *s and returns the next value of the splitmix64
// sequence (Steele, Lea, Flood 2014), used to draw seeded coefficients.
func splitmix64(s *uint64) uint64 {
	*s += 0x9e3779b97f4a7c15
	z := *s
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// Permutations returns k.
func (m *MinHasher) Permutations() int { return m.k }

// NGram returns the shingle length in words.
func (m *MinHasher) NGram() int { return m.n }

// Seed returns the seed the permutations were drawn from.
func (m *MinHasher) Seed() uint64 { return m.seed }

type scratch struct {
	words []byte
	ends  []int32
	xs    []uint64 // 32-bit permutation inputs, zero-extended for the vector kernels
}

var scratchPool = sync.Pool{New: func() any { return new(scratch) }}

func putScratch(s *scratch) {
	if cap(s.words) > maxPooledScratch || cap(s.xs)*8 > maxPooledScratch {
		return
	}
	scratchPool.Put(s)
}

// forEachShingle calls f with the xxh3-64 hash of every shingle of text in
// order (repeated shingles repeat). It returns the number of words.
func (m *MinHasher) forEachShingle(sc *scratch, text string, f func(h uint64)) int {
	sc.words, sc.ends = AppendWords(sc.words[:0], sc.ends[:0], text)
	words, ends := sc.words, sc.ends
	nw := len(ends)
	if nw == 0 {
		return 0
	}
	if nw < m.n {
		f(xxh3.Hash(words))
		return nw
	}
	for i := 0; i+m.n <= nw; i++ {
		start := 0
		if i > 0 {
			start = int(ends[i-1]) + 1
		}
		f(xxh3.Hash(words[start:ends[i+m.n-1]]))
	}
	return nw
}

// ShingleHashes appends the xxh3-64 hash of every shingle of text to dst,
// in text order (repeated shingles repeat).
func (m *MinHasher) ShingleHashes(text string, dst []uint64) []uint64 {
	sc := scratchPool.Get().(*scratch)
	m.forEachShingle(sc, text, func(h uint64) { dst = append(dst, h) })
	putScratch(sc)
	return dst
}

// Signature appends the k signature values of text to sig. ok is false
// (and nothing is appended) when the text has no words.
func (m *MinHasher) Signature(text string, sig []uint32) (out []uint32, ok bool) {
	sc := scratchPool.Get().(*scratch)
	defer putScratch(sc)
	sc.words, sc.ends = AppendWords(sc.words[:0], sc.ends[:0], text)
	words, ends := sc.words, sc.ends
	nw := len(ends)
	if nw == 0 {
		return sig, false
	}
	xs := sc.xs[:0]
	if nw < m.n {
		xs = append(xs, xxh3.Hash(words)>>32)
	} else {
		n := m.n
		start := 0
		for i := 0; i+n <= nw; i++ {
			xs = append(xs, xxh3.Hash(words[start:ends[i+n-1]])>>32)
			start = int(ends[i]) + 1
		}
	}
	sc.xs = xs
	return m.minima(xs, sig), true
}

// SignatureOfHashes appends the signature of a set of 64-bit shingle
// hashes (as ShingleHashes returns them) to sig. An empty set gives k
// values of MaxUint32.
func (m *MinHasher) SignatureOfHashes(hs []uint64, sig []uint32) []uint32 {
	sc := scratchPool.Get().(*scratch)
	defer putScratch(sc)
	xs := sc.xs[:0]
	for _, h := range hs {
		xs = append(xs, h>>32)
	}
	sc.xs = xs
	return m.minima(xs, sig)
}

// minima appends, for each permutation, the minimum of its hash over xs
// (AVX-512 kernels where available, the scalar loop otherwise: same bits).
func (m *MinHasher) minima(xs []uint64, sig []uint32) []uint32 {
	base := len(sig)
	sig = append(sig, make([]uint32, m.k)...)
	out := sig[base : base+m.k]
	done := minimaSIMD(m.a, m.b, xs, out)
	minimaScalar(m.a[done:], m.b[done:], xs, out[done:])
	return sig
}

// minimaScalar is the portable kernel of minima. The minimum is taken over
// the full 64-bit value a·x+b: its high 32 bits are then the minimum of the
// high halves, which saves a shift per operation in the hot loop. Four
// permutations per sweep fill the registers without spilling on amd64.
func minimaScalar(a, b, xs []uint64, out []uint32) {
	k := len(out)
	a, b = a[:k], b[:k]
	i := 0
	for ; i+4 <= k; i += 4 {
		a0, a1, a2, a3 := a[i], a[i+1], a[i+2], a[i+3]
		b0, b1, b2, b3 := b[i], b[i+1], b[i+2], b[i+3]
		m0, m1, m2, m3 := uint64(math.MaxUint64), uint64(math.MaxUint64), uint64(math.MaxUint64), uint64(math.MaxUint64)
		for _, x := range xs {
			m0 = min(m0, a0*x+b0)
			m1 = min(m1, a1*x+b1)
			m2 = min(m2, a2*x+b2)
			m3 = min(m3, a3*x+b3)
		}
		out[i], out[i+1], out[i+2], out[i+3] = uint32(m0>>32), uint32(m1>>32), uint32(m2>>32), uint32(m3>>32)
	}
	for ; i < k; i++ {
		ai, bi := a[i], b[i]
		mi := uint64(math.MaxUint64)
		for _, x := range xs {
			mi = min(mi, ai*x+bi)
		}
		out[i] = uint32(mi >> 32)
	}
}

// EstimateJaccard returns the fraction of equal positions of two
// signatures of equal length: the MinHash estimate of their Jaccard
// similarity.
func EstimateJaccard(a, b []uint32) float64 {
	if len(a) != len(b) || len(a) == 0 {
		return 0
	}
	b = b[:len(a)]
	eq := 0
	for i, v := range a {
		if v == b[i] {
			eq++
		}
	}
	return float64(eq) / float64(len(a))
}

// SortedSet sorts hs and removes repeats in place, returning the set.
func SortedSet(hs []uint64) []uint64 {
	if len(hs) < 2 {
		return hs
	}
	sortUint64(hs)
	out := hs[:1]
	for _, h := range hs[1:] {
		if h != out[len(out)-1] {
			out = append(out, h)
		}
	}
	return out
}

// ExactJaccard returns |A∩B| / |A∪B| of two sorted sets without repeats
// (1 when both are empty).
func ExactJaccard(a, b []uint64) float64 {
	if len(a) == 0 && len(b) == 0 {
		return 1
	}
	i, j, inter := 0, 0, 0
	for i < len(a) && j < len(b) {
		switch {
		case a[i] == b[j]:
			inter++
			i++
			j++
		case a[i] < b[j]:
			i++
		default:
			j++
		}
	}
	return float64(inter) / float64(len(a)+len(b)-inter)
}

func sortUint64(s []uint64) { slices.Sort(s) }
