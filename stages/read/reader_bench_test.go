package read

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"fmt"
	"io"
	"math/rand/v2"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// benchWords is an invented boatyard vocabulary for synthetic benchmark text.
var benchWords = []string{"the", "hull", "keel", "bolt", "winch", "should", "be", "checked", "before", "launch", "and", "after",
	"every", "haul-out", "impeller", "strainer", "bilge", "pump", "anode", "rudder", "bearing", "gelcoat", "osmosis", "blister",
	"varnish", "teak", "deck", "cleat", "shackle", "halyard", "furler", "mast", "step", "chainplate", "torque", "stainless", "bronze",
	"seacock", "through-hull", "antifouling", "primer", "epoxy", "fairing", "sanding", "\"quoted\"", "café", "naïve", "50%", "3/8\""}

// benchJSONL returns about size bytes of JSONL documents of 2-6 KB.
func benchJSONL(size int) []byte {
	rng := rand.New(rand.NewPCG(1, 2))
	var b bytes.Buffer
	type rec struct {
		ID   string `json:"id"`
		Text string `json:"text"`
		URL  string `json:"url"`
	}
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	var t bytes.Buffer
	for i := 0; b.Len() < size; i++ {
		t.Reset()
		n := 300 + rng.IntN(700)
		for w := 0; w < n; w++ {
			t.WriteString(benchWords[rng.IntN(len(benchWords))])
			switch {
			case w%97 == 96:
				t.WriteString(".\n\n")
			case w%13 == 12:
				t.WriteString(". ")
			default:
				t.WriteByte(' ')
			}
		}
		enc.Encode(rec{ID: fmt.Sprintf("doc-%d", i), Text: t.String(), URL: fmt.Sprintf("https://yard.example/%d", i)})
	}
	return b.Bytes()
}

func benchRead(b *testing.B, raw, file []byte) {
	b.SetBytes(int64(len(raw)))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		dec, err := Decode(bytes.NewReader(file))
		if err != nil {
			b.Fatal(err)
		}
		rr, _, err := NewRecordReader(dec, "bench.jsonl", 0, ReadOptions{Source: "b", Format: FormatJSONL, TextField: "text", IDField: "id"})
		if err != nil {
			b.Fatal(err)
		}
		n := 0
		for {
			r, err := rr.Next()
			if r.Doc != nil {
				n++
			}
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
		}
		dec.Close()
		if n == 0 {
			b.Fatal("no documents")
		}
	}
}

// BenchmarkReadJSONL measures decompress + parse of JSONL, in MB/s of
// uncompressed bytes (target: >= 150 MB/s per core for zstd).
func BenchmarkReadJSONL(b *testing.B) {
	raw := benchJSONL(32 << 20)
	b.Run("zstd", func(b *testing.B) {
		var z bytes.Buffer
		w, _ := zstd.NewWriter(&z, zstd.WithEncoderLevel(zstd.SpeedDefault))
		w.Write(raw)
		w.Close()
		benchRead(b, raw, z.Bytes())
	})
	b.Run("gzip", func(b *testing.B) {
		var z bytes.Buffer
		w := gzip.NewWriter(&z)
		w.Write(raw)
		w.Close()
		benchRead(b, raw, z.Bytes())
	})
	b.Run("plain", func(b *testing.B) { benchRead(b, raw, raw) })
	// The same parse with encoding/json into a generic map, the obvious
	// alternative to the hand-written scanner.
	b.Run("encoding-json-baseline", func(b *testing.B) {
		b.SetBytes(int64(len(raw)))
		for i := 0; i < b.N; i++ {
			for _, line := range bytes.Split(raw, []byte("\n")) {
				if len(line) == 0 {
					continue
				}
				var m map[string]any
				if err := json.Unmarshal(line, &m); err != nil {
					b.Fatal(err)
				}
			}
		}
	})
}

// BenchmarkReadWARC measures the WARC record parser on uncompressed input.
func BenchmarkReadWARC(b *testing.B) {
	raw := benchJSONL(16 << 20)
	var w bytes.Buffer
	for i, line := range bytes.Split(raw, []byte("\n")) {
		if len(line) == 0 {
			continue
		}
		w.WriteString(warcRecord("conversion", fmt.Sprintf("urn:uuid:%d", i), "https://yard.example/", "text/plain", string(line)))
	}
	data := w.Bytes()
	b.SetBytes(int64(len(data)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		rr, _, err := NewRecordReader(bytes.NewReader(data), "b.warc", 0, ReadOptions{Source: "b", Format: FormatWARC})
		if err != nil {
			b.Fatal(err)
		}
		for {
			_, err := rr.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
		}
	}
}
