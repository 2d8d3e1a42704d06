package fsio

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// sizeUnits are the suffixes ParseSize accepts: decimal (kB, MB, GB, TB)
// and binary (KiB, MiB, GiB, TiB); a bare K, M, G or T is decimal.
var sizeUnits = []struct {
	suffix string
	mult   float64
}{
	{"kib", 1 << 10}, {"mib", 1 << 20}, {"gib", 1 << 30}, {"tib", 1 << 40},
	{"kb", 1e3}, {"mb", 1e6}, {"gb", 1e9}, {"tb", 1e12},
	{"k", 1e3}, {"m", 1e6}, {"g", 1e9}, {"t", 1e12},
	{"b", 1},
}

// ParseSize parses a byte size such as "500MB", "2GiB", "1.5G" or "4096".
func ParseSize(s string) (int64, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	mult := 1.0
	for _, u := range sizeUnits {
		if strings.HasSuffix(t, u.suffix) {
			t = strings.TrimSpace(strings.TrimSuffix(t, u.suffix))
			mult = u.mult
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || t == "" || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("size %q: want a number with an optional unit such as 500MB or 2GiB", s)
	}
	n := v * mult
	if n <= 0 || n > 1<<62 {
		return 0, fmt.Errorf("size %q out of range", s)
	}
	return int64(math.Round(n)), nil
}
