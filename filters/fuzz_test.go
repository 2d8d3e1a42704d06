package filters

import (
	"math"
	"strings"
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
	})
}

func FuzzRedact(f *testing.F) {
	opt := DefaultRedactOptions()
	f.Fuzz(func(t *testing.T, text string) {
		r := Redact(text, opt)
		n := r.Email + r.IP + r.Phone
		if n == 0 && r.Text != text {
			t.Fatal("text changed without a replacement")
		}
		if n > 0 && strings.Count(r.Text, "<") < n {
			t.Fatalf("%d replacements but fewer placeholders in %q", n, r.Text)
		}
		if utf8.ValidString(text) && !utf8.ValidString(r.Text) {
			t.Fatal("redaction made valid UTF-8 invalid")
		}
		// what was redacted is gone: a second pass finds no e-mail address
		if r2 := Redact(r.Text, opt); r2.Email > 0 && r.Email > 0 && strings.Count(text, "@") <= r.Email {
			t.Fatalf("e-mail found again after redaction: %q", r.Text)
		}
	})
}
