package shard

import (
	"bufio"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

// Spill records round-trip through an S2 spill file (no field lost, with
// and without a position), skip reads past exactly one record (the next
// one reads back whole), and a spill cut anywhere inside a record is a
// corruption error, never a short record or a clean end.
func FuzzSpillRecords(f *testing.F) {
	f.Add("raw/manuals-00001.jsonl.zst", int64(12), "manual-4", "manuals", "Bleed the hydraulic steering.\n\nCheck the reservoir.", []byte(`,"lang":"en"`), 931, "manual-4", 2, 3, uint64(77), 10)
	f.Add("", int64(0), "", "", "", []byte{}, 0, "", 0, 0, uint64(0), 1)
	f.Fuzz(func(t *testing.T, file string, line int64, id, source, text string, meta []byte, tokens int, original string, piece, total int, pos uint64, cut int) {
		if line < 0 || tokens < 0 || piece < 0 || total < 0 {
			return
		}
		recs := []record{
			{pos: pos, file: file, line: line, id: id, source: source, text: text, meta: meta, tokens: tokens, original: original, piece: piece, total: total},
			{pos: pos + 1, file: "second", line: 1, id: "b", source: "web", text: "a second record", meta: []byte{}, tokens: 4},
		}
		for _, withPos := range []bool{false, true} {
			dir := t.TempDir()
			w, err := createSpill(dir, "fuzz-*.s2")
			if err != nil {
				t.Fatal(err)
			}
			for i := range recs {
				if err := w.put(&recs[i], withPos); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.close(); err != nil {
				t.Fatal(err)
			}
			read := func(skipFirst bool) []record {
				r, err := openSpills([]string{w.f.Name()})
				if err != nil {
					t.Fatal(err)
				}
				defer r.close()
				var out []record
				if skipFirst && !withPos {
					if err := r.skip(); err != nil {
						t.Fatalf("skip: %v", err)
					}
				}
				for {
					var rec record
					err := r.next(&rec, withPos)
					if err == io.EOF {
						return out
					}
					if err != nil {
						t.Fatal(err)
					}
					out = append(out, rec)
				}
			}
			want := recs
			if !withPos {
				want = []record{recs[0], recs[1]}
				want[0].pos, want[1].pos = 0, 0
			}
			if got := read(false); !reflect.DeepEqual(normMeta(got), normMeta(want)) {
				t.Fatalf("round trip (position %v):\n got %+v\nwant %+v", withPos, got, want)
			}
			if !withPos {
				if got := read(true); len(got) != 1 || !reflect.DeepEqual(normMeta(got), normMeta(want[1:])) {
					t.Fatalf("after skip: %+v", got)
				}
			}
		}
		// A truncated stream of one record: raw bytes, cut inside.
		one := appendRecord(nil, &recs[0], false)
		if len(one) < 2 {
			return
		}
		at := 1 + (cut%(len(one)-1)+(len(one)-1))%(len(one)-1)
		p := filepath.Join(t.TempDir(), "cut.raw")
		if err := os.WriteFile(p, one[:at], 0o644); err != nil {
			t.Fatal(err)
		}
		fh, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		defer fh.Close()
		r := &spillReader{f: fh, br: bufio.NewReader(fh), name: p}
		var rec record
		if err := r.next(&rec, false); err == nil || err == io.EOF {
			t.Fatalf("a record cut after %d of %d bytes read as %v", at, len(one), err)
		}
	})
}

// normMeta makes empty and nil meta compare equal.
func normMeta(rs []record) []record {
	out := make([]record, len(rs))
	for i, r := range rs {
		if len(r.meta) == 0 {
			r.meta = nil
		}
		out[i] = r
	}
	return out
}
