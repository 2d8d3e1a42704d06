package run

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/s2"
	"github.com/klauspost/compress/zstd"

	"winnow/stages"
	"winnow/stages/synth"
)

// spillBytes returns the uncompressed record stream a docSpill writes for
// an 8 MB synthetic corpus (winnow gen's generator, text files).
func spillBytes(b *testing.B) []byte {
	b.Helper()
	dir := b.TempDir()
	if _, err := synth.Generate(synth.Options{Dir: dir, Bytes: 8 << 20, Seed: 1, Format: "txt", OmitTruthDocs: true}); err != nil {
		b.Fatal(err)
	}
	path := filepath.Join(b.TempDir(), "spill")
	sp, err := createDocSpill(path)
	if err != nil {
		b.Fatal(err)
	}
	n := 0
	err = filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() || filepath.Ext(p) != ".txt" {
			return err
		}
		text, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		n++
		return sp.add(&stages.Doc{ID: info.Name(), Text: string(text), Source: "bench", File: p, Order: stages.MakeOrderKey(0, int64(n)),
			Meta: map[string]any{"lang": "en", "lang_conf": 0.98}})
	})
	if err != nil || n == 0 {
		b.Fatalf("no documents: %v", err)
	}
	if err := sp.close(); err != nil {
		b.Fatal(err)
	}
	f, br, err := openRecordFile(path)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	raw, err := io.ReadAll(br)
	if err != nil {
		b.Fatal(err)
	}
	return raw
}

// BenchmarkSpillCodec round-trips a spill's bytes through the two codecs
// the spills could use (write, then read back once), in MB/s of spill
// bytes, with the compressed share as "ratio". Measured on this machine:
// zstd fastest 238 MB/s at 0.109, S2 503 MB/s at 0.165 (an 8 MB synthetic
// corpus; 12 MB of generated JSON lines gave 190 and 449 MB/s).
func BenchmarkSpillCodec(b *testing.B) {
	raw := spillBytes(b)
	b.Run("zstd-fastest", func(b *testing.B) {
		b.SetBytes(int64(len(raw)))
		var out bytes.Buffer
		for i := 0; i < b.N; i++ {
			out.Reset()
			enc, _ := zstd.NewWriter(&out, zstd.WithEncoderLevel(zstd.SpeedFastest), zstd.WithEncoderConcurrency(1))
			enc.Write(raw)
			enc.Close()
			dec, _ := zstd.NewReader(bytes.NewReader(out.Bytes()), zstd.WithDecoderConcurrency(1))
			io.Copy(io.Discard, dec)
			dec.Close()
		}
		b.ReportMetric(float64(out.Len())/float64(len(raw)), "ratio")
	})
	b.Run("s2", func(b *testing.B) {
		b.SetBytes(int64(len(raw)))
		var out bytes.Buffer
		for i := 0; i < b.N; i++ {
			out.Reset()
			enc := s2.NewWriter(&out, s2.WriterConcurrency(1))
			enc.Write(raw)
			enc.Close()
			io.Copy(io.Discard, s2.NewReader(bytes.NewReader(out.Bytes())))
		}
		b.ReportMetric(float64(out.Len())/float64(len(raw)), "ratio")
	})
}
