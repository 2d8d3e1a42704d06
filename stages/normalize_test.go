package stages

import (
	"testing"

	"golang.org/x/text/unicode/norm"
)

func TestNormalizeText(t *testing.T) {
	cases := []struct {
		in, want string
		changes  map[string]int
	}{
		{"Clean text.\n\nSecond paragraph.", "Clean text.\n\nSecond paragraph.", nil},
		// NFC composes e + U+0301 COMBINING ACUTE ACCENT into U+00E9
		// (Unicode Standard Annex #15, canonical composition).
		{"cafe\u0301 menu", "caf\u00e9 menu", map[string]int{"unicode_nfc": 1}},
		{"one\r\ntwo\rthree", "one\ntwo\nthree", map[string]int{"line_endings": 2}},
		{"tabs\tand  spaces   here  ", "tabs and spaces here", map[string]int{"spaces_collapsed": 5, "trailing_spaces": 1}},
		{"a\n\n\n\n\nb", "a\n\nb", map[string]int{"blank_lines": 3}},
		{"\n\nlead", "lead", map[string]int{"blank_lines": 2}},
		{"bell\x07 nul\x00 zw\u200bsp", "bell nul zwsp", map[string]int{"control_chars": 3}},
		{"end\n", "end\n", nil},
		{"end\n\n\n", "end\n", map[string]int{"trailing_newlines": 2}},
		{"\n", "", map[string]int{"trailing_newlines": 1}},
		{"a\r\n", "a\n", map[string]int{"line_endings": 1}},
		{"one  two\n", "one two\n", map[string]int{"spaces_collapsed": 1}},
		{"", "", nil},
	}
	for _, c := range cases {
		got, ch := NormalizeText(c.in, norm.NFC, true, 1)
		if got != c.want {
			t.Errorf("%q: got %q, want %q", c.in, got, c.want)
		}
		if len(ch) != len(c.changes) {
			t.Errorf("%q: changes %v, want %v", c.in, ch, c.changes)
			continue
		}
		for k, v := range c.changes {
			if ch[k] != v {
				t.Errorf("%q: changes %v, want %v", c.in, ch, c.changes)
			}
		}
	}
	// NFKC folds compatibility characters: U+FB01 LATIN SMALL LIGATURE FI
	// becomes "fi" (Unicode Standard Annex #15).
	if got, _ := NormalizeText("\ufb01le", norm.NFKC, true, 1); got != "file" {
		t.Errorf("NFKC: %q", got)
	}
	// Already-clean text takes the fast path and allocates nothing.
	clean := "The keel bolts were torqued.\n\nThe rudder was checked.\n"
	if n := testing.AllocsPerRun(100, func() { NormalizeText(clean, norm.NFC, true, 1) }); n != 0 {
		t.Errorf("clean text: %v allocations", n)
	}
}

func TestLengthStage(t *testing.T) {
	st, err := newLength(ParamsFromMap(map[string]any{"min_chars": 5, "max_lines": 2}), Env{})
	if err != nil {
		t.Fatal(err)
	}
	for text, want := range map[string]string{"abcd": "min_chars", "abcde": "", "ab\ncd\nef": "max_lines", "ab\n\n\ncd": ""} {
		d := st.Process(&Doc{Text: text})
		if d.Rule != want {
			t.Errorf("%q: rule %q, want %q", text, d.Rule, want)
		}
	}
	if _, err := newLength(ParamsFromMap(map[string]any{"min_char": 5}), Env{}); err == nil {
		t.Error("unknown key accepted")
	}
}
