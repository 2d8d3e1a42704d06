package run

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tiktoken-go/tokenizer"

	"winnow/shard"
)

// countFixture writes n JSONL work orders (every 7th line broken JSON) and
// returns the path, the texts of the readable documents and their ids.
func countFixture(t *testing.T, n int) (string, []string, []string) {
	t.Helper()
	var raw bytes.Buffer
	var texts, ids []string
	for i := 0; i < n; i++ {
		if i%7 == 3 {
			raw.WriteString("{\"id\": \"broken\", \"text\": \n")
			continue
		}
		text := fmt.Sprintf("Work order %d: fair the keel, then %s.", i, strings.Repeat("sand and varnish the rail ", i%5+1))
		src := []string{"yard", "loft"}[i%2]
		line, _ := json.Marshal(map[string]any{"id": fmt.Sprint("wo-", i), "text": text, "source": src})
		raw.Write(append(line, '\n'))
		texts, ids = append(texts, text), append(ids, fmt.Sprint("wo-", i))
	}
	path := filepath.Join(t.TempDir(), "orders.jsonl")
	if err := os.WriteFile(path, raw.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, texts, ids
}

// Outside check: CountTokens' per-document counts and total equal the
// reference library github.com/tiktoken-go/tokenizer's (cl100k_base), the
// per-document lines come in input order and are byte-identical for 1 and
// 4 workers, broken records are skipped and reported, and the sources add
// up to the total.
func TestCountTokensWorkers(t *testing.T) {
	path, texts, ids := countFixture(t, 1000) // several 256-document batches
	tok, err := shard.Load("cl100k_base", "")
	if err != nil {
		t.Fatal(err)
	}
	ref, err := tokenizer.Get(tokenizer.Cl100kBase)
	if err != nil {
		t.Fatal(err)
	}
	var wantTotal int64
	var want bytes.Buffer
	for i, text := range texts {
		n, _ := ref.Count(text)
		wantTotal += int64(n)
		fmt.Fprintf(&want, "{\"id\":%q,\"tokens\":%d}\n", ids[i], n)
	}
	for _, workers := range []int{1, 4} {
		var lines, warn bytes.Buffer
		flushes := 0
		res, err := CountTokens(context.Background(), []string{path}, CountOptions{Tokenizer: tok, Format: "jsonl",
			TextField: "text", TextMode: "file", Workers: workers, PerDoc: &lines, Warn: &warn,
			Flush: func() error { flushes++; return nil }})
		if err != nil {
			t.Fatal(err)
		}
		if lines.String() != want.String() {
			t.Fatalf("workers %d: per-doc lines differ from the reference", workers)
		}
		if flushes != 1 {
			t.Errorf("workers %d: %d flushes, want 1 per file", workers, flushes)
		}
		if res.Total.Tokens != wantTotal || res.Total.Docs != int64(len(texts)) || res.Files[0].Tokens != wantTotal {
			t.Errorf("workers %d: total %+v, want %d docs, %d tokens", workers, res.Total, len(texts), wantTotal)
		}
		if res.Skipped != int64(1000-len(texts)) {
			t.Errorf("workers %d: skipped %d, want %d", workers, res.Skipped, 1000-len(texts))
		}
		if got := strings.Count(warn.String(), "\n"); got != maxCountIssueLines+1 || !strings.Contains(warn.String(), "more unreadable records not shown") {
			t.Errorf("workers %d: warnings %q", workers, warn.String())
		}
		var sum int64
		for _, s := range res.Sources {
			sum += s.Tokens
		}
		if len(res.Sources) != 2 || res.Sources[0].Name != "loft" || sum != wantTotal {
			t.Errorf("workers %d: sources %+v, want loft and yard summing to %d", workers, res.Sources, wantTotal)
		}
	}
}

// A cancelled context stops the count with an error naming the file.
func TestCountTokensCancelled(t *testing.T) {
	path, _, _ := countFixture(t, 1000)
	tok, err := shard.Load("cl100k_base", "")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err = CountTokens(ctx, []string{path}, CountOptions{Tokenizer: tok, TextField: "text", Workers: 2})
	if !errors.Is(err, context.Canceled) || !strings.Contains(err.Error(), path) {
		t.Fatalf("err = %v, want context.Canceled naming %s", err, path)
	}
}
