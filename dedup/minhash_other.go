//go:build !amd64 || purego

package dedup

var hasAVX512 = false

// minimaSIMD has no vector kernel on this platform.
func minimaSIMD(a, b, xs []uint64, out []uint32) int { return 0 }
