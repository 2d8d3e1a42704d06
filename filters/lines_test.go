package filters

import (
	"strings"
	"testing"
)

// TestCleanLinesPage runs the line rules of Raffel et al. 2020, section
// 2.2 (lines of at least 3 words, from memory), over an invented dealer page with one line of each
// kind and checks what was removed and why.
func TestCleanLinesPage(t *testing.T) {
	page := strings.Join([]string{
		"Larkspur Marine Works", // no terminal punctuation
		"Check the stern gland before every launch, said the foreman.", // kept
		"Call us!", // 2 words: too short (at least 3, Raffel et al. 2020, section 2.2)
		"Please enable JavaScript to see the full list of boats for sale.", // javascript
		"By using this site you agree to our Terms of Use and conditions.", // policy
		"This website uses cookies to improve your experience with us.",    // policy
		"",
		"The keel bolts were replaced in 2019 [1] after a survey [citation needed].",   // citations removed, kept
		"Our riggers measure every shroud with a tension gauge [edit].",                // citation removed, kept
		"Read more about antifouling...",                                               // ellipsis: no terminal punctuation
		"Does the bilge pump still cycle when the boat is at rest?",                    // kept
		"\u201cNever use a pressure washer on old teak,\u201d the owner warned.\u201d", // closing quote
	}, "\n")
	r := CleanLines(page, C4LineOptions())
	if r.Lines != 11 || r.Kept != 5 {
		t.Fatalf("lines %d kept %d, want 11 and 5\n%s", r.Lines, r.Kept, r.Text)
	}
	if r.Unpunctuated != 2 || r.Short != 1 || r.Javascript != 1 || r.Policy != 2 || r.Citations != 3 || r.OverlongWord != 0 {
		t.Fatalf("counts %+v", r)
	}
	want := "Check the stern gland before every launch, said the foreman.\n\n" +
		"The keel bolts were replaced in 2019 after a survey.\n" +
		"Our riggers measure every shroud with a tension gauge.\n" +
		"Does the bilge pump still cycle when the boat is at rest?\n" +
		"\u201cNever use a pressure washer on old teak,\u201d the owner warned.\u201d"
	if r.Text != want {
		t.Fatalf("cleaned text:\n%s\nwant:\n%s", r.Text, want)
	}
	if !r.Changed || r.Placeholder || r.Braces || r.Sentences != 5 {
		t.Fatalf("page flags %+v", r)
	}
}

// TestCleanLinesWordsPerLine: Raffel et al. 2020, section 2.2, keeps
// only lines of at least 3 words (C4FewestWordsPerLine).
func TestCleanLinesWordsPerLine(t *testing.T) {
	if C4FewestWordsPerLine != 3 || C4FewestSentences != 5 {
		t.Fatalf("line rule defaults %d words, %d sentences; Raffel et al. 2020, section 2.2: 3 and 5", C4FewestWordsPerLine, C4FewestSentences)
	}
	r := CleanLines("Three words here.\nTwo words.", C4LineOptions())
	if r.Kept != 1 || r.Short != 1 || r.Text != "Three words here." {
		t.Fatalf("%+v", r)
	}
}

func TestCleanLinesUnchanged(t *testing.T) {
	text := "The hull was sanded and painted in spring.\nThe mast was stepped again in May."
	r := CleanLines(text, C4LineOptions())
	if r.Changed || r.Text != text || r.Kept != 2 || r.Sentences != 2 {
		t.Fatalf("%+v", r)
	}
}

func TestCleanLinesPageRules(t *testing.T) {
	if r := CleanLines("Some Lorem Ipsum dolor sit amet text here.", C4LineOptions()); !r.Placeholder {
		t.Fatal("lorem ipsum not seen")
	}
	if r := CleanLines("function f() { return 1; } is code, not prose.", C4LineOptions()); !r.Braces {
		t.Fatal("curly brace not seen")
	}
}

func TestCountSentences(t *testing.T) {
	for text, want := range map[string]int{
		"":                                         0,
		"One. Two! Three?":                         3,
		"No final punctuation":                     1,
		"Dr. Smith met J. Jones at 3.5 knots.":     1,
		"He said \"stop.\" Then he left.":          2,
		"Wait... what?!":                           2,
		"...":                                      0,
		"e.g. this and i.e. that are one.":         1,
		"日本語です。二つ目です。":                             2,
		"Version 1.2.3 was released. It works.":    2,
		"Ends with spaces.   \n\nNew paragraph.  ": 2,
	} {
		if got := CountSentences(text); got != want {
			t.Errorf("CountSentences(%q) = %d, want %d", text, got, want)
		}
	}
}

func TestRemoveCitations(t *testing.T) {
	for in, want := range map[string]string{
		"word [1] next":                "word next",
		"word[12].":                    "word.",
		"a [citation needed], b":       "a, b",
		"a [Citation Needed] b [edit]": "a b",
		"keep [a] and [1a]":            "keep [a] and [1a]",
		"[]":                           "",
	} {
		got, _ := removeCitations(nil, in)
		if strings.TrimSpace(string(got)) != want {
			t.Errorf("removeCitations(%q) = %q, want %q", in, got, want)
		}
	}
}

func TestContainsFold(t *testing.T) {
	if !ContainsFold("Enable JAVASCRIPT now", "javascript") || ContainsFold("java script", "javascript") || !ContainsFold("x", "") {
		t.Fatal("ContainsFold")
	}
}
