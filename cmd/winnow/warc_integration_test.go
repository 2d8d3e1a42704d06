package main

import (
	"bufio"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// A crawl saved by GNU Wget 1.21.3 (--warc-file, from a loopback web server
// serving Debian documentation pages; testdata/webcrawl) gives one document
// per HTML page; the redirect, the 404, the PNG and CSS files and Wget's own
// records (argument list, log, manifest) are skipped by rule, counted in the
// manifest, written to the read ledger, and summed on stderr.
func TestRunWgetWARC(t *testing.T) {
	dir := t.TempDir()
	warc, _ := filepath.Abs("../../testdata/webcrawl/crawl.warc.gz")
	spec := filepath.Join(dir, "spec.yaml")
	os.WriteFile(spec, []byte("name: crawl\ninputs:\n  - source: docs\n    paths: ["+warc+"]\nstages:\n  - kind: normalize\noutput:\n  dir: out\n"), 0o644)

	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	stderr := captureStderr(t, func() {
		if _, err := runCLI(t, "run", spec, "-q"); err != nil {
			t.Fatal(err)
		}
	})
	var m struct {
		Totals struct {
			DocsOut int64 `json:"docs_out"`
		} `json:"totals"`
		ReadSkips map[string]int64 `json:"read_skips"`
		Inputs    []struct {
			Docs    int64            `json:"docs"`
			Skips   map[string]int64 `json:"skips"`
			Skipped int64            `json:"skipped_records"`
		} `json:"inputs"`
		ErrorCount int64 `json:"error_count"`
	}
	b, err := os.ReadFile(filepath.Join(dir, "out", "manifest.json"))
	if err != nil || json.Unmarshal(b, &m) != nil {
		t.Fatal(err)
	}
	want := map[string]int64{"crawler_record": 3, "http_status": 1, "not_text": 2, "redirect": 1}
	if m.Totals.DocsOut != 15 || m.ErrorCount != 0 || len(m.ReadSkips) != len(want) {
		t.Fatalf("manifest: %d docs out, %d errors, skips %v", m.Totals.DocsOut, m.ErrorCount, m.ReadSkips)
	}
	for k, v := range want {
		if m.ReadSkips[k] != v || m.Inputs[0].Skips[k] != v {
			t.Errorf("skips[%s] = %d / %d, want %d", k, m.ReadSkips[k], m.Inputs[0].Skips[k], v)
		}
	}
	// warcinfo and the 19 request records hold no documents by type.
	if m.Inputs[0].Skipped != 20 || m.Inputs[0].Docs != 15 {
		t.Errorf("input: %d docs, %d other records", m.Inputs[0].Docs, m.Inputs[0].Skipped)
	}
	if !strings.Contains(stderr, "skipped 7 record(s) that hold no page text (crawler_record 3, http_status 1, not_text 2, redirect 1)") {
		t.Errorf("stderr: %s", stderr)
	}
	// The read ledger has one skip record per skipped record.
	f, err := os.Open(filepath.Join(dir, "out", "ledger", "read.jsonl.zst"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, _ := zstd.NewReader(f)
	defer zr.Close()
	got := map[string]int64{}
	var skippedID string
	sc := bufio.NewScanner(zr)
	for sc.Scan() {
		var rec struct{ Doc, Stage, Rule, Action string }
		if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
			t.Fatal(err)
		}
		if rec.Stage != "read" || rec.Action != "skip" {
			t.Errorf("ledger record %s", sc.Text())
		}
		got[rec.Rule]++
		skippedID = rec.Doc
	}
	for k, v := range want {
		if got[k] != v {
			t.Errorf("ledger: %d %s records, want %d", got[k], k, v)
		}
	}
	// explain tells a skipped record from a document.
	if out, err := runCLI(t, "explain", filepath.Join(dir, "out"), skippedID); err != nil || !strings.Contains(out, "skipped at read by rule") {
		t.Errorf("explain %s: %v\n%s", skippedID, err, out)
	}
	// The audit reads the run.
	if out, err := runCLI(t, "audit", filepath.Join(dir, "out")); err != nil || !strings.Contains(out, "http_status") {
		t.Errorf("audit: %v\n%s", err, out)
	}
}

// captureStderr returns what f wrote to os.Stderr.
func captureStderr(t *testing.T, f func()) string {
	t.Helper()
	r, w, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	old := os.Stderr
	os.Stderr = w
	done := make(chan string)
	go func() {
		b, _ := io.ReadAll(r)
		done <- string(b)
	}()
	defer func() { os.Stderr = old }()
	f()
	w.Close()
	os.Stderr = old
	return <-done
}
