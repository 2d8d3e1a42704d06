package filters

import (
	"strings"
	"testing"
	"unicode/utf8"

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
		// U+200B ZERO WIDTH SPACE keeps e and U+0301 apart, so the text is
		// NFC as it stands (UAX #15: a starter blocks composition); once
		// it is removed they compose, in a second pass.
		{"cafe\u200b\u0301", "caf\u00e9", map[string]int{"control_chars": 1, "unicode_nfc": 1}},
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
	// Already-clean text takes the fast path and allocates nothing.
	clean := "The keel bolts were torqued.\n\nThe rudder was checked.\n"
	if n := testing.AllocsPerRun(100, func() { NormalizeText(clean, norm.NFC, true, 1) }); n != 0 {
		t.Errorf("clean text: %v allocations", n)
	}
}

// TestNormalizeNFKCIdempotent checks inputs where NFKC makes new
// whitespace, which a single cleanup-then-normalize pass left behind.
// The decompositions are those of UnicodeData.txt (UAX #15): U+00A8
// DIAERESIS is <compat> 0020 0308, U+00A0 NO-BREAK SPACE is <noBreak>
// 0020, U+3000 IDEOGRAPHIC SPACE is <wide> 0020, U+FB01 is <compat> 0066
// 0069.
func TestNormalizeNFKCIdempotent(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"\ufb01le", "file"},
		{"\u00a81", "\u03081"},                           // leading space of the decomposition trimmed
		{"hull \u00a8 9", "hull \u0308 9"},               // two spaces collapsed
		{"keel\u00a0 bolts", "keel bolts"},               // NBSP next to a space
		{"rudder\u3000\n\u00a0\nmast", "rudder\n\nmast"}, // trailing and whitespace-only lines
		{"stern \u00a0", "stern"},
	} {
		got, ch := NormalizeText(c.in, norm.NFKC, true, 1)
		if got != c.want {
			t.Errorf("%q: got %q, want %q", c.in, got, c.want)
		}
		if ch["unicode_nfkc"] == 0 {
			t.Errorf("%q: NFKC not counted: %v", c.in, ch)
		}
		if again, ch2 := NormalizeText(got, norm.NFKC, true, 1); again != got || ch2 != nil {
			t.Errorf("%q: not idempotent: %q -> %q %v", c.in, got, again, ch2)
		}
	}
}

// checkNormalized asserts what NormalizeText promises of its output, each
// property checked directly: the normal form (by x/text's own check),
// valid UTF-8, no CR, no trailing or (when collapsing) doubled spaces and
// tabs, at most maxBlank blank lines in a row, no leading blank line, at
// most one final newline; and idempotence.
func checkNormalized(t *testing.T, in, out string, ch map[string]int, form norm.Form, collapse bool, maxBlank int) {
	t.Helper()
	if (ch == nil) != (out == in) {
		t.Fatalf("changes %v but output %q for input %q", ch, out, in)
	}
	if !form.IsNormalString(out) {
		t.Fatalf("%q is not in the normal form", out)
	}
	if !utf8.ValidString(out) || strings.ContainsAny(out, "\r\x00\u200b\ufeff\u2028") {
		t.Fatalf("bad characters left in %q", out)
	}
	if strings.HasPrefix(out, "\n") || strings.HasSuffix(out, "\n\n") {
		t.Fatalf("leading blank line or extra final newline in %q", out)
	}
	blank := 0
	var lines []string
	if body := strings.TrimSuffix(out, "\n"); body != "" {
		lines = strings.Split(body, "\n")
	}
	for i, l := range lines {
		if strings.HasSuffix(l, " ") || strings.HasSuffix(l, "\t") {
			t.Fatalf("line %d ends in white space: %q", i, l)
		}
		if collapse && (strings.Contains(l, "  ") || strings.HasPrefix(l, " ") || strings.Contains(l, "\t")) {
			t.Fatalf("line %d has uncollapsed white space: %q", i, l)
		}
		if l == "" {
			if blank++; blank > maxBlank {
				t.Fatalf("%d blank lines in a row in %q", blank, out)
			}
		} else {
			blank = 0
		}
	}
	if again, ch2 := NormalizeText(out, form, collapse, maxBlank); again != out || ch2 != nil {
		t.Fatalf("not idempotent: %q -> %q -> %q (%v)", in, out, again, ch2)
	}
}

func FuzzNormalizeText(f *testing.F) {
	f.Add("cafe\u0301 \u00a81 \ufb01le\r\n\n\n\u00a0\n", byte(1), true, 1)
	f.Fuzz(func(t *testing.T, text string, form byte, collapse bool, maxBlank int) {
		nf := norm.NFC
		if form&1 == 1 {
			nf = norm.NFKC
		}
		maxBlank = max(maxBlank, -maxBlank) % 4
		if maxBlank < 0 {
			maxBlank = 0
		}
		out, ch := NormalizeText(text, nf, collapse, maxBlank)
		checkNormalized(t, text, out, ch, nf, collapse, maxBlank)
	})
}

// BenchmarkNormalizeText measures the normalize stage's text function on
// the benchmark pages, as written (clean: the one-scan path) and with
// CRLF line endings and a no-break space per line (rebuilt, NFKC twice).
func BenchmarkNormalizeText(b *testing.B) {
	b.Run("clean", func(b *testing.B) {
		benchEach(b, func(_ *Scratch, text string) { NormalizeText(text, norm.NFKC, true, 1) })
	})
	b.Run("dirty", func(b *testing.B) {
		benchEach(b, func(_ *Scratch, text string) {
			NormalizeText(strings.ReplaceAll(text, "\n", "\u00a0\r\n"), norm.NFKC, true, 1)
		})
	})
}
