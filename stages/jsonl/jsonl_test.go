package jsonl

import (
	"encoding/json"
	"math/rand/v2"
	"strings"
	"testing"
	"unicode/utf8"
)

// Every string written reads back unchanged through encoding/json (the
// reference decoder), for random mixes of ASCII, escapes and multi-byte
// characters, as string and as []byte.
func TestAppendStringRoundTrip(t *testing.T) {
	alphabet := []string{"a", "Z", " ", "\"", "\\", "\n", "\t", "\x01", "\x7f", "é", "漢", "😀", "\u2028", "/", "<", "0"}
	rng := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < 2000; i++ {
		var sb strings.Builder
		for n := rng.IntN(40); n > 0; n-- {
			sb.WriteString(alphabet[rng.IntN(len(alphabet))])
		}
		s := sb.String()
		for _, enc := range [][]byte{AppendString(nil, s), AppendString(nil, []byte(s))} {
			var got string
			if err := json.Unmarshal(enc, &got); err != nil || got != s {
				t.Fatalf("%q: encoded %s, decoded %q (%v)", s, enc, got, err)
			}
		}
	}
	// Invalid UTF-8 becomes one U+FFFD per bad byte.
	var got string
	json.Unmarshal(AppendString(nil, "a\xff\xfeb"), &got)
	if got != "a\uFFFD\uFFFDb" || !utf8.ValidString(got) {
		t.Errorf("invalid UTF-8: %q", got)
	}
}

func TestAppendValueSortsMaps(t *testing.T) {
	got := string(AppendValue(nil, map[string]any{"b": 1.5, "a": []string{"x"}, "c": Raw(`{"k":1}`), "d": map[string]int{"z": 1, "y": 2}}))
	want := `{"a":["x"],"b":1.5,"c":{"k":1},"d":{"y":2,"z":1}}`
	if got != want {
		t.Errorf("got %s, want %s", got, want)
	}
	if s := string(AppendDocLine(nil, "i", "t", "s", 3, map[string]any{"text": "shadow", "lang": "en"}, nil)); s != `{"id":"i","text":"t","source":"s","tokens":3,"lang":"en"}`+"\n" {
		t.Errorf("doc line %s", s)
	}
}
