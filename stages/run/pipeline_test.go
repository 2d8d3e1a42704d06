package run

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"winnow/stages/record"

	"github.com/klauspost/compress/zstd"

	"winnow/stages/read"
	"winnow/stages/spec"
)

// writeCorpus writes n small JSONL documents over two zstd files and
// returns the directory.
func writeCorpus(t *testing.T, n int) string {
	t.Helper()
	dir := t.TempDir()
	for f := 0; f < 2; f++ {
		var b bytes.Buffer
		for i := f; i < n; i += 2 {
			text := fmt.Sprintf("Hull %d:  check the keel bolts\r\nand the rudder bearing  %d.", i, i*31%17)
			if i%7 == 0 {
				text = "x"
			}
			fmt.Fprintf(&b, `{"id":"doc-%d","text":%q,"site":"yard-%d"}`+"\n", i, text, i%3)
		}
		var z bytes.Buffer
		w, _ := zstd.NewWriter(&z)
		w.Write(b.Bytes())
		w.Close()
		writeFile(t, dir, fmt.Sprintf("raw/part-%d.jsonl.zst", f), z.String())
	}
	return dir
}

func writeSpec(t *testing.T, dir, body string) *spec.Spec {
	t.Helper()
	return loadSpec(t, writeFile(t, dir, "spec.yaml", body))
}

const basicSpec = `name: basic
seed: 1
inputs:
  - source: yard
    paths: ["raw/*.zst"]
stages:
  - kind: normalize
  - kind: length
    min_chars: 5
output:
  dir: out
`

// readZstdLines returns the decompressed content of a .zst file.
func readZstd(t *testing.T, path string) string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d, _ := zstd.NewReader(f)
	defer d.Close()
	b, err := io.ReadAll(d)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

var secondsRE = regexp.MustCompile(`"seconds": [0-9.e+-]+`)

// runDirDigest returns every file of a run directory with timings blanked.
func runDirDigest(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		b, _ := os.ReadFile(p)
		if rel == "manifest.json" {
			b = secondsRE.ReplaceAll(b, []byte(`"seconds": 0`))
		}
		out[rel] = string(b)
		return nil
	})
	return out
}

// sameRunDir reports, each line prefixed by what, how the run directory
// digest got differs from want: the number of files, and each file of
// want whose bytes differ.
func sameRunDir(t *testing.T, what string, got, want map[string]string) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: %d files, want %d (%v)", what, len(got), len(want), slices.Sorted(maps.Keys(got)))
	}
	for k, v := range want {
		if got[k] != v {
			t.Errorf("%s: %s differs", what, k)
		}
	}
}

// Same inputs, spec and seed give byte-identical run directories, whatever
// the number of workers.
func TestRunDeterministicAcrossWorkers(t *testing.T) {
	dir := writeCorpus(t, 3000)
	s := writeSpec(t, dir, basicSpec)
	var first map[string]string
	for _, w := range []int{1, 4, 3} {
		out := filepath.Join(dir, fmt.Sprintf("out-%d", w))
		res, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: w, Version: "test"})
		if err != nil {
			t.Fatal(err)
		}
		if res.Manifest.Totals.DocsOut != 3000-3000/7-1 {
			t.Errorf("workers %d: %d docs out", w, res.Manifest.Totals.DocsOut)
		}
		got := runDirDigest(t, out)
		if first == nil {
			first = got
			continue
		}
		sameRunDir(t, fmt.Sprintf("workers %d", w), got, first)
	}
	// Output order is input order: file 0's documents, then file 1's.
	shard := readZstd(t, filepath.Join(dir, "out-1", "shards", "basic-00000.jsonl.zst"))
	lines := strings.Split(strings.TrimSpace(shard), "\n")
	var d struct{ ID, Text, Site string }
	json.Unmarshal([]byte(lines[0]), &d)
	if d.ID != "doc-2" || d.Text != "Hull 2: check the keel bolts\nand the rudder bearing 11." || d.Site != "yard-2" {
		t.Errorf("first shard line %s", lines[0])
	}
	json.Unmarshal([]byte(lines[len(lines)-1]), &d)
	if d.ID != "doc-2999" {
		t.Errorf("last line %s", lines[len(lines)-1])
	}
	// The ledger names every dropped document with the rule and limit.
	led := readZstd(t, filepath.Join(dir, "out-1", "ledger", "length.jsonl.zst"))
	if n := strings.Count(led, `"rule":"min_chars"`); n != 3000/7+1 {
		t.Errorf("%d min_chars records", n)
	}
	if !strings.Contains(led, `{"doc":"doc-0","source":"yard","file":"raw/part-0.jsonl.zst","line":1,"stage":"length","rule":"min_chars","action":"drop","value":1,"limit":5,"bytes":1}`) {
		t.Errorf("ledger record shape: %s", strings.SplitN(led, "\n", 2)[0])
	}
}

