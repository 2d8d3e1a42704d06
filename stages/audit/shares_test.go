package audit_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages/audit"
	"winnow/stages/run"
	"winnow/stages/spec"
)

// shareStages has no stage that edits before the lines stage, so every
// document enters each stage with the text its input line holds, and the
// lines stage is the only edit: what it cut is the input text minus the
// shard text.
const shareStages = `stages:
  - kind: length
    min_chars: 50
  - kind: quality
  - kind: lines
output:
  tokenizer: cl100k_base
`

// TestSharesRecountedFromInputs recomputes every rule's and stage's share
// of documents, bytes and tokens from the run's input files (decoded here
// with klauspost/compress and encoding/json), its ledger (which documents
// each rule removed or edited), its shards (the edited text) and the token
// stage's metrics rows, and compares them with the audit's.
func TestSharesRecountedFromInputs(t *testing.T) {
	run := cachedRun(t, "shares", shareStages)
	base := corpus(t)
	s, _, err := audit.Summarize(openRun(t, run, audit.OpenOptions{}), audit.SummaryOptions{})
	if err != nil {
		t.Fatal(err)
	}

	// Input text size of every document, by id.
	size := map[string]int64{}
	files, _ := filepath.Glob(filepath.Join(base, "corpus", "*", "*.jsonl.zst"))
	if len(files) == 0 {
		t.Fatal("no input files")
	}
	for _, f := range files {
		for _, d := range readJSONL(t, f) {
			id := d["id"].(string)
			if _, dup := size[id]; dup {
				t.Fatalf("id %s twice in the inputs: the recount keys by id", id)
			}
			size[id] = int64(len(d["text"].(string)))
		}
	}
	out := map[string]int64{}
	for _, l := range shardLines(t, run) {
		out[l["id"].(string)] = int64(len(l["text"].(string)))
	}
	tokens := map[string]int64{}
	for _, row := range readJSONL(t, filepath.Join(run, "metrics", "tokenize.jsonl.zst")) {
		tokens[row["doc"].(string)] = num(row["tokens"])
	}

	ledger := ledgerFiles(t, run)
	if n := len(ledger["read"]); n > 0 {
		t.Fatalf("%d read records: the recount assumes every input line became a document as written", n)
	}
	if n := len(ledger["output"]); n > 0 {
		t.Fatalf("%d output records: the recount assumes no split or mix", n)
	}
	order := []string{"length", "quality", "lines"}
	removedAt := map[string]int{} // doc -> index of the stage that dropped it
	for i, st := range order {
		for _, rc := range ledger[st] {
			if rc["action"] == "drop" {
				removedAt[rc["doc"].(string)] = i
			}
		}
	}
	type acc struct{ docs, bytes, tokens int64 }
	in := make([]acc, len(order))
	for id, n := range size {
		at, gone := removedAt[id]
		for i := range order {
			if gone && at < i {
				break
			}
			in[i].docs++
			in[i].bytes += n
			in[i].tokens += tokens[id]
		}
	}
	type key struct{ stage, rule, action string }
	got := map[key]*audit.RuleRow{}
	for i := range s.Rules {
		rr := &s.Rules[i]
		got[key{rr.Stage, rr.Rule, rr.Action}] = rr
	}
	near := func(a, b float64) bool { return math.Abs(a-b) < 1e-12 }
	sawEdit, sawHeavy := false, false
	for i, st := range order {
		rules := map[key]*acc{}
		var stageBytes, stageDocs, stageTokens int64
		for _, rc := range ledger[st] {
			k := key{st, rc["rule"].(string), rc["action"].(string)}
			a := rules[k]
			if a == nil {
				a = &acc{}
				rules[k] = a
			}
			id := rc["doc"].(string)
			a.docs++
			var cut int64
			switch k.action {
			case "drop":
				cut = size[id]
				a.tokens += tokens[id]
				stageDocs++
				stageTokens += tokens[id]
			case "edit":
				cut = size[id] - out[id]
				sawEdit = true
			}
			a.bytes += cut
			stageBytes += cut
		}
		for k, a := range rules {
			rr := got[k]
			if rr == nil {
				t.Errorf("%v: not in the audit", k)
				continue
			}
			wantDocs := float64(a.docs) / float64(in[i].docs)
			wantBytes := float64(a.bytes) / float64(in[i].bytes)
			if !near(rr.Share, wantDocs) || rr.BytesShare == nil || !near(*rr.BytesShare, wantBytes) || rr.Bytes != a.bytes || !rr.BytesExact {
				t.Errorf("%v: docs share %v bytes %d share %v (exact %v); recount %v, %d, %v", k, rr.Share, rr.Bytes, rr.BytesShare, rr.BytesExact,
					wantDocs, a.bytes, wantBytes)
			}
			if k.action == "drop" {
				want := float64(a.tokens) / float64(in[i].tokens)
				if rr.TokensShare == nil || !near(*rr.TokensShare, want) {
					t.Errorf("%v: tokens share %v, recount %v", k, rr.TokensShare, want)
				}
			} else if rr.TokensShare != nil || rr.TokensShareCell() != "not counted" {
				t.Errorf("%v: an edit's tokens are never counted, audit says %v", k, rr.TokensShareCell())
			}
			if wantBytes >= 0.05 && wantBytes >= 2*wantDocs {
				sawHeavy = true
				if !hasNote(s.Notes, k.stage+"/"+k.rule) {
					t.Errorf("%v: %.1f%% of documents, %.1f%% of bytes, but no note names it: %q", k, 100*wantDocs, 100*wantBytes, s.Notes)
				}
			}
		}
		f := s.Flow[i+1]
		if f.Stage != st {
			t.Fatalf("flow row %d is %s, want %s", i+1, f.Stage, st)
		}
		if f.DocsIn != in[i].docs || f.BytesIn != in[i].bytes || f.BytesRemoved != stageBytes || f.TokensIn != in[i].tokens {
			t.Errorf("stage %s: in %d docs %d bytes %d tokens, removed %d bytes; recount %d, %d, %d, %d", st, f.DocsIn, f.BytesIn, f.TokensIn,
				f.BytesRemoved, in[i].docs, in[i].bytes, in[i].tokens, stageBytes)
		}
		if !near(f.DroppedShare, float64(stageDocs)/float64(in[i].docs)) || !near(f.BytesShare, float64(stageBytes)/float64(in[i].bytes)) ||
			f.TokensShare == nil || !near(*f.TokensShare, float64(stageTokens)/float64(in[i].tokens)) {
			t.Errorf("stage %s: shares %v %v %v; recount %d/%d docs, %d/%d bytes, %d/%d tokens", st, f.DroppedShare, f.BytesShare, f.TokensShare,
				stageDocs, in[i].docs, stageBytes, in[i].bytes, stageTokens, in[i].tokens)
		}
	}
	if !sawEdit {
		t.Error("the lines stage edited nothing: the corpus should exercise edit bytes")
	}
	t.Logf("a rule whose share of bytes outweighs its share of documents: %v", sawHeavy)

	// The text table shows the columns.
	var b bytes.Buffer
	if err := s.WriteText(&b); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"bytes %", "tokens %", "not counted", "removed by stage"} {
		if !strings.Contains(b.String(), want) {
			t.Errorf("audit text lacks %q", want)
		}
	}
}

