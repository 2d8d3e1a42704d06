package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
	"github.com/tiktoken-go/tokenizer"
)

// Outside check: `winnow count` totals equal the reference library
// github.com/tiktoken-go/tokenizer's counts of the same texts, per file
// and per source, for a zstd JSONL shard and a plain-text file.
func TestCountCommand(t *testing.T) {
	dir := t.TempDir()
	texts := []struct{ src, text string }{
		{"manuals", "Torque the keel bolts to 95 ft-lb, then re-check after 24 hours."},
		{"forum", "Don't sand gelcoat dry; we'll use 220-grit wet.\n\nAnyone tried it?"},
		{"forum", "hello world"},
	}
	var raw bytes.Buffer
	for i, x := range texts {
		line, _ := json.Marshal(map[string]any{"id": i, "text": x.text, "source": x.src, "tokens": 0})
		raw.Write(append(line, '\n'))
	}
	shardPath := filepath.Join(dir, "demo-00000.jsonl.zst")
	var comp bytes.Buffer
	enc, _ := zstd.NewWriter(&comp)
	enc.Write(raw.Bytes())
	enc.Close()
	if err := os.WriteFile(shardPath, comp.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	txtPath := filepath.Join(dir, "notes.txt")
	note := "The night watch logged three blisters below the waterline.\n"
	os.WriteFile(txtPath, []byte(note), 0o644)

	ref, _ := tokenizer.Get(tokenizer.Cl100kBase)
	want := map[string]int64{}
	var wantShard int64
	for _, x := range texts {
		n, _ := ref.Count(x.text)
		want[x.src] += int64(n)
		wantShard += int64(n)
	}
	wantNote, _ := ref.Count(note)

	var out bytes.Buffer
	rootCmd.SetOut(&out)
	rootCmd.SetArgs([]string{"count", "--json", "--tokenizer", "cl100k_base", shardPath, txtPath})
	defer func() { rootCmd.SetArgs(nil); rootCmd.SetOut(nil) }()
	if err := rootCmd.Execute(); err != nil {
		t.Fatal(err)
	}
	var res countResult
	if err := json.Unmarshal(out.Bytes(), &res); err != nil {
		t.Fatalf("%v: %s", err, out.String())
	}
	if len(res.Files) != 2 || res.Files[0].Tokens != wantShard || res.Files[0].Docs != 3 || res.Files[1].Tokens != int64(wantNote) {
		t.Fatalf("files %+v, want shard %d tokens, note %d", res.Files, wantShard, wantNote)
	}
	got := map[string]int64{}
	for _, s := range res.Sources {
		got[s.Name] = s.Tokens
	}
	if got["manuals"] != want["manuals"] || got["forum"] != want["forum"] {
		t.Errorf("sources %v, want %v", got, want)
	}
}

// Outside check: `count --per-doc` prints {"id","tokens"} per document in
// input order (several batches over three workers), each count equal to
// the reference library github.com/tiktoken-go/tokenizer's.
func TestCountPerDoc(t *testing.T) {
	dir := t.TempDir()
	var raw bytes.Buffer
	var texts []string
	for i := 0; i < 700; i++ {
		text := fmt.Sprintf("Work order %d: re-bed the stanchion base %d and check the deck core.", i, i%13)
		if i%50 == 0 {
			text = strings.Repeat("Larkspur Marine Works ", i/10+1)
		}
		texts = append(texts, text)
		line, _ := json.Marshal(map[string]any{"id": fmt.Sprint("wo-", i), "text": text})
		raw.Write(append(line, '\n'))
	}
	path := filepath.Join(dir, "orders.jsonl")
	if err := os.WriteFile(path, raw.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	rootCmd.SetOut(&out)
	rootCmd.SetArgs([]string{"count", "--per-doc", "--workers", "3", path})
	defer func() { rootCmd.SetArgs(nil); rootCmd.SetOut(nil); countOpts.perDoc = false; countOpts.workers = 0 }()
	if err := rootCmd.Execute(); err != nil {
		t.Fatal(err)
	}
	ref, _ := tokenizer.Get(tokenizer.Cl100kBase)
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != len(texts) {
		t.Fatalf("%d lines, want %d", len(lines), len(texts))
	}
	for i, l := range lines {
		var got struct {
			ID     string `json:"id"`
			Tokens int    `json:"tokens"`
		}
		if err := json.Unmarshal([]byte(l), &got); err != nil {
			t.Fatalf("line %d %q: %v", i, l, err)
		}
		want, _ := ref.Count(texts[i])
		if got.ID != fmt.Sprint("wo-", i) || got.Tokens != want {
			t.Fatalf("line %d: %+v, want wo-%d with %d tokens", i, got, i, want)
		}
	}
}
