package termtext

import (
	"bytes"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// unsafeRef is the reference of what must not reach a terminal, from the
// Unicode Character Database as Go's unicode package carries it: general
// category Cc (C0, DEL, C1) and the Bidi_Control property (UAX #9).
func unsafeRef(r rune) bool {
	return unicode.IsControl(r) || unicode.Is(unicode.Bidi_Control, r)
}

func TestEscape(t *testing.T) {
	cases := []struct{ in, want string }{
		{"doc-17", "doc-17"},
		{"Skiff \u00e9t\u00e9 \u6f22\u5b57", "Skiff \u00e9t\u00e9 \u6f22\u5b57"},
		{"a\x1b[2J\x1b]0;owned\x07b", `a\x1b[2J\x1b]0;owned\x07b`},
		{"x\u009b31m\u009d0;t\u009c", `x\u009b31m\u009d0;t\u009c`},
		{"line\nnext\ttab\rback\x7f", `line\nnext\ttab\rback\u007f`},
		{"bad\xffbyte\xe2\x82", `bad\xffbyte\xe2\x82`},
		{"rtl\u202eevil\u2066", `rtl\u202eevil\u2066`},
	}
	for _, c := range cases {
		if got := Escape(c.in); got != c.want {
			t.Errorf("Escape(%q) = %q, want %q", c.in, got, c.want)
		}
	}
	if got := EscapeLines("one\n\ttwo\x1b"); got != "one\n\ttwo\\x1b" {
		t.Errorf("EscapeLines: %q", got)
	}
	// Every code point of the reference set is escaped, nothing else is.
	for r := rune(0); r < 0x3000; r++ {
		s := string(r)
		if got := Escape(s); (got != s) != unsafeRef(r) {
			t.Errorf("U+%04X: Escape gives %q", r, got)
		}
	}
}

// The escaped writer gives what EscapeLines gives on the whole stream,
// however the stream is cut into writes.
func TestWriterSplits(t *testing.T) {
	in := "id \u00e9\x1b[31m\u009b\u202e\xff\xe2\x82\xac|\n\tend\xe2\x82"
	want := EscapeLines(in)
	for cut := 0; cut <= len(in); cut++ {
		for cut2 := cut; cut2 <= len(in); cut2++ {
			var b bytes.Buffer
			w := NewWriter(&b)
			for _, part := range []string{in[:cut], in[cut:cut2], in[cut2:]} {
				if n, err := w.Write([]byte(part)); n != len(part) || err != nil {
					t.Fatalf("Write: %d %v", n, err)
				}
			}
			w.Flush()
			if b.String() != want {
				t.Fatalf("cuts %d,%d: %q, want %q", cut, cut2, b.String(), want)
			}
		}
	}
}

// Invariants on any input: the output holds no rune the reference calls
// unsafe (newlines and tabs aside for EscapeLines) and is valid UTF-8;
// safe input is unchanged; the writer agrees with EscapeLines for any
// split.
func FuzzEscape(f *testing.F) {
	for _, s := range []string{"", "doc-1", "\x1b]8;;http://x\x07link\x1b]8;;\x07", "\u009b2J", "a\xc3", "\u202ex", "\r\n\t\x00"} {
		f.Add(s, 1)
	}
	f.Fuzz(func(t *testing.T, s string, cut int) {
		for _, keep := range []bool{false, true} {
			out := escape(s, keep)
			if !utf8.ValidString(out) {
				t.Fatalf("invalid UTF-8 out of %q: %q", s, out)
			}
			for _, r := range out {
				if unsafeRef(r) && !(keep && (r == '\n' || r == '\t')) {
					t.Fatalf("%q left U+%04X in %q", s, r, out)
				}
			}
			safe := utf8.ValidString(s) && !strings.ContainsFunc(s, func(r rune) bool { return unsafeRef(r) && !(keep && (r == '\n' || r == '\t')) })
			if safe != (out == s) {
				t.Fatalf("%q: safe %v but output %q", s, safe, out)
			}
		}
		if cut < 0 {
			cut = -cut
		}
		if len(s) > 0 {
			cut %= len(s) + 1
		} else {
			cut = 0
		}
		var b bytes.Buffer
		w := NewWriter(&b)
		w.Write([]byte(s[:cut]))
		w.Write([]byte(s[cut:]))
		w.Flush()
		if b.String() != EscapeLines(s) {
			t.Fatalf("writer %q, EscapeLines %q", b.String(), EscapeLines(s))
		}
	})
}
