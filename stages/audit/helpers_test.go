package audit_test

import (
	"bufio"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/stages/audit"
	"winnow/stages/run"
	"winnow/stages/spec"
	"winnow/stages/synth"
)

// The tests run real pipelines (run.RunSpec) over a corpus from the
// project's own generator and check the audit package against numbers
// recounted here from the run's files with independent code: zstd
// (klauspost/compress) and encoding/json, not the package's readers.

// testDocs is large enough for every rule of the quality and repetition
// stages to fire on the generated spam and junk, small enough to run in a
// fraction of a second.
const testDocs = 600

var (
	corpusOnce sync.Once
	corpusDir  string
	corpusErr  error
)

// corpus generates the shared corpus once per test binary.
func corpus(t testing.TB) string {
	t.Helper()
	corpusOnce.Do(func() {
		corpusDir, corpusErr = os.MkdirTemp("", "winnow-audit-corpus-")
		if corpusErr == nil {
			_, corpusErr = synth.Generate(synth.Options{Dir: filepath.Join(corpusDir, "corpus"), Docs: testDocs, Seed: 11})
		}
	})
	if corpusErr != nil {
		t.Fatal(corpusErr)
	}
	return corpusDir
}

func TestMain(m *testing.M) {
	code := m.Run()
	if corpusDir != "" {
		os.RemoveAll(corpusDir)
	}
	os.Exit(code)
}

const inputsYAML = `inputs:
  - source: manuals
    paths: ["corpus/manuals/"]
  - source: forum
    paths: ["corpus/forum/"]
  - source: dealer
    paths: ["corpus/dealer/"]
  - source: web
    paths: ["corpus/web/"]
`

// perDocStages are threshold and edit stages only: what-if over them is
// exact.
const perDocStages = `stages:
  - kind: normalize
  - kind: length
    min_chars: 50
  - kind: quality
  - kind: repetition
  - kind: lines
output:
  tokenizer: cl100k_base
`

// fullStages adds language id, redaction and the global stages.
const fullStages = `stages:
  - kind: normalize
  - kind: length
    min_chars: 50
  - kind: langid
    languages: [en]
  - kind: quality
  - kind: repetition
  - kind: lines
  - kind: redact
  - kind: exact_dedup
  - kind: near_dedup
  - kind: decontaminate
    evals:
      - name: hull-qa
        paths: ["corpus/evals/hull-qa.jsonl"]
        fields: [question, answer]
output:
  tokenizer: cl100k_base
`

// runPipeline writes a spec next to the shared corpus and runs it into a
// fresh directory beside it (inputs are relative to the spec, as users
// write them).
func runPipeline(t testing.TB, name, stagesYAML string, sets ...string) string {
	t.Helper()
	base := corpus(t)
	body := "name: " + name + "\nseed: 7\n" + inputsYAML + stagesYAML
	p := filepath.Join(base, name+".yaml")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := spec.LoadSpec(p)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(base, name+"-run")
	if _, err := run.RunSpec(context.Background(), s, run.RunOptions{Out: out, Workers: 2, Force: true, Sets: sets}); err != nil {
		t.Fatal(err)
	}
	return out
}

var (
	runsMu sync.Mutex
	runs   = map[string]string{}
)

// cachedRun runs a pipeline once per test binary.
func cachedRun(t testing.TB, name, stagesYAML string, sets ...string) string {
	t.Helper()
	runsMu.Lock()
	defer runsMu.Unlock()
	if d, ok := runs[name]; ok {
		return d
	}
	d := runPipeline(t, name, stagesYAML, sets...)
	runs[name] = d
	return d
}

// readJSONL decodes a zstd JSONL file line by line.
func readJSONL(t testing.TB, path string) []map[string]any {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	z, err := zstd.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	defer z.Close()
	sc := bufio.NewScanner(z)
	sc.Buffer(make([]byte, 1<<20), 64<<20)
	var out []map[string]any
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		out = append(out, m)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// ledgerFiles returns stage name -> records of every ledger file.
func ledgerFiles(t *testing.T, run string) map[string][]map[string]any {
	t.Helper()
	ents, err := os.ReadDir(filepath.Join(run, "ledger"))
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]map[string]any{}
	for _, e := range ents {
		name := strings.TrimSuffix(e.Name(), ".jsonl.zst")
		out[name] = readJSONL(t, filepath.Join(run, "ledger", e.Name()))
	}
	return out
}

func readManifest(t *testing.T, run string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(run, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// manifestStage returns the manifest's counters of a stage.
func manifestStage(t *testing.T, m map[string]any, name string) map[string]any {
	t.Helper()
	for _, s := range m["stages"].([]any) {
		sm := s.(map[string]any)
		if sm["name"] == name {
			return sm
		}
	}
	t.Fatalf("manifest has no stage %s", name)
	return nil
}

func num(v any) int64 {
	f, _ := v.(float64)
	return int64(f)
}

// removedByRule counts drops per "stage/rule" in a run's ledger.
func removedByRule(t *testing.T, run string) map[string]int64 {
	t.Helper()
	out := map[string]int64{}
	for stage, recs := range ledgerFiles(t, run) {
		for _, r := range recs {
			if r["action"] == "drop" {
				out[stage+"/"+r["rule"].(string)]++
			}
		}
	}
	return out
}

// removedIDs returns the set of documents a run's ledger drops.
func removedIDs(t *testing.T, run string) map[string]bool {
	t.Helper()
	out := map[string]bool{}
	for _, recs := range ledgerFiles(t, run) {
		for _, r := range recs {
			if r["action"] == "drop" {
				out[r["doc"].(string)] = true
			}
		}
	}
	return out
}

// shardLines reads every output shard of a run.
func shardLines(t *testing.T, run string) []map[string]any {
	t.Helper()
	files, _ := filepath.Glob(filepath.Join(run, "shards", "*.jsonl.zst"))
	sort.Strings(files)
	var out []map[string]any
	for _, f := range files {
		out = append(out, readJSONL(t, f)...)
	}
	return out
}

func keys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

func openRun(t testing.TB, dir string, opt audit.OpenOptions) *audit.Run {
	t.Helper()
	r, err := audit.Open(dir, opt)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func explain(t *testing.T, r *audit.Run, id string) *audit.Explanation {
	t.Helper()
	ex, err := audit.Explain(r, id)
	if err != nil {
		t.Fatal(err)
	}
	return ex
}

func ruleSamples(t *testing.T, r *audit.Run, rule string, n int) *audit.SampleSet {
	t.Helper()
	s, err := audit.RuleSamples(r, rule, n)
	if err != nil {
		t.Fatal(err)
	}
	return s
}
