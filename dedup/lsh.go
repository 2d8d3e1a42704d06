package dedup

// Locality-sensitive hashing by banding (Leskovec, Rajaraman, Ullman,
// "Mining of Massive Datasets", ch. 3).
//
// A signature of k = b·r values is cut into b bands of r rows. Two
// documents become a candidate pair when all r values of at least one band
// agree; for a pair of Jaccard similarity s this happens with probability
// P(s) = 1 − (1 − s^r)^b, an S-curve whose threshold sits near (1/b)^(1/r).
// Each band's r values are folded into a 32-bit band hash (seeded by the
// band number so equal values in different bands do not collide), and the
// hash is packed with the document's dense index into one uint64 band key:
//
//	key = bandHash<<32 | index
//
// Sorting one band's keys (near.go: a radix sort, or spill.go's external
// sort when the band exceeds the memory budget) brings every group of
// documents sharing a band hash together, in index (= input) order inside
// the group. A 32-bit
// band hash lets unrelated documents collide now and then (about
// b·N²/2^33 pairs for N documents); such pairs are only extra candidates,
// which verification rejects.
//
// Not implemented: multi-probe LSH, adaptive band widths.

import (
	"fmt"
	"math"
	"strings"
)

// Banding cuts signatures into Bands bands of Rows rows.
type Banding struct {
	Bands, Rows int
}

// NewBanding returns the banding of permutations into bands, or an error
// when bands does not divide permutations.
func NewBanding(permutations, bands int) (Banding, error) {
	if bands < 1 || permutations < 1 {
		return Banding{}, fmt.Errorf("bands (%d) and permutations (%d) must be positive", bands, permutations)
	}
	if permutations%bands != 0 {
		return Banding{}, fmt.Errorf("bands (%d) must divide permutations (%d) evenly; try %s", bands, permutations, divisorHint(permutations, bands))
	}
	return Banding{Bands: bands, Rows: permutations / bands}, nil
}

// divisorHint names the divisors of k nearest to b.
func divisorHint(k, b int) string {
	lo, hi := 0, 0
	for d := b; d >= 1; d-- {
		if k%d == 0 {
			lo = d
			break
		}
	}
	for d := b; d <= k; d++ {
		if k%d == 0 {
			hi = d
			break
		}
	}
	if lo == hi || hi == 0 {
		return fmt.Sprintf("bands: %d", lo)
	}
	return fmt.Sprintf("bands: %d or %d", lo, hi)
}

// Hashes appends the 32-bit hash of each band of sig to dst.
func (bd Banding) Hashes(sig []uint32, dst []uint32) []uint32 {
	r := bd.Rows
	for band := 0; band < bd.Bands; band++ {
		dst = append(dst, bandHash(band, sig[band*r:band*r+r]))
	}
	return dst
}

// bandHash folds one band's values into 32 bits (a multiply-xorshift mix
// seeded by the band number; portable, no byte-order dependence).
func bandHash(band int, vals []uint32) uint32 {
	h := uint64(band+1) * 0x9e3779b97f4a7c15
	for _, v := range vals {
		h ^= uint64(v)
		h *= 0xff51afd7ed558ccd
		h ^= h >> 29
	}
	h ^= h >> 32
	h *= 0xc4ceb9fe1a85ec53
	h ^= h >> 33
	return uint32(h)
}

// CandidateProbability is P(s) = 1 − (1 − s^r)^b, the probability that a
// pair of Jaccard similarity s shares at least one band.
func CandidateProbability(s float64, bands, rows int) float64 {
	return 1 - math.Pow(1-math.Pow(s, float64(rows)), float64(bands))
}

// Threshold returns (1/b)^(1/r), the similarity where the S-curve rises
// most steeply.
func (bd Banding) Threshold() float64 {
	return math.Pow(1/float64(bd.Bands), 1/float64(bd.Rows))
}

// SCurve describes the candidate probability of the banding at Jaccard
// 0.5, 0.6, ..., 1.0, one line per value, for `winnow check`.
func (bd Banding) SCurve() string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "LSH %d bands x %d rows: P(candidate) = 1-(1-s^%d)^%d, steepest near s=%.3f\n",
		bd.Bands, bd.Rows, bd.Rows, bd.Bands, bd.Threshold())
	for i := 5; i <= 10; i++ {
		s := float64(i) / 10
		fmt.Fprintf(&sb, "  s=%.1f  P=%.4f\n", s, CandidateProbability(s, bd.Bands, bd.Rows))
	}
	return sb.String()
}

// bandKey packs a band hash and a dense document index.
func bandKey(hash uint32, index uint32) uint64 { return uint64(hash)<<32 | uint64(index) }

// splitBandKey unpacks a band key.
func splitBandKey(k uint64) (hash uint32, index uint32) { return uint32(k >> 32), uint32(k) }
