package read

import (
	"strings"
	"testing"
)

// docTexts returns the kept texts and the issue rules of a read.
func docTexts(recs []Record) (texts, rules []string) {
	for _, r := range recs {
		if r.Doc != nil {
			texts = append(texts, r.Doc.Text)
		}
		if r.Issue != nil {
			rules = append(rules, r.Issue.Rule)
		}
	}
	return texts, rules
}

// A UTF-8 byte-order mark (EF BB BF, Unicode 15.0 section 23.8) at the
// start of a JSONL or text file is a signature, not content: it costs no
// record and does not end up in the first document.
func TestBOMStripped(t *testing.T) {
	dir := t.TempDir()
	bom := "\xef\xbb\xbf"
	p := writeFile(t, dir, "bom.jsonl", bom+`{"id":"1","text":"Mast step inspection."}`+"\n"+`{"id":"2","text":"Rigging tension."}`+"\n")
	for _, path := range []string{p, compressWith(t, "zstd", writeFile(t, dir, "bomz.jsonl", bom+`{"id":"1","text":"Mast step inspection."}`+"\n"+`{"id":"2","text":"Rigging tension."}`+"\n"))} {
		recs, err := readAll(t, path, ReadOptions{Source: "s"})
		if err != nil {
			t.Fatal(err)
		}
		texts, rules := docTexts(recs)
		if len(texts) != 2 || texts[0] != "Mast step inspection." || len(rules) != 0 {
			t.Errorf("%s: texts %q rules %v", path, texts, rules)
		}
	}
	p = writeFile(t, dir, "bom.txt", bom+"Varnish the tiller.\n\nSecond block.")
	recs, err := readAll(t, p, ReadOptions{Source: "s", TextMode: "blocks"})
	texts, _ := docTexts(recs)
	if err != nil || len(texts) != 2 || texts[0] != "Varnish the tiller." {
		t.Errorf("text: %q %v", texts, err)
	}
}

// A NUL byte is judged per record, the same wherever it is in the file:
// in JSONL a raw NUL is malformed JSON and costs that line only; in plain
// text it is replaced with U+FFFD and the document kept (rule nul_byte).
func TestNULPerRecord(t *testing.T) {
	dir := t.TempDir()
	pad := strings.Repeat(`{"text":"Filler line about sanding the deck."}`+"\n", 200) // > 4 KiB
	nulLine := "{\"text\":\"Bad\x00line.\"}\n"
	content := `{"text":"First."}` + "\n" + nulLine + pad + nulLine + `{"text":"Last."}` + "\n"
	p := writeFile(t, dir, "nul.jsonl", content)
	recs, err := readAll(t, p, ReadOptions{Source: "s"})
	if err != nil {
		t.Fatalf("whole file refused: %v", err)
	}
	texts, rules := docTexts(recs)
	if len(texts) != 202 || texts[0] != "First." || texts[201] != "Last." {
		t.Errorf("kept %d docs, want 202", len(texts))
	}
	if strings.Join(rules, ",") != "malformed_record,malformed_record" {
		t.Errorf("rules %v", rules)
	}
	for _, r := range recs {
		if r.Issue != nil && (r.Issue.Line != 2 && r.Issue.Line != 203) {
			t.Errorf("issue at line %d", r.Issue.Line)
		}
	}
	p = writeFile(t, dir, "nul.txt", "Early\x00block.\n\n"+strings.Repeat("Long text block.\n", 300)+"\nLate\x00block.")
	recs, err = readAll(t, p, ReadOptions{Source: "s", TextMode: "blocks"})
	if err != nil {
		t.Fatalf("text refused: %v", err)
	}
	texts, rules = docTexts(recs)
	if len(texts) != 3 || texts[0] != "Early\uFFFDblock." || texts[2] != "Late\uFFFDblock." || strings.Join(rules, ",") != "nul_byte,nul_byte" {
		t.Errorf("text: %q %v", texts, rules)
	}
}
