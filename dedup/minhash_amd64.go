//go:build amd64 && !purego

package dedup

import "golang.org/x/sys/cpu"

// hasAVX512 selects the AVX-512 MinHash kernels (VPMULLQ needs DQ).
var hasAVX512 = cpu.X86.HasAVX512F && cpu.X86.HasAVX512DQ

//go:noescape
func minima32AVX512(a, b, xs *uint64, n int, out *uint32)

//go:noescape
func minima8AVX512(a, b, xs *uint64, n int, out *uint32)

// minimaSIMD computes the leading permutations of out with vector
// kernels and returns how many it did (a multiple of 8; 0 without
// AVX-512). xs must not be empty.
func minimaSIMD(a, b, xs []uint64, out []uint32) int {
	if !hasAVX512 || len(xs) == 0 {
		return 0
	}
	k := len(out)
	i := 0
	for ; i+32 <= k; i += 32 {
		minima32AVX512(&a[i], &b[i], &xs[0], len(xs), &out[i])
	}
	for ; i+8 <= k; i += 8 {
		minima8AVX512(&a[i], &b[i], &xs[0], len(xs), &out[i])
	}
	return i
}
