package dedup

import (
	"fmt"
	"testing"
)

func TestParagraphSpans(t *testing.T) {
	text := "\n  first line\nsecond line\n\n \t\nthird para\r\n\r\nlast"
	spans := ParagraphSpans(text, nil)
	var got []string
	for _, s := range spans {
		got = append(got, text[s[0]:s[1]])
	}
	want := []string{"  first line\nsecond line", "third para", "last"}
	if fmt.Sprintf("%q", got) != fmt.Sprintf("%q", want) {
		t.Fatalf("got %q, want %q", got, want)
	}
}

func TestParagraphDedup(t *testing.T) {
	footer := "Larkspur Marine Works. All rights reserved."
	quote := "Fair winds and following seas."
	var docs []string
	for i := 0; i < 30; i++ {
		d := fmt.Sprintf("Log entry %d: replaced impeller number %d.\n\nChecked the bilge pump.", i, i)
		if i < 5 {
			d += "\n\n" + quote // 5 documents: under the limit
		}
		d += "\n\n\n" + footer
		if i%2 == 0 {
			d += "\n\n  LARKSPUR   marine works. all rights reserved.\n" // same after normalization, repeated in one doc
		}
		docs = append(docs, d)
	}
	x := NewParagraphIndex(ParagraphOptions{MaxRepeats: 10, TempDir: t.TempDir(), MemoryBudget: 64})
	defer x.Close()
	for _, d := range docs {
		if err := x.Add(ParagraphHashes(d, Normalization{}, nil)); err != nil {
			t.Fatal(err)
		}
	}
	if err := x.Reduce(); err != nil {
		t.Fatal(err)
	}
	// "Checked the bilge pump." (30 docs) and the footer (30 docs) repeat.
	if x.Frequent() != 2 {
		t.Fatalf("frequent paragraphs %d, want 2", x.Frequent())
	}
	if x.Stats().Runs == 0 {
		t.Error("a 64-byte budget should spill")
	}
	got, n := x.Strip(docs[0])
	want := "Log entry 0: replaced impeller number 0.\n\n" + quote + "\n"
	if got != want || n != 3 {
		t.Errorf("strip doc 0: %q (%d removed), want %q (3)", got, n, want)
	}
	got, n = x.Strip(docs[7])
	if got != "Log entry 7: replaced impeller number 7." || n != 2 {
		t.Errorf("strip doc 7: %q (%d removed)", got, n)
	}
	if got, n := x.Strip("Checked the bilge pump.\n\n" + footer); got != "" || n != 2 {
		t.Errorf("all-boilerplate doc: %q %d", got, n)
	}
}