func TestRunDirRefusals(t *testing.T) {
	dir := writeCorpus(t, 10)
	s := writeSpec(t, dir, basicSpec)
	// An output directory that contains an input.
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: dir}); err == nil || !strings.Contains(err.Error(), "contains input") {
		t.Errorf("out containing input: %v", err)
	}
	// A directory with other content.
	other := t.TempDir()
	os.WriteFile(filepath.Join(other, "notes.txt"), []byte("x"), 0o644)
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: other}); err == nil || !strings.Contains(err.Error(), "--force") {
		t.Errorf("non-run dir: %v", err)
	}
	// A different run.
	out := filepath.Join(dir, "o")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out}); err != nil {
		t.Fatal(err)
	}
	s2 := writeSpec(t, dir, strings.Replace(basicSpec, "seed: 1", "seed: 2", 1))
	if _, err := RunSpec(context.Background(), s2, RunOptions{Out: out}); err == nil || !strings.Contains(err.Error(), "different run") {
		t.Errorf("different run: %v", err)
	}
	if _, err := RunSpec(context.Background(), s2, RunOptions{Out: out, Force: true}); err != nil {
		t.Errorf("--force: %v", err)
	}
	// The same spec again is allowed and replaces the run.
	if _, err := RunSpec(context.Background(), s2, RunOptions{Out: out}); err != nil {
		t.Errorf("rerun: %v", err)
	}
}

func TestMissingInputsFailBeforeWork(t *testing.T) {
	dir := writeCorpus(t, 4)
	os.MkdirAll(filepath.Join(dir, "emptydir"), 0o755)
	for _, paths := range []string{`["raw/nothing-*.zst"]`, `["raw/missing.jsonl"]`, `["emptydir"]`} {
		s := writeSpec(t, dir, strings.Replace(basicSpec, `["raw/*.zst"]`, paths, 1))
		_, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out-missing")})
		if err == nil {
			t.Errorf("%s: no error", paths)
			continue
		}
		if _, statErr := os.Stat(filepath.Join(dir, "out-missing")); statErr == nil {
			t.Errorf("%s: output directory created before the error", paths)
		}
	}
}

// A truncated input keeps what came before the break and names the file
// and offset in the manifest errors.
func TestRunTruncatedInputRecorded(t *testing.T) {
	dir := writeCorpus(t, 16000)
	p := filepath.Join(dir, "raw", "part-1.jsonl.zst")
	b, _ := os.ReadFile(p)
	os.WriteFile(p, b[:len(b)*9/10], 0o644)
	// And a file that is not zstd at all, under a .zst name: nothing of
	// it is read.
	os.WriteFile(filepath.Join(dir, "raw", "part-2.jsonl.zst"), []byte{0x7f, 'E', 'L', 'F', 0, 0, 1, 2, 3, 0, 0, 0, 9, 9, 9, 9}, 0o644)
	s := writeSpec(t, dir, basicSpec)
	logf, lines := logLines()
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out"), Log: logf})
	if err != nil {
		t.Fatal(err)
	}
	// The messages say how many documents of each broken file were kept.
	logs := lines()
	joined := strings.Join(logs, "\n")
	kept := "raw/part-1.jsonl.zst: "
	tail := fmt.Sprintf("(the %d documents before this point are kept)", res.Manifest.Inputs[1].Docs)
	none := "raw/part-2.jsonl.zst: "
	found1, found2 := false, false
	for _, l := range logs {
		if strings.HasPrefix(l, kept) {
			found1 = strings.HasSuffix(l, tail)
		}
		if strings.HasPrefix(l, none) {
			found2 = strings.HasSuffix(l, "(no document of it was read)")
		}
	}
	if !found1 || !found2 {
		t.Errorf("log lacks %q or an unreadable file's message:\n%s", tail, joined)
	}
	if res.Runner.FatalInputs != 2 {
		t.Errorf("fatal inputs %d", res.Runner.FatalInputs)
	}
	var found bool
	for _, e := range res.Manifest.Errors {
		if e.File == "raw/part-1.jsonl.zst" && e.Fatal && e.Offset > 0 && strings.Contains(e.Message, "zstd") {
			found = true
		}
	}
	if !found {
		t.Errorf("errors %+v", res.Manifest.Errors)
	}
	if in := res.Manifest.Inputs[1]; in.Complete || in.Docs == 0 || in.Docs >= 8000 {
		t.Errorf("input summary %+v", in)
	}
	// The broken file is also a read record in the ledger.
	led := readZstd(t, filepath.Join(dir, "out", "ledger", "read.jsonl.zst"))
	if !strings.Contains(led, `"file":"raw/part-1.jsonl.zst"`) || !strings.Contains(led, `"rule":"broken_input"`) || !strings.Contains(led, `"offset":`) {
		t.Errorf("read ledger: %s", led)
	}
}

