package filters

import (
	"math/rand/v2"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// refSplit is a plain reference of Split built on the standard library:
// words as strings.Fields sees them, lines split at '\n' and trimmed with
// strings.TrimSpace, paragraphs as runs of non-blank lines.
type refLine struct {
	text  string
	words int
}

func refSplit(text string) (words []string, lines []refLine, paras []string) {
	words = strings.Fields(text)
	var cur []string
	flush := func() {
		if len(cur) > 0 {
			paras = append(paras, strings.Join(cur, "\n"))
			cur = nil
		}
	}
	for _, l := range strings.Split(text, "\n") {
		t := strings.TrimSpace(l)
		if t == "" {
			flush()
			continue
		}
		lines = append(lines, refLine{t, len(strings.Fields(t))})
		cur = append(cur, t)
	}
	flush()
	return words, lines, paras
}

// checkSplit compares Split with refSplit on text.
func checkSplit(t *testing.T, s *Scratch, text string) {
	t.Helper()
	s.Split(text)
	words, lines, paras := refSplit(text)
	if len(s.Words) != len(words) {
		t.Fatalf("%q: %d words, strings.Fields has %d", trunc(text), len(s.Words), len(words))
	}
	for i, w := range s.Words {
		got := text[w.Start:w.End]
		if got != words[i] {
			t.Fatalf("%q: word %d = %q, want %q", trunc(text), i, got, words[i])
		}
		if int(w.Runes) != utf8.RuneCountInString(got) {
			t.Fatalf("%q: word %q runes %d, want %d", trunc(text), got, w.Runes, utf8.RuneCountInString(got))
		}
		if w.Alpha != strings.ContainsFunc(got, unicode.IsLetter) {
			t.Fatalf("%q: word %q alpha %v", trunc(text), got, w.Alpha)
		}
		if plain := string(NormalizeWord(nil, got)) == got && isLowerASCIIAlnum(got); w.Plain != plain {
			t.Fatalf("%q: word %q plain %v, want %v", trunc(text), got, w.Plain, plain)
		}
	}
	if len(s.Lines) != len(lines) {
		t.Fatalf("%q: %d lines, want %d", trunc(text), len(s.Lines), len(lines))
	}
	for i, l := range s.Lines {
		got := text[l.Start:l.End]
		if got != lines[i].text || l.NumWords != lines[i].words || l.Runes != utf8.RuneCountInString(got) {
			t.Fatalf("%q: line %d = %q (%d words, %d runes), want %q (%d words)", trunc(text), i, got, l.NumWords, l.Runes, lines[i].text, lines[i].words)
		}
		if l.RuneStart != utf8.RuneCountInString(text[:l.Start]) {
			t.Fatalf("%q: line %d rune start %d, want %d", trunc(text), i, l.RuneStart, utf8.RuneCountInString(text[:l.Start]))
		}
	}
	if len(s.Paras) != len(paras) {
		t.Fatalf("%q: %d paragraphs, want %d", trunc(text), len(s.Paras), len(paras))
	}
	for i, p := range s.Paras {
		// the span keeps the original indentation between lines; compare trimmed lines
		var parts []string
		for _, l := range strings.Split(text[p.Start:p.End], "\n") {
			parts = append(parts, strings.TrimSpace(l))
		}
		if got := strings.Join(parts, "\n"); got != paras[i] {
			t.Fatalf("%q: paragraph %d = %q, want %q", trunc(text), i, got, paras[i])
		}
		if p.Runes != utf8.RuneCountInString(text[p.Start:p.End]) {
			t.Fatalf("%q: paragraph %d runes %d, want %d", trunc(text), i, p.Runes, utf8.RuneCountInString(text[p.Start:p.End]))
		}
	}
	if s.Runes != utf8.RuneCountInString(text) {
		t.Fatalf("%q: runes %d, want %d", trunc(text), s.Runes, utf8.RuneCountInString(text))
	}
	if n := CountWords(text); n != len(words) {
		t.Fatalf("%q: CountWords %d, want %d", trunc(text), n, len(words))
	}
}

func isLowerASCIIAlnum(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !('a' <= c && c <= 'z' || '0' <= c && c <= '9') {
			return false
		}
	}
	return s != ""
}

