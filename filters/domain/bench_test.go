package domain

import (
	"strings"
	"testing"
)

// benchTexts are the real documentation chunks of testdata/domaindocs,
// repeated to a mix of short and long documents.
func benchTexts(b *testing.B) (pos, neg []string, bytes int) {
	s := loadRealSets(b)
	for _, t := range s.allPos {
		bytes += len(t)
	}
	for _, t := range s.allNeg {
		bytes += len(t)
	}
	return s.allPos, s.allNeg, bytes
}

// BenchmarkScore measures scoring throughput per core (target ≥ 50 MB/s)
// with the default classifier (2^18 buckets, 1 MiB of weights) over the
// real documentation chunks.
func BenchmarkScore(b *testing.B) {
	for _, method := range []Method{Classifier, Importance} {
		b.Run(method.String(), func(b *testing.B) {
			pos, neg, n := benchTexts(b)
			m, err := Train(pos, neg, Options{Method: method})
			if err != nil {
				b.Fatal(err)
			}
			all := append(append([]string{}, pos...), neg...)
			b.SetBytes(int64(n))
			b.ResetTimer()
			var sink float64
			for i := 0; i < b.N; i++ {
				for _, t := range all {
					sink += m.Score(t)
				}
			}
			if sink < 0 {
				b.Fatal(sink)
			}
		})
	}
}

// BenchmarkTrain10k measures training on 10,000 examples and 10,000
// background documents (target < 10 s on one core): the real chunks,
// each repeated with a different numbered prefix so that no two training
// documents are equal. SetBytes counts the text of all 20,000.
func BenchmarkTrain10k(b *testing.B) {
	pos, neg, _ := benchTexts(b)
	grow := func(src []string) []string {
		out := make([]string, 10000)
		var sb strings.Builder
		for i := range out {
			sb.Reset()
			sb.WriteString("part ")
			sb.WriteString(strings.Repeat("x", i%7))
			sb.WriteString(" ")
			sb.WriteString(src[i%len(src)])
			out[i] = sb.String()
		}
		return out
	}
	p, n := grow(pos), grow(neg)
	total := 0
	for _, t := range append(append([]string{}, p...), n...) {
		total += len(t)
	}
	for _, method := range []Method{Classifier, Importance} {
		b.Run(method.String(), func(b *testing.B) {
			b.SetBytes(int64(total))
			for i := 0; i < b.N; i++ {
				if _, err := Train(p, n, Options{Method: method}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
