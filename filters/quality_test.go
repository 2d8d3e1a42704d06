package filters

import (
	"math"
	"strings"
	"testing"
)

func near(a, b float64) bool { return math.Abs(a-b) < 1e-12 }

// TestQualityWorkedExample checks every quality metric on a text whose
// values were counted by hand.
func TestQualityWorkedExample(t *testing.T) {
	text := "- The hull is sanded...\n" + // bullet, ellipsis line
		"- Paint #1 and #2 dry.\n" + // bullet
		"\n" +
		"Check 42 bolts\u2026\n" + // ellipsis line (U+2026)
		"123 456"
	var s Scratch
	en, _ := StopwordsFor("en")
	q := MeasureQuality(&s, text, en)
	// words: (- The hull is sanded...) (- Paint #1 and #2 dry.) (Check 42 bolts…) (123 456)
	if q.Words != 16 {
		t.Fatalf("words %d, want 16", q.Words)
	}
	// characters: 1+3+4+2+9 + 1+5+2+3+2+4 + 5+2+6 + 3+3 = 55
	if !near(q.AverageWordLength, 55.0/16) {
		t.Errorf("mean word length %v, want %v", q.AverageWordLength, 55.0/16)
	}
	if !near(q.HashesPerWord, 2.0/16) || !near(q.EllipsesPerWord, 2.0/16) || !near(q.SymbolsPerWord, 2.0/16) {
		t.Errorf("symbol ratios %v %v %v", q.HashesPerWord, q.EllipsesPerWord, q.SymbolsPerWord)
	}
	// lines: 4 non-blank; bullets 2; ellipsis endings 2
	if !near(q.BulletedLinesShare, 0.5) || !near(q.EllipsisEndingLinesShare, 0.5) {
		t.Errorf("bullet lines %v, ellipsis lines %v", q.BulletedLinesShare, q.EllipsisEndingLinesShare)
	}
	// words without a letter: - - #1 #2 42 123 456 = 7 of 16
	if !near(q.WordsWithLettersShare, 9.0/16) {
		t.Errorf("alpha words %v, want %v", q.WordsWithLettersShare, 9.0/16)
	}
	// the English eight: The, and
	if q.Stop.Gopher != 2 {
		t.Errorf("gopher stop words %d, want 2", q.Stop.Gopher)
	}
}

func TestQualityEmpty(t *testing.T) {
	var s Scratch
	q := MeasureQuality(&s, "", nil)
	if q.Words != 0 || !math.IsNaN(q.AverageWordLength) || !math.IsNaN(q.SymbolsPerWord) || !math.IsNaN(q.WordsWithLettersShare) ||
		q.BulletedLinesShare != 0 || q.EllipsisEndingLinesShare != 0 || !math.IsNaN(q.Stop.Density()) {
		t.Fatalf("empty text: %+v", q)
	}
}

func TestBullets(t *testing.T) {
	for line, want := range map[string]bool{
		"- item": true, "* item": true, "+ item": true, "• item": true, "●item": true, "▪ x": true,
		"-5 degrees": false, "*bold*": false, "— dialogue": false, "1. first": false, "": false, "-": true,
	} {
		if got := StartsWithBullet(line); got != want {
			t.Errorf("StartsWithBullet(%q) = %v", line, got)
		}
	}
	for line, want := range map[string]bool{"wait...": true, "wait\u2026": true, "done.": false, "..": false} {
		if got := EndsWithEllipsis(line); got != want {
			t.Errorf("EndsWithEllipsis(%q) = %v", line, got)
		}
	}
}

// TestBadInputs measures the inputs the issue names as bad (each must get
// defined values and no panic), including a single 5 MB word generated
// here rather than committed.
func TestBadInputs(t *testing.T) {
	var s Scratch
	en, _ := StopwordsFor("en")
	zh, _ := StopwordsFor("zh")
	inputs := map[string]string{
		"empty":         "",
		"5MB word":      strings.Repeat("a", 5<<20),
		"whitespace":    strings.Repeat(" \t\n", 1000),
		"emoji":         strings.Repeat("🚤⚓🙂 ", 200),
		"mixed scripts": "The hull 船体 Rumpf корпус κύτος 선체 ตัวเรือ.",
		"rtl":           "بدن القارب يحتاج إلى طلاء جديد. גוף הסירה צריך צבע.",
		"nul bytes":     "a\x00b \x00 \x00\x00\x00 c",
	}
	for name, text := range inputs {
		for _, sw := range []*Stopwords{en, zh, nil} {
			q, r := Measure(&s, text, sw)
			checkMetrics(t, text, q, r)
			l := CleanLines(text, C4LineOptions())
			if l.Kept+l.OverlongWord+l.Unpunctuated+l.Short+l.Javascript+l.Policy != l.Lines {
				t.Fatalf("%s: line counts %+v", name, l)
			}
			Redact(text, DefaultRedactOptions())
		}
	}
	// the 5 MB word: one word of 5 Mi characters, no repetition, and a
	// line removed by the 1000-character word limit
	q, r := Measure(&s, inputs["5MB word"], en)
	if q.Words != 1 || q.AverageWordLength != 5<<20 || r.TopPhraseCharsShare != [3]float64{} {
		t.Fatalf("5 MB word: %+v %+v", q, r)
	}
	if l := CleanLines(inputs["5MB word"], C4LineOptions()); l.OverlongWord != 1 || l.Kept != 0 {
		t.Fatalf("5 MB word lines: %+v", l)
	}
	// emoji are words without letters
	if q, _ := Measure(&s, inputs["emoji"], en); q.WordsWithLettersShare != 0 || q.Words != 200 {
		t.Fatalf("emoji: %+v", q)
	}
}