func trunc(s string) string {
	if len(s) > 80 {
		return s[:80] + "..."
	}
	return s
}

func TestSplitExamples(t *testing.T) {
	var s Scratch
	for _, text := range []string{
		"",
		" ",
		"\n\n\n",
		"one",
		"one two  three\tfour",
		"Hello, World!\nSecond line here.\n\nNew paragraph.",
		"  indented line  \n\t\ttabbed\r\nwindows line\r\n",
		"a\u00a0b\u2003c\u3000d\u0085e\u2028f", // non-ASCII spaces split words
		"naïve café Ölkanne",
		"日本語のテキスト 中文 한국어",
		"مرحبا بالعالم שלום עולם",
		"emoji 🚤⚓ only🙂",
		"nul\x00byte \x00\x00",
		"bad \xff\xfe utf8 \xc3",
		"word-with-dash and_under 123 4.5 #tag ... \u2026",
		"UPPER lower Mixed digits42 x",
		"exactly8 bytes!! 12345678 abcdefghijklmnop",
		"p1\n\np2 line1\np2 line2\n\n\n\np3",
	} {
		checkSplit(t, &s, text)
	}
}

// TestSplitRandom compares Split with the reference on random texts drawn
// from an alphabet that mixes ASCII, spaces of every kind, multi-byte
// letters, symbols and invalid bytes.
func TestSplitRandom(t *testing.T) {
	alphabet := []string{"a", "Z", "q", "7", ".", ",", "#", " ", " ", "\t", "\n", "\n", "\r", "\v", "\f",
		"\u00a0", "\u2003", "\u3000", "\u0085", "é", "ß", "日", "ا", "🚤", "\x00", "\xff", "\xc3", "…", "-", "'"}
	r := rand.New(rand.NewPCG(1, 2))
	var s Scratch
	for iter := 0; iter < 3000; iter++ {
		var b strings.Builder
		n := r.IntN(60)
		for k := 0; k < n; k++ {
			if r.IntN(3) == 0 {
				b.WriteString(strings.Repeat("x", r.IntN(20)))
			}
			b.WriteString(alphabet[r.IntN(len(alphabet))])
		}
		checkSplit(t, &s, b.String())
	}
}

// TestSplitCache checks that splitting the same text twice reuses the
// result and that a different text of the same length is split anew.
func TestSplitCache(t *testing.T) {
	var s Scratch
	s.Split("alpha beta gamma")
	if len(s.Words) != 3 {
		t.Fatalf("words %d", len(s.Words))
	}
	s.Split("alpha beta gamma")
	if len(s.Words) != 3 {
		t.Fatalf("words after cached split %d", len(s.Words))
	}
	s.Split("alpha betagamma ") // same length, different text
	if len(s.Words) != 2 {
		t.Fatalf("words after new text %d, want 2", len(s.Words))
	}
}

// TestSplitZeroAllocs proves the splitter reuses the scratch buffers:
// no allocation per word once the scratch has grown.
func TestSplitZeroAllocs(t *testing.T) {
	docs := []string{boatyardText(1, 5000), boatyardText(2, 5000)}
	var s Scratch
	s.Split(docs[0])
	s.Split(docs[1])
	i := 0
	allocs := testing.AllocsPerRun(50, func() {
		s.Split(docs[i%2]) // alternate so the cache never hits
		i++
	})
	if allocs != 0 {
		t.Fatalf("Split allocates %.1f times per document", allocs)
	}
}

// TestSplitHugeWord splits a single 5 MB word (generated here rather than
// committed) and a 5 MB run of spaces.
func TestSplitHugeWord(t *testing.T) {
	var s Scratch
	word := strings.Repeat("w", 5<<20)
	s.Split(word)
	if len(s.Words) != 1 || int(s.Words[0].Runes) != len(word) || len(s.Lines) != 1 || len(s.Paras) != 1 {
		t.Fatalf("5 MB word: %d words, %d lines, %d paragraphs", len(s.Words), len(s.Lines), len(s.Paras))
	}
	s.Split(strings.Repeat(" \n", 5<<19))
	if len(s.Words) != 0 || len(s.Lines) != 0 || len(s.Paras) != 0 {
		t.Fatalf("whitespace: %d words, %d lines", len(s.Words), len(s.Lines))
	}
}
