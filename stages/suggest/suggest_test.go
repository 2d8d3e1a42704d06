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
	if got := Nearest("fewest_wrods", []string{"most_words", "fewest_words", "fewest_stop_words"}); got != "fewest_words" {
		t.Errorf("Nearest = %q", got)
	}
	if got := Nearest("zzzz", []string{"fewest_words"}); got != "" {
		t.Errorf("far name suggested %q", got)
	}
}
