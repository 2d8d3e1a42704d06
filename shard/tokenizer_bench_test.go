package shard

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// benchText is a mixed corpus: the vendored UDHR texts (many scripts)
// when present, plus invented English boatyard prose, so the cache sees
// both frequent and rare pieces.
func benchText(b *testing.B) string {
	var sb strings.Builder
	files, _ := filepath.Glob("../testdata/udhr/*.txt")
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			b.Fatal(err)
		}
		sb.Write(data)
		sb.WriteString("\n\n")
	}
	prose := "The Larkspur Marine Works crew hauled the ketch at dawn, checked the rudder bearings, " +
		"and logged 3 blisters below the waterline. Don't sand gelcoat dry; we'll use 220-grit wet. " +
		"Torque the keel bolts to 95 ft-lb, then re-check after 24 hours.\n\n"
	for sb.Len() < 1<<20 {
		sb.WriteString(prose)
	}
	return sb.String()
}

// BenchmarkCountOurs measures this package's counter (MB/s of text).
func BenchmarkCountOurs(b *testing.B) {
	for _, enc := range []string{"cl100k_base", "o200k_base"} {
		b.Run(enc, func(b *testing.B) {
			text := benchText(b)
			tok := mustLoad(b, enc)
			tok.Count(text) // warm the cache, as a long run does
			b.SetBytes(int64(len(text)))
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				tok.Count(text)
			}
		})
	}
}

// BenchmarkCountReference measures the reference library on the same
// text (github.com/tiktoken-go/tokenizer).
func BenchmarkCountReference(b *testing.B) {
	for _, enc := range []string{"cl100k_base", "o200k_base"} {
		b.Run(enc, func(b *testing.B) {
			text := benchText(b)
			ref := reference(b, enc)
			b.SetBytes(int64(len(text)))
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := ref.Count(text); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkEncodeOurs measures encoding to ids (token files need them).
func BenchmarkEncodeOurs(b *testing.B) {
	text := benchText(b)
	tok := mustLoad(b, "cl100k_base")
	var ids []uint32
	ids = tok.Encode(text, ids[:0])
	b.SetBytes(int64(len(text)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		ids = tok.Encode(text, ids[:0])
	}
}

// BenchmarkCountColdCache measures the counter with an empty cache on
// every pass (the worst case: every piece is merged).
func BenchmarkCountColdCache(b *testing.B) {
	text := benchText(b)
	tok := mustLoad(b, "cl100k_base")
	b.SetBytes(int64(len(text)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		tok.countNoCache(text)
	}
}

// BenchmarkPathological measures inputs that would be quadratic for a
// scanner that rescans whitespace or letter runs (must stay MB/s-fast).
func BenchmarkPathological(b *testing.B) {
	tok := mustLoad(b, "cl100k_base")
	for name, s := range map[string]string{
		"breaks": strings.Repeat("\n ", 1<<18),
		"spaces": strings.Repeat(" ", 1<<19) + "x",
		"cjk":    strings.Repeat("船坞", 1<<16),
	} {
		b.Run(name, func(b *testing.B) {
			b.SetBytes(int64(len(s)))
			for i := 0; i < b.N; i++ {
				tok.Count(s)
			}
		})
	}
}
