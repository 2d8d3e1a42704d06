package audit

import (
	"bytes"
	"strings"
	"testing"

	"winnow/stages"
)

// The audit's contamination table counts as checked only the items long
// enough to check: an eval set of 48 items of which 8 are too short shows
// 40 checked and 8 too short, and the percentage over the 40 (the figure
// contamination.json holds), as `winnow demo` and `winnow contam` do.
func TestContamTableItemsChecked(t *testing.T) {
	c := &stages.ContamReport{Ngram: 13, Action: "drop", Evals: []stages.ContamEvalStat{
		{Name: "hull-qa", Items: 48, ItemsTooShort: 8, TooShort: []string{"hq-1"}, ItemsContaminated: 4, Percent: 10, DocsAffected: 5},
	}}
	var b bytes.Buffer
	if err := writeContam(&b, c); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(b.String(), "hull-qa: 8 item(s) too short to check") {
		t.Errorf("no too-short line:\n%s", b.String())
	}
	lines := strings.Split(b.String(), "\n")
	head, row := strings.Fields(lines[0]), strings.Fields(lines[1])
	want := map[string]string{"items": "48", "too short": "8", "items checked": "40", "contaminated": "4", "% of checked": "10.0%"}
	// Columns are right-aligned: match each header to its row cell by
	// the header's words, read from the right.
	cols := []string{"eval set", "items", "too short", "items checked", "contaminated", "% of checked", "docs affected"}
	if got := strings.Join(head, " "); got != strings.Join(cols, " ") {
		t.Fatalf("header %q", lines[0])
	}
	if len(row) != len(cols) {
		t.Fatalf("row %q", lines[1])
	}
	for i, c := range cols {
		if w, ok := want[c]; ok && row[i] != w {
			t.Errorf("%s: %q, want %q (row %q)", c, row[i], w, lines[1])
		}
	}
}
