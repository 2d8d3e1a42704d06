package filters

import (
	"math"
	"slices"
	"strings"
	"sync"
	"testing"
	"unicode"
	"unicode/utf8"
)

// Seeds for every fuzz target live in testdata/fuzz/<Target>/: empty
// text, only whitespace, only emoji, mixed scripts, right-to-left text,
// NUL bytes, invalid UTF-8, markup. The single 5 MB word is generated in
// TestBadInputs rather than committed.

// fuzzLangs are the stop-word lists a fuzz input is measured with, picked
// by its length, so segmented and multi-word lists are exercised too.
var fuzzLangs = []string{"en", "zh", "vi", "ja", "ar", "ru"}

func checkFraction(t *testing.T, name string, v float64, nanOK bool) {
	t.Helper()
	if math.IsNaN(v) {
		if !nanOK {
			t.Fatalf("%s is NaN", name)
		}
		return
	}
	if v < 0 || v > 1 || math.IsInf(v, 0) {
		t.Fatalf("%s = %v, outside [0, 1]", name, v)
	}
}

// checkMetrics asserts the invariants of Measure on any text: the word
// count is refWords', ratios are defined (NaN only without words),
// fractions lie in [0, 1], stop-word counts are bounded by the tokens.
func checkMetrics(t *testing.T, text string, q Quality, r Repetition) {
	t.Helper()
	if q.Words != len(refWords(text)) {
		t.Fatalf("words %d, refWords %d", q.Words, len(refWords(text)))
	}
	noWords := q.Words == 0
	if noWords != math.IsNaN(q.WordsWithLettersShare) || noWords != math.IsNaN(q.SymbolsPerWord) {
		t.Fatalf("NaN metrics do not match the word count: %+v", q)
	}
	// the average word length is over spaced-script words, NaN unless
	// they are the majority
	unspaced := 0
	for _, w := range refWords(text) {
		if r, _ := utf8.DecodeRuneInString(w); unicode.In(r, unicode.Han, unicode.Hiragana, unicode.Katakana, unicode.Thai) || r == 0x30FC {
			unspaced++
		}
	}
	if (q.Words-unspaced > unspaced) == math.IsNaN(q.AverageWordLength) {
		t.Fatalf("average word length %v with %d of %d words in scripts without spaces", q.AverageWordLength, unspaced, q.Words)
	}
	if !noWords && (q.AverageWordLength < 1 || q.HashesPerWord < 0 || q.EllipsesPerWord < 0) {
		t.Fatalf("bad ratios: %+v", q)
	}
	// every metric is a finite number (NaN only where documented; the
	// average word length is checked above)
	for name, v := range map[string]float64{"hashes_per_word": q.HashesPerWord,
		"ellipses_per_word": q.EllipsesPerWord, "symbols_per_word": q.SymbolsPerWord} {
		if math.IsInf(v, 0) || math.IsNaN(v) != noWords {
			t.Fatalf("%s = %v with %d words", name, v, q.Words)
		}
	}
	if math.IsInf(q.AverageWordLength, 0) {
		t.Fatalf("average word length %v", q.AverageWordLength)
	}
	if !noWords && q.SymbolsPerWord != max(q.HashesPerWord, q.EllipsesPerWord) {
		t.Fatalf("symbols per word %v, hashes %v, ellipses %v", q.SymbolsPerWord, q.HashesPerWord, q.EllipsesPerWord)
	}
	checkFraction(t, "words_with_letters_share", q.WordsWithLettersShare, true)
	checkFraction(t, "bulleted_lines_share", q.BulletedLinesShare, false)
	checkFraction(t, "ellipsis_ending_lines_share", q.EllipsisEndingLinesShare, false)
	if c := q.Stop; c.Matches < 0 || c.Covered < c.Matches || c.Covered > c.Tokens || c.Gopher > c.Tokens {
		t.Fatalf("stop-word counts %+v", c)
	}
	checkFraction(t, "stop_word_share", q.Stop.Density(), true)
	checkFraction(t, "repeated_lines_share", r.RepeatedLinesShare, false)
	checkFraction(t, "repeated_paragraphs_share", r.RepeatedParagraphsShare, false)
	checkFraction(t, "repeated_line_chars_share", r.RepeatedLineCharsShare, false)
	checkFraction(t, "repeated_paragraph_chars_share", r.RepeatedParagraphCharsShare, false)
	for i, v := range r.TopPhraseCharsShare {
		checkFraction(t, "top n-gram", v, false)
		if noWords && v != 0 {
			t.Fatalf("top %d-gram %v without words", i+2, v)
		}
	}
	for _, v := range r.RepeatedPhraseCharsShare {
		checkFraction(t, "dup n-gram", v, false)
	}
}

