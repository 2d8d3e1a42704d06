package audit_test

import (
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/stages/audit"
)

// rawSize sums the uncompressed bytes of a run's ledger and metrics files.
func rawSize(b *testing.B, run string) int64 {
	var total int64
	for _, dir := range []string{"ledger", "metrics"} {
		files, _ := filepath.Glob(filepath.Join(run, dir, "*.jsonl.zst"))
		for _, p := range files {
			f, err := os.Open(p)
			if err != nil {
				b.Fatal(err)
			}
			z, err := zstd.NewReader(f)
			if err != nil {
				b.Fatal(err)
			}
			n, err := io.Copy(io.Discard, z)
			z.Close()
			f.Close()
			if err != nil {
				b.Fatal(err)
			}
			total += n
		}
	}
	return total
}

// BenchmarkWalk measures the merged read of every ledger and metrics file
// of a run (MB/s of uncompressed JSONL): the pass every audit command
// makes.
func BenchmarkWalk(b *testing.B) {
	run := cachedRun(b, "full", fullStages)
	r := openRun(b, run, audit.OpenOptions{})
	b.SetBytes(rawSize(b, run))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := r.Walk(func(*audit.Trail) error { return nil }); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkWhatIf measures one what-if scenario over the same run.
func BenchmarkWhatIf(b *testing.B) {
	run := cachedRun(b, "full", fullStages)
	r := openRun(b, run, audit.OpenOptions{})
	b.SetBytes(rawSize(b, run))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := audit.RunWhatIf(r, audit.WhatIfOptions{Sets: []string{"quality.fewest_words=80"}}); err != nil {
			b.Fatal(err)
		}
	}
}
