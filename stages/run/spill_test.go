package run

import (
	"math"
	"path/filepath"
	"testing"

	"winnow/stages"
)

// A spilled document reads back with every field, including the measured
// values a later stage asked for (float bits compared exactly, NaN
// included), and a document without them reads back without them.
func FuzzDocSpillRoundTrip(f *testing.F) {
	f.Add("doc-1", "Haul out the ketch.\n\nSand the keel.", "yard", "quality.word_count", 42.0, int64(7), uint64(3))
	f.Add("", "", "", "", 0.0, int64(0), uint64(0))
	f.Add("x", "ü\x00", "web", "length.chars", math.Inf(-1), int64(-1), uint64(1<<40))
	f.Add("y", "text", "s", "a.b", math.NaN(), int64(1<<40), uint64(math.MaxUint64))
	f.Fuzz(func(t *testing.T, id, text, source, name string, v float64, line int64, order uint64) {
		path := filepath.Join(t.TempDir(), "spill.zst")
		w, err := createDocSpill(path)
		if err != nil {
			t.Fatal(err)
		}
		in := []*stages.Doc{
			{ID: id, Text: text, Source: source, File: "f", Line: line, Order: stages.OrderKey(order), Tokens: 5},
			{ID: id + "2", Text: text, Order: stages.OrderKey(order + 1)},
		}
		if name != "" {
			in[0].Measured = map[string]float64{name: v, name + "x": 1}
		}
		for _, d := range in {
			if err := w.add(d); err != nil {
				t.Fatal(err)
			}
		}
		if err := w.close(); err != nil {
			t.Fatal(err)
		}
		var out []*stages.Doc
		if err := forEachSpilled(path, func(d *stages.Doc) error { out = append(out, d); return nil }); err != nil {
			t.Fatal(err)
		}
		if len(out) != len(in) {
			t.Fatalf("%d documents back, want %d", len(out), len(in))
		}
		for i, d := range out {
			e := in[i]
			if d.ID != e.ID || d.Text != e.Text || d.Source != e.Source || d.File != e.File || d.Line != e.Line || d.Order != e.Order || d.Tokens != e.Tokens {
				t.Fatalf("doc %d: %+v, want %+v", i, d, e)
			}
			if len(d.Measured) != len(e.Measured) {
				t.Fatalf("doc %d: measured %v, want %v", i, d.Measured, e.Measured)
			}
			for k, want := range e.Measured {
				if got, ok := d.Measured[k]; !ok || math.Float64bits(got) != math.Float64bits(want) {
					t.Fatalf("doc %d: measured %s = %v, want %v", i, k, got, want)
				}
			}
		}
	})
}
