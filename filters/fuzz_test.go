package filters

import (
	"math"
	"strings"
	"testing"
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
// count is strings.Fields', ratios are defined (NaN only without words),
// fractions lie in [0, 1], stop-word counts are bounded by the tokens.
func checkMetrics(t *testing.T, text string, q Quality, r Repetition) {
	t.Helper()
	if q.Words != len(strings.Fields(text)) {
		t.Fatalf("words %d, strings.Fields %d", q.Words, len(strings.Fields(text)))
	}
	noWords := q.Words == 0
	if noWords != math.IsNaN(q.MeanWordLen) || noWords != math.IsNaN(q.AlphaWords) || noWords != math.IsNaN(q.SymbolRatio) {
		t.Fatalf("NaN metrics do not match the word count: %+v", q)
	}
	if !noWords && (q.MeanWordLen < 1 || q.HashRatio < 0 || q.EllipsisRatio < 0) {
		t.Fatalf("bad ratios: %+v", q)
	}
	checkFraction(t, "alpha_words", q.AlphaWords, true)
	checkFraction(t, "bullet_lines", q.BulletLines, false)
	checkFraction(t, "ellipsis_lines", q.EllipsisLines, false)
	if c := q.Stop; c.Matches < 0 || c.Covered < c.Matches || c.Covered > c.Tokens || c.Gopher > c.Tokens {
		t.Fatalf("stop-word counts %+v", c)
	}
	checkFraction(t, "stopword_density", q.Stop.Density(), true)
	checkFraction(t, "dup_line_frac", r.DupLineFrac, false)
	checkFraction(t, "dup_para_frac", r.DupParaFrac, false)
	checkFraction(t, "dup_line_char_frac", r.DupLineCharFrac, false)
	checkFraction(t, "dup_para_char_frac", r.DupParaCharFrac, false)
	for i, v := range r.TopNgram {
		checkFraction(t, "top n-gram", v, false)
		if noWords && v != 0 {
			t.Fatalf("top %d-gram %v without words", i+2, v)
		}
	}
	for _, v := range r.DupNgram {
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
		if q2 := MeasureQuality(&s2, text, sw); q2 != q && !(math.IsNaN(q.MeanWordLen) && q2.Words == q.Words) {
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
		removed := r.LongWord + r.NoPunct + r.Short + r.Javascript + r.Policy
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
				if !EndsWithTerminal(l) || CountWords(l) < opt.MinWords || ContainsFold(l, "javascript") {
					t.Fatalf("kept line %q breaks a rule", l)
				}
			}
		}
		if r.Sentences < 0 || r.Sentences > len(r.Text) {
			t.Fatalf("sentences %d", r.Sentences)
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
