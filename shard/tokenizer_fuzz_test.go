package shard

import (
	"strings"
	"testing"
	"unicode/utf8"
)

// FuzzTokenizerCount checks the tokenizer on any text, for three embedded
// encodings: Count equals the length of Encode, with a warm cache and
// without the cache; every id is below VocabSize; and the reference
// library (github.com/tiktoken-go/tokenizer, a general-purpose BPE
// implementation) decodes the ids back to the text, with invalid UTF-8
// replaced by U+FFFD as Encode does, so no byte is lost or invented
// except U+007F DEL, which the reference's split pattern matches with no
// alternative and so drops (pretokenize.go, reference mode).
func FuzzTokenizerCount(f *testing.F) {
	for _, s := range edgeTexts {
		f.Add(s)
	}
	f.Add("bad \xff\xfe utf8 \xc3 and a lone \xed\xa0\x80 surrogate")
	f.Add("<|endoftext|> is plain text to Encode, not a special token")
	type enc struct {
		tok *Tokenizer
		dec func([]uint) (string, error)
	}
	var encs []enc
	for _, name := range []string{"cl100k_base", "o200k_base", "r50k_base"} {
		encs = append(encs, enc{mustLoad(f, name), reference(f, name).Decode})
	}
	f.Fuzz(func(t *testing.T, s string) {
		want := sanitizeUTF8(s)
		if !utf8.ValidString(want) {
			t.Fatalf("sanitizeUTF8(%q) = %q is not valid UTF-8", s, want)
		}
		want = strings.ReplaceAll(want, "\x7f", "")
		for _, e := range encs {
			ids := e.tok.Encode(s, nil)
			if n := e.tok.Count(s); n != len(ids) {
				t.Fatalf("%s %q: Count %d, Encode %d ids", e.tok.Name(), s, n, len(ids))
			}
			if n := e.tok.countNoCache(s); n != len(ids) {
				t.Fatalf("%s %q: count without cache %d, Encode %d ids", e.tok.Name(), s, n, len(ids))
			}
			u := make([]uint, len(ids))
			for i, id := range ids {
				if int(id) >= e.tok.VocabSize() {
					t.Fatalf("%s %q: id %d outside the vocabulary (%d)", e.tok.Name(), s, id, e.tok.VocabSize())
				}
				u[i] = uint(id)
			}
			got, err := e.dec(u)
			if err != nil || got != want {
				t.Fatalf("%s %q: ids %v decode to %q (%v)", e.tok.Name(), s, ids, got, err)
			}
		}
	})
}
