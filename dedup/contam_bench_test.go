package dedup

import (
	"fmt"
	"math/bits"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"
)

// Synthetic benchmark data (invented): eval items and documents drawn from
// a vocabulary of pseudo-words with English-like lengths.

var contamBenchVocab = func() []string {
	r := rand.New(rand.NewPCG(11, 12))
	const letters = "etaoinshrdlcumwfgypbvkjxqz"
	v := append([]string(nil), contamWords...)
	for len(v) < 20000 {
		n := 2 + r.IntN(9)
		b := make([]byte, n)
		for i := range b {
			b[i] = letters[min(r.IntN(len(letters)), r.IntN(len(letters)))]
		}
		v = append(v, string(b))
	}
	return v
}()

func contamBenchText(r *rand.Rand, words int) string {
	var sb strings.Builder
	for i := 0; i < words; i++ {
		if i > 0 {
			if i%17 == 0 {
				sb.WriteString(". ")
			} else {
				sb.WriteByte(' ')
			}
		}
		w := contamBenchVocab[r.IntN(len(contamBenchVocab))]
		if i%17 == 1 {
			w = strings.ToUpper(w[:1]) + w[1:]
		}
		sb.WriteString(w)
	}
	return sb.String()
}

var (
	contamBenchOnce  sync.Once
	contamBenchItems [][]string // [set][item]
	contamBenchDocs  []string
)

// contamBenchData returns 20 eval sets of 10k items (question + answer,
// 20 to 60 words) and ~8 MB of documents, 1% of which contain an item of
// set 0.
func contamBenchData() ([][]string, []string) {
	contamBenchOnce.Do(func() {
		r := rand.New(rand.NewPCG(21, 22))
		for s := 0; s < 20; s++ {
			items := make([]string, 10000)
			for i := range items {
				items[i] = contamBenchText(r, 20+r.IntN(41))
			}
			contamBenchItems = append(contamBenchItems, items)
		}
		size := 0
		for size < 8<<20 {
			d := contamBenchText(r, 100+r.IntN(900))
			if len(contamBenchDocs)%100 == 7 {
				d += " " + contamBenchItems[0][r.IntN(10000)]
			}
			contamBenchDocs = append(contamBenchDocs, d)
			size += len(d)
		}
	})
	return contamBenchItems, contamBenchDocs
}

func contamBenchIndex(b *testing.B, sets int) *ContamIndex {
	items, _ := contamBenchData()
	bl := NewContamBuilder(13)
	for s := 0; s < sets; s++ {
		for _, it := range items[s] {
			if _, _, err := bl.Add(it); err != nil {
				b.Fatal(err)
			}
		}
	}
	return bl.Build()
}

// BenchmarkContamScan measures the scan of documents against 1 and 20
// eval sets of 10k items each: the per-document cost must not grow with
// the number of sets beyond the index lookup.
func BenchmarkContamScan(b *testing.B) {
	for _, sets := range []int{1, 20} {
		b.Run(fmt.Sprintf("sets=%d", sets), func(b *testing.B) {
			x := contamBenchIndex(b, sets)
			_, docs := contamBenchData()
			var total int64
			for _, d := range docs {
				total += int64(len(d))
			}
			s := x.NewScanner()
			b.SetBytes(total)
			b.ReportAllocs()
			b.ResetTimer()
			hits := 0
			for i := 0; i < b.N; i++ {
				for _, d := range docs {
					hits += len(s.Scan(d, nil))
				}
			}
			if hits == 0 {
				b.Fatal("no planted item found")
			}
			b.ReportMetric(x.BytesPerNgram(), "B/ngram")
			b.ReportMetric(float64(x.KeyCount()), "ngrams")
		})
	}
}

// BenchmarkContamTokenize measures normalization alone (the floor of the
// scan).
func BenchmarkContamTokenize(b *testing.B) {
	_, docs := contamBenchData()
	var total int64
	for _, d := range docs {
		total += int64(len(d))
	}
	t := newContamTokenizer()
	b.SetBytes(total)
	for i := 0; i < b.N; i++ {
		for _, d := range docs {
			t.tokenize(d)
		}
	}
}

// contamOpenTable is the contender layout: an open-addressing hash set
// with linear probing at load <= 0.5 (key 0 marks an empty slot).
type contamOpenTable struct {
	slots []uint64
	vals  []uint32
	mask  uint64
}

func newContamOpenTable(keys []uint64, vals []uint32) *contamOpenTable {
	size := 1 << bits.Len(uint(2*len(keys)))
	t := &contamOpenTable{slots: make([]uint64, size), vals: make([]uint32, size), mask: uint64(size - 1)}
	for i, k := range keys {
		if k == 0 {
			k = 1
		}
		j := k & t.mask
		for t.slots[j] != 0 {
			j = (j + 1) & t.mask
		}
		t.slots[j], t.vals[j] = k, vals[i]
	}
	return t
}

func (t *contamOpenTable) find(h uint64) int {
	if h == 0 {
		h = 1
	}
	for j := h & t.mask; ; j = (j + 1) & t.mask {
		switch t.slots[j] {
		case h:
			return int(j)
		case 0:
			return -1
		}
	}
}

// BenchmarkContamLookup compares the index layouts on the n-gram table of
// 20 sets of 10k items, probed with a mix of 99% absent and 1% present
// hashes (what a corpus scan sees): the sorted array with a top-bits
// directory (used), a plain binary search over the sorted array, and an
// open-addressing hash set.
func BenchmarkContamLookup(b *testing.B) {
	x := contamBenchIndex(b, 20)
	t := x.main
	r := rand.New(rand.NewPCG(5, 6))
	probes := make([]uint64, 1<<20)
	for i := range probes {
		if i%100 == 0 {
			probes[i] = t.keys[r.IntN(len(t.keys))]
		} else {
			probes[i] = r.Uint64()
		}
	}
	bytesPer := func(n int64) float64 { return float64(n) / float64(len(t.keys)) }
	b.Run("sorted+directory", func(b *testing.B) {
		b.ReportMetric(bytesPer(t.bytes()), "B/ngram")
		found := 0
		for i := 0; i < b.N; i++ {
			if t.find(probes[i&(len(probes)-1)]) >= 0 {
				found++
			}
		}
	})
	b.Run("binary-search", func(b *testing.B) {
		b.ReportMetric(bytesPer(int64(len(t.keys))*12), "B/ngram")
		found := 0
		for i := 0; i < b.N; i++ {
			if _, ok := slices.BinarySearch(t.keys, probes[i&(len(probes)-1)]); ok {
				found++
			}
		}
	})
	b.Run("open-addressing", func(b *testing.B) {
		o := newContamOpenTable(t.keys, t.vals)
		b.ResetTimer()
		found := 0
		for i := 0; i < b.N; i++ {
			if o.find(probes[i&(len(probes)-1)]) >= 0 {
				found++
			}
		}
		b.ReportMetric(bytesPer(int64(len(o.slots))*12), "B/ngram")
	})
}

// BenchmarkContamBuild measures building the index of 20 sets of 10k
// items.
func BenchmarkContamBuild(b *testing.B) {
	for i := 0; i < b.N; i++ {
		contamBenchIndex(b, 20)
	}
}