func FuzzMeasure(f *testing.F) {
	var s Scratch
	f.Fuzz(func(t *testing.T, text string) {
		sw, err := StopwordsFor(fuzzLangs[len(text)%len(fuzzLangs)])
		if err != nil {
			t.Fatal(err)
		}
		q, r := Measure(&s, text, sw)
		checkMetrics(t, text, q, r)
		// the separate entry points agree with the combined one
		var s2 Scratch
		if q2 := MeasureQuality(&s2, text, sw); q2 != q && !(math.IsNaN(q.AverageWordLength) && q2.Words == q.Words) {
			t.Fatalf("MeasureQuality %+v, Measure %+v", q2, q)
		}
		if r2 := MeasureRepetition(&s2, text); r2 != r {
			t.Fatalf("MeasureRepetition %+v, Measure %+v", r2, r)
		}
	})
}

func FuzzCleanLines(f *testing.F) {
	opt := C4LineOptions()
	f.Fuzz(func(t *testing.T, text string) {
		r := CleanLines(text, opt)
		removed := r.OverlongWord + r.Unpunctuated + r.Short + r.Javascript + r.Policy
		if r.Kept+removed != r.Lines {
			t.Fatalf("kept %d + removed %d != lines %d", r.Kept, removed, r.Lines)
		}
		if !r.Changed && r.Text != text {
			t.Fatal("unchanged result differs from the input")
		}
		if utf8.ValidString(text) && !utf8.ValidString(r.Text) {
			t.Fatal("cleaning made valid UTF-8 invalid")
		}
		if r.Changed {
			for _, l := range strings.Split(r.Text, "\n") {
				if l == "" {
					continue
				}
				if !EndsWithTerminal(l) || CountWords(l) < opt.FewestWords || ContainsFold(l, "javascript") {
					t.Fatalf("kept line %q breaks a rule", l)
				}
			}
		}
		if r.Sentences < 0 || r.Sentences > len(r.Text) {
			t.Fatalf("sentences %d", r.Sentences)
		}
		// cleaning is idempotent: what was kept passes every rule again
		if r2 := CleanLines(r.Text, opt); r2.Changed || r2.Text != r.Text || r2.Kept != r.Kept {
			t.Fatalf("second pass changed %q to %q (%+v)", r.Text, r2.Text, r2)
		}
	})
}

// checkRedacted asserts the invariants of Redact on any text: no panic,
// each replacement leaves exactly one placeholder (the default
// placeholders cannot overlap themselves, so counting them is exact),
// valid UTF-8 stays valid, and a second pass finds nothing: redaction is
// idempotent and leaves no address it would itself report.
func checkRedacted(t *testing.T, text string, r RedactResult) {
	t.Helper()
	n := r.Email + r.IP + r.Phone
	if n == 0 && r.Text != text {
		t.Fatal("text changed without a replacement")
	}
	for _, c := range []struct {
		ph   string
		want int
	}{{EmailPlaceholder, r.Email}, {IPPlaceholder, r.IP}, {PhonePlaceholder, r.Phone}} {
		if got := strings.Count(r.Text, c.ph) - strings.Count(text, c.ph); got != c.want {
			t.Fatalf("%d new %s in %q, counted %d", got, c.ph, r.Text, c.want)
		}
	}
	if utf8.ValidString(text) && !utf8.ValidString(r.Text) {
		t.Fatal("redaction made valid UTF-8 invalid")
	}
	if r2 := Redact(r.Text, DefaultRedactOptions()); r2.Email+r2.IP+r2.Phone != 0 || r2.Text != r.Text {
		t.Fatalf("second pass found %d e-mail, %d IP, %d phone in %q: %q", r2.Email, r2.IP, r2.Phone, r.Text, r2.Text)
	}
}

