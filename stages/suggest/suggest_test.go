package suggest

import "testing"

// Levenshtein distances of the textbook examples: kitten → sitting is 3,
// flaw → lawn is 2 (common worked examples of the edit-distance recurrence).
func TestEditDistance(t *testing.T) {
	for _, c := range []struct {
		a, b string
		d    int
	}{{"kitten", "sitting", 3}, {"flaw", "lawn", 2}, {"", "abc", 3}, {"same", "same", 0}} {
		if got := EditDistance(c.a, c.b); got != c.d {
			t.Errorf("%q %q: %d, want %d", c.a, c.b, got, c.d)
		}
	}
	if got := Nearest("min_wrods", []string{"max_words", "min_words", "min_stopwords"}); got != "min_words" {
		t.Errorf("Nearest = %q", got)
	}
	if got := Nearest("zzzz", []string{"min_words"}); got != "" {
		t.Errorf("far name suggested %q", got)
	}
}