func hasNote(notes []string, label string) bool {
	for _, n := range notes {
		if strings.HasPrefix(n, label+" ") {
			return true
		}
	}
	return false
}

// TestHeavyRuleNoted: one page of ten is dropped for a curly brace but
// holds most of the text; the audit's share of bytes says so (recounted
// from the input lines) and a note names the rule. No tokenizer: every
// token share is "not counted".
func TestHeavyRuleNoted(t *testing.T) {
	dir := t.TempDir()
	prose := strings.Repeat("The yard hauled the boat out for the winter. ", 6)
	code := strings.Repeat("The bilge pump script reads the float switch. ", 150) + "\nif (level > 3) { pump(); }\n"
	var in bytes.Buffer
	var total int64
	for i := 0; i < 10; i++ {
		text := prose
		if i == 4 {
			text = code
		}
		total += int64(len(text))
		b, _ := json.Marshal(map[string]string{"id": fmt.Sprintf("d%d", i), "text": text})
		in.Write(append(b, '\n'))
	}
	if err := os.WriteFile(filepath.Join(dir, "in.jsonl"), in.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	specYAML := "name: heavy\ninputs:\n  - source: yard\n    paths: [in.jsonl]\nstages:\n  - kind: lines\n"
	p := filepath.Join(dir, "spec.yaml")
	os.WriteFile(p, []byte(specYAML), 0o644)
	sp, err := spec.LoadSpec(p)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "run")
	if _, err := run.RunSpec(context.Background(), sp, run.RunOptions{Out: out, Workers: 1}); err != nil {
		t.Fatal(err)
	}
	s, _, err := audit.Summarize(openRun(t, out, audit.OpenOptions{}), audit.SummaryOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var braces *audit.RuleRow
	for i := range s.Rules {
		if s.Rules[i].Rule == "has_braces" {
			braces = &s.Rules[i]
		}
		if s.Rules[i].TokensShareCell() != "not counted" {
			t.Errorf("%s: tokens share %q in a run that counted no tokens", s.Rules[i].Label(), s.Rules[i].TokensShareCell())
		}
	}
	if braces == nil {
		t.Fatalf("no has_braces row: %+v", s.Rules)
	}
	want := float64(len(code)) / float64(total)
	if braces.Share != 0.1 || braces.BytesShare == nil || math.Abs(*braces.BytesShare-want) > 1e-12 {
		t.Errorf("has_braces: %v of docs, %v of bytes; want 0.1 and %v", braces.Share, braces.BytesShare, want)
	}
	if !hasNote(s.Notes, "lines/has_braces") {
		t.Errorf("no note names lines/has_braces: %q", s.Notes)
	}
}
