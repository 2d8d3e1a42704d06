package synth

import "testing"

// BenchmarkGenerate measures generation speed in MB/s of uncompressed
// serialized corpus (jsonl.zst, the default format).
func BenchmarkGenerate(b *testing.B) {
	for _, f := range []string{FormatJSONLZstd, FormatJSONLGzip, FormatWARC} {
		b.Run(f, func(b *testing.B) {
			dir := b.TempDir()
			var n int64
			for i := 0; i < b.N; i++ {
				tr, err := Generate(Options{Dir: dir, Bytes: 20 << 20, Seed: uint64(i), Format: f, OmitTruthDocs: true})
				if err != nil {
					b.Fatal(err)
				}
				n = tr.Bytes
			}
			b.SetBytes(n)
		})
	}
}