func FuzzRedact(f *testing.F) {
	opt := DefaultRedactOptions()
	f.Fuzz(func(t *testing.T, text string) {
		checkRedacted(t, text, Redact(text, opt))
	})
}

// FuzzSplit compares Split with its standard-library reference (refSplit:
// strings.Fields, lines cut at '\n' and trimmed with strings.TrimSpace)
// on any text, and checks that CountWords agrees.
func FuzzSplit(f *testing.F) {
	var s Scratch
	f.Fuzz(func(t *testing.T, text string) {
		checkSplit(t, &s, text)
	})
}

// stopwordMaps are the normalized entries of each list as a Go map: the
// reference that CountStopwords' hash tables are checked against.
var stopwordMaps = sync.OnceValue(func() map[string]map[string]bool {
	m := map[string]map[string]bool{}
	for _, lang := range StopwordLanguages() {
		sw, err := StopwordsFor(lang)
		if err != nil {
			panic(err)
		}
		set := map[string]bool{}
		for _, w := range sw.Words() {
			set[w] = true
		}
		m[lang] = set
	}
	return m
})

// FuzzStopwords checks the stop-word scan on any text with every list in
// turn (picked by the text's length): NormalizeWord is idempotent and
// Contains does not depend on normalizing first; the counts are bounded
// (matches <= covered <= tokens, the English eight only with the English
// list or none); and for a list of single words in a spaced language the
// counts equal a plain count over the words (refWords) with a Go map of
// the list's entries (the English eight by Rae et al. 2021, section A.1.1 of
// the appendix, from memory).
func FuzzStopwords(f *testing.F) {
	langs := StopwordLanguages()
	var s Scratch
	f.Fuzz(func(t *testing.T, text string) {
		lang := langs[len(text)%len(langs)]
		sw, _ := StopwordsFor(lang)
		fields := strings.Fields(text)
		for _, w := range fields {
			n := string(NormalizeWord(nil, w))
			if again := string(NormalizeWord(nil, n)); again != n {
				t.Fatalf("NormalizeWord(%q) = %q, then %q", w, n, again)
			}
			if sw.Contains(w) != sw.Contains(n) {
				t.Fatalf("%s: Contains(%q) %v, Contains(%q) %v", lang, w, sw.Contains(w), n, sw.Contains(n))
			}
		}
		s.Split(text)
		for _, l := range []*Stopwords{sw, nil} {
			c := CountStopwords(&s, text, l)
			if c.Matches < 0 || c.Covered < c.Matches || c.Tokens < c.Covered || c.Gopher < 0 || c.Gopher > c.Tokens {
				t.Fatalf("%s: counts %+v", lang, c)
			}
			checkFraction(t, "stop_word_share", c.Density(), c.Tokens == 0)
			if l != nil && lang != "en" && c.Gopher != 0 {
				t.Fatalf("%s: English eight counted with another list: %+v", lang, c)
			}
			if l == nil && c.Matches != 0 {
				t.Fatalf("matches without a list: %+v", c)
			}
		}
		c := CountStopwords(&s, text, sw)
		if sw.Segmented || sw.maxTokens > 1 {
			return
		}
		set := stopwordMaps()[lang]
		words := refWords(text) // as Split cuts them (one per character in scripts without spaces)
		want := StopCount{Tokens: len(words)}
		for _, w := range words {
			n := string(NormalizeWord(nil, w))
			if len(n) <= maxNormBytes && set[n] {
				want.Matches++
				want.Covered++
				if lang == "en" && slices.Contains(gopherStopwords[:], n) {
					want.Gopher++
				}
			}
		}
		if c != want {
			t.Fatalf("%s: counts %+v, plain count %+v", lang, c, want)
		}
	})
}
