package shard

import (
	"encoding/binary"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// A saved part's table (units.bin) and description (part.json), as the
// shards phase reads them from the run directory:
//   - any bytes load or fail with an error naming the part, never panic,
//     and what loads is consistent (one table entry per record, every
//     source named, every split inside its part);
//   - well-formed parts round-trip: two parts whose sources are listed in
//     different orders load as one table whose records name the same
//     source names, in input order, with the second part's splits moved
//     to whole-output positions.
func FuzzLoadParts(f *testing.F) {
	tok := mustLoad(f, "cl100k_base")
	f.Add([]byte(`{"sources":["manuals","web"],"splits":[],"raw":120,"units":1}`), make([]byte, unitBytes), []byte("manuals,web"), []byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20})
	f.Add([]byte(`{"sources":["a"],"splits":[{"Doc":"d","At":0}],"raw":1,"units":1152921504606846977}`), make([]byte, unitBytes), []byte("b,a"), []byte{})
	f.Add([]byte(`{"sources":[],"units":-1}`), []byte{}, []byte(""), make([]byte, 3*unitBytes))
	f.Add([]byte(`{"sources":["x"],"splits":[{"Doc":"d","At":7}],"raw":1,"units":1}`), []byte{0, 0, 0, 0, 0, 0, 0, 0, 5, 0, 0, 0, 1, 0, 0, 0}, []byte("x"), []byte{0xff})
	f.Fuzz(func(t *testing.T, meta, table, names, recs []byte) {
		opt := Options{Tokenizer: tok, Dir: filepath.Join(t.TempDir(), "out")}
		// Any bytes.
		dir := filepath.Join(t.TempDir(), "p")
		writePart(t, dir, meta, table)
		if b, files, err := loadParts(opt, []string{dir}); err != nil {
			if !strings.Contains(err.Error(), "output") {
				t.Errorf("error without context: %v", err)
			}
		} else {
			var m partMeta
			if err := json.Unmarshal(meta, &m); err != nil {
				t.Fatalf("loaded a part whose description does not parse: %v", err)
			}
			if len(b.units) != m.Units || len(files) != 1 || len(b.partEnd) != 1 || b.partEnd[0] != m.Units {
				t.Fatalf("loaded %d records (parts end %v) for %d described", len(b.units), b.partEnd, m.Units)
			}
			for i, u := range b.units {
				if int(u.src) >= len(b.srcNames) {
					t.Fatalf("record %d names source %d of %d", i, u.src, len(b.srcNames))
				}
			}
			for _, sp := range b.splits {
				if sp.At < 0 || sp.At >= len(b.units) {
					t.Fatalf("split at %d of %d records", sp.At, len(b.units))
				}
			}
		}

		// Well-formed parts.
		srcs := uniqueNames(string(names))
		if len(srcs) == 0 {
			srcs = []string{"manuals"}
		}
		rev := make([]string, len(srcs))
		for i, s := range srcs {
			rev[len(srcs)-1-i] = s
		}
		var us []unit
		for i := 0; i+unitBytes <= len(recs); i += unitBytes {
			e := recs[i:]
			us = append(us, unit{hash: binary.LittleEndian.Uint64(e), tokens: binary.LittleEndian.Uint32(e[8:]),
				src: binary.LittleEndian.Uint16(e[12:]) % uint16(len(srcs)), piece: binary.LittleEndian.Uint16(e[14:])})
		}
		half := len(us) / 2
		parts := [][]unit{us[:half], us[half:]}
		partSrcs := [][]string{srcs, rev}
		base := t.TempDir()
		var dirs []string
		for k, pu := range parts {
			m := partMeta{Sources: partSrcs[k], Raw: int64(len(pu)), Units: len(pu)}
			if len(pu) > 0 {
				m.Splits = []Split{{Doc: "long", At: len(pu) - 1, Reason: "long_document"}}
			}
			mb, err := json.Marshal(m)
			if err != nil {
				t.Fatal(err)
			}
			d := filepath.Join(base, string(rune('a'+k)))
			writePart(t, d, mb, appendUnits(nil, pu))
			dirs = append(dirs, d)
		}
		b, _, err := loadParts(opt, dirs)
		if err != nil {
			t.Fatalf("well-formed parts: %v", err)
		}
		if len(b.units) != len(us) || b.raw != int64(len(us)) {
			t.Fatalf("loaded %d records, %d raw; saved %d", len(b.units), b.raw, len(us))
		}
		for i, u := range us {
			k, src := 0, srcs[u.src]
			if i >= half {
				k, src = 1, rev[u.src]
			}
			got := b.units[i]
			if got.hash != u.hash || got.tokens != u.tokens || got.piece != u.piece || b.srcNames[got.src] != src {
				t.Fatalf("record %d of part %d: loaded %+v (%s), saved %+v (%s)", i, k, got, b.srcNames[got.src], u, src)
			}
		}
		var wantAt []int
		off := 0
		for _, pu := range parts {
			if len(pu) > 0 {
				wantAt = append(wantAt, off+len(pu)-1)
			}
			off += len(pu)
		}
		if len(b.splits) != len(wantAt) {
			t.Fatalf("%d splits, want %d", len(b.splits), len(wantAt))
		}
		for i, sp := range b.splits {
			if sp.At != wantAt[i] {
				t.Fatalf("split %d at %d, want %d (whole-output position)", i, sp.At, wantAt[i])
			}
		}
	})
}

func writePart(t *testing.T, dir string, meta, table []byte) {
	t.Helper()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, partInfo), meta, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, partUnits), table, 0o644); err != nil {
		t.Fatal(err)
	}
}

// uniqueNames splits s at commas into distinct names, in order; source
// names come from a YAML spec, so they are valid UTF-8.
func uniqueNames(s string) []string {
	s = strings.ToValidUTF8(s, "?")
	var out []string
	seen := map[string]bool{}
	for _, n := range strings.Split(s, ",") {
		if !seen[n] {
			seen[n] = true
			out = append(out, n)
		}
	}
	return out
}