// Cancelling mid-run flushes the ledger of what was decided and marks the
// manifest interrupted.
func TestRunInterrupted(t *testing.T) {
	dir := writeCorpus(t, 20000)
	s := writeSpec(t, dir, basicSpec)
	// Cancel before start: the run must stop at once and still be valid.
	ctx2, cancel2 := context.WithCancel(context.Background())
	cancel2()
	res, err := RunSpec(ctx2, s, RunOptions{Out: filepath.Join(dir, "out2"), Workers: 2})
	if err == nil || res == nil || !res.Manifest.Interrupted {
		t.Fatalf("want interrupted run, got %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "out2", "manifest.json")); err != nil {
		t.Errorf("manifest missing: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "out2", "ledger", "length.jsonl.zst")); err != nil {
		t.Errorf("ledger missing: %v", err)
	}
}

// "-" reads standard input.
func TestRunFromStdin(t *testing.T) {
	dir := t.TempDir()
	pr, pw, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	old := os.Stdin
	os.Stdin = pr
	defer func() { os.Stdin = old }()
	go func() {
		zw, _ := zstd.NewWriter(pw)
		for i := 0; i < 500; i++ {
			fmt.Fprintf(zw, `{"text":"Stdin document %d about mooring lines."}`+"\n", i)
		}
		zw.Close()
		pw.Close()
	}()
	s := writeSpec(t, dir, strings.Replace(basicSpec, `["raw/*.zst"]`, `["-"]`, 1))
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out")})
	if err != nil {
		t.Fatal(err)
	}
	if res.Manifest.Totals.DocsOut != 500 || res.Manifest.Inputs[0].Path != "-" || res.Manifest.Inputs[0].Codec != read.CodecZstd {
		t.Errorf("manifest %+v %+v", res.Manifest.Totals, res.Manifest.Inputs)
	}
	shard := readZstd(t, filepath.Join(dir, "out", "shards", "basic-00000.jsonl.zst"))
	if !strings.Contains(shard, `"id":"yard/-:500"`) {
		t.Errorf("stdin ids: %.200s", shard)
	}
}

// A --set override is part of the manifest's config and config hash, so
// the manifest says what really ran.
func TestSetOverrideRecordedInConfig(t *testing.T) {
	dir := writeCorpus(t, 50)
	s := writeSpec(t, dir, basicSpec)
	base := s.ConfigHash
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out"), Sets: []string{"length.min_chars=40"}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Manifest.ConfigHash == base {
		t.Error("config hash unchanged by --set")
	}
	st := res.Manifest.Config.(map[string]any)["stages"].([]any)[1].(map[string]any)
	if st["min_chars"] != 40 {
		t.Errorf("config stage %v", st)
	}
	led := readZstd(t, filepath.Join(dir, "out", "ledger", "length.jsonl.zst"))
	if !strings.Contains(led, `"limit":40`) {
		t.Errorf("override not applied: %.200s", led)
	}
}

// allRemovedMixSpec mixes two sources of writeCorpus and removes every
// document (none has 100,000 characters).
const allRemovedMixSpec = `name: none
inputs:
  - source: yard
    paths: ["raw/part-0.jsonl.zst"]
  - source: shop
    paths: ["raw/part-1.jsonl.zst"]
stages:
  - kind: normalize
  - kind: length
    min_chars: 100000
output:
  dir: out
  tokenizer: cl100k_base
  mix: {yard: 0.5, shop: 0.5}
`

// When every document is removed and the output mixes sources, the run
// still ends with its manifest (an empty mix) and says which stage let
// nothing through.
func TestAllRemovedWithMixWritesManifest(t *testing.T) {
	dir := writeCorpus(t, 30)
	s := writeSpec(t, dir, allRemovedMixSpec)
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out"), Workers: 2})
	if err != nil {
		t.Fatalf("run: %v", err)
	}
	m, err := record.ReadManifest(res.Dir)
	if err != nil {
		t.Fatal(err)
	}
	if m.Totals.DocsIn != 30 || m.Totals.DocsOut != 0 || len(m.Outputs) != 0 {
		t.Errorf("totals %+v, outputs %v", m.Totals, m.Outputs)
	}
	why := m.EmptyReason()
	if want := "no document reached the output: all 30 documents read were removed; stage length let none through (length removed 30)"; !strings.HasPrefix(why, want) {
		t.Errorf("reason %q\nwant %q", why, want)
	}
	if mix, _ := json.Marshal(m.Mix); !strings.Contains(string(mix), `"mode":"empty"`) {
		t.Errorf("mix %s", mix)
	}
}
