package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"winnow/stages/record"
	"winnow/stages/run"
	"winnow/stages/termtext"
)

// Tests of a run split across processes: every task is a separate OS
// process (this test binary re-executed as the winnow command), tasks of a
// phase run at once over one run directory, and the result is compared
// byte for byte with a single-process run.

const cliArgsEnv = "WINNOW_TEST_CLI_ARGS"

// runAsCLI runs the winnow command with JSON-encoded args and exits.
func runAsCLI(args string) {
	var a []string
	if err := json.Unmarshal([]byte(args), &a); err != nil {
		fmt.Fprintln(os.Stderr, "bad", cliArgsEnv, err)
		os.Exit(2)
	}
	rootCmd.SetArgs(a)
	if err := rootCmd.Execute(); err != nil {
		fmt.Fprintln(os.Stderr, "winnow:", termtext.EscapeLines(err.Error()))
		os.Exit(exitCode(err))
	}
	os.Exit(0)
}

// cliCommand returns the command that runs winnow with args in a child
// process.
func cliCommand(env []string, args ...string) *exec.Cmd {
	b, _ := json.Marshal(args)
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(append(os.Environ(), cliArgsEnv+"="+string(b)), env...)
	return cmd
}

func cliRun(t *testing.T, env []string, args ...string) string {
	t.Helper()
	cmd := cliCommand(env, args...)
	var errb bytes.Buffer
	cmd.Stderr = &errb
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("winnow %s: %v\n%s", strings.Join(args, " "), err, errb.String())
	}
	return string(out)
}

// runDigest hashes every file of a run directory; the manifest is compared
// without its timings.
func runDigest(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		if rel == "manifest.json" {
			var m map[string]any
			if err := json.Unmarshal(b, &m); err != nil {
				return err
			}
			delete(m, "seconds")
			for _, s := range m["stages"].([]any) {
				delete(s.(map[string]any), "seconds")
			}
			b, _ = json.Marshal(m)
		}
		h := sha256.Sum256(b)
		out[rel] = hex.EncodeToString(h[:8])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func sameRun(t *testing.T, what string, want, got map[string]string) {
	t.Helper()
	var keys []string
	for k := range want {
		keys = append(keys, k)
	}
	for k := range got {
		if _, ok := want[k]; !ok {
			keys = append(keys, k)
		}
	}
	sort.Strings(keys)
	bad := 0
	for _, k := range keys {
		if want[k] != got[k] {
			t.Errorf("%s: %s differs: single process %q, split %q", what, k, want[k], got[k])
			bad++
		}
	}
	if bad == 0 && len(want) < 5 {
		t.Errorf("%s: only %d files compared", what, len(want))
	}
}

// splitCorpus generates a small corpus (once per test binary).
var (
	splitOnce sync.Once
	splitDir  string
)

func splitCorpus(t *testing.T) string {
	t.Helper()
	splitOnce.Do(func() {
		d, err := os.MkdirTemp("", "winnow-split-test-")
		if err != nil {
			t.Fatal(err)
		}
		splitDir = d
		cliRun(t, nil, "gen", "--out", filepath.Join(d, "corpus"), "--bytes", "3MB", "--files", "4", "--seed", "11")
	})
	if splitDir == "" {
		t.Fatal("no corpus")
	}
	return splitDir
}

const splitInputs = `seed: 7
memory: 64MiB
chunk_bytes: 40KB
inputs:
  - source: manuals
    paths: ["corpus/manuals/"]
  - source: forum
    paths: ["corpus/forum/"]
  - source: dealer
    paths: ["corpus/dealer/"]
  - source: web
    paths: ["corpus/web/"]
`

// splitSpecs are the pipelines of the tests: both dedup stages, paragraph
// dedup, decontamination with a frequency count, a mix with a budget and
// repetition, and no global stage at all.
var splitSpecs = map[string]string{
	"dedup": `stages:
  - kind: normalize
  - kind: quality
  - kind: exact_dedup
  - kind: near_dedup
  - kind: redact
output:
  tokenizer: cl100k_base
  shard_tokens: 100000
  mix: {manuals: 0.6, forum: 0.2, dealer: 0.1, web: 0.1}
`,
	"paragraphs": `stages:
  - kind: exact_dedup
    scope: paragraph
  - kind: near_dedup
    keep: longest
output:
  shard_tokens: 100000
  tokenizer: cl100k_base
`,
	"contamination": `stages:
  - kind: normalize
  - kind: decontaminate
    evals:
      - name: hull-qa
        paths: ["corpus/evals/hull-qa.jsonl"]
        fields: [question, answer]
    max_doc_frequency: 3
    action: cut
  - kind: exact_dedup
output:
  tokenizer: cl100k_base
  shard_tokens: 100000
  shuffle: true
`,
	"budget": `stages:
  - kind: exact_dedup
output:
  tokenizer: cl100k_base
  shard_tokens: 50000
  budget_tokens: 600000
  max_epochs: 3
  mix: {manuals: 0.4, forum: 0.4, dealer: 0.1, web: 0.1}
`,
	"perdoc": `stages:
  - kind: normalize
  - kind: quality
output:
  tokenizer: cl100k_base
  shard_tokens: 100000
  budget_tokens: 400000
`,
}

func writeSplitSpec(t *testing.T, name string) string {
	t.Helper()
	dir := splitCorpus(t)
	p := filepath.Join(dir, name+".yaml")
	if err := os.WriteFile(p, []byte("name: "+name+"\n"+splitInputs+splitSpecs[name]), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// runSplit runs every phase of spec with tasks processes at once.
func runSplit(t *testing.T, spec, out string, tasks int, env []string) {
	t.Helper()
	phases := strings.Fields(cliRun(t, nil, "check", spec, "--phases"))
	for _, ph := range phases {
		var wg sync.WaitGroup
		errs := make([]string, tasks)
		for i := 0; i < tasks; i++ {
			wg.Add(1)
			go func(i int) {
				defer wg.Done()
				cmd := cliCommand(env, "run", spec, "--out", out, "--phase", ph, "--task", fmt.Sprint(i), "--tasks", fmt.Sprint(tasks), "-q", "--workers", "1")
				if b, err := cmd.CombinedOutput(); err != nil {
					errs[i] = fmt.Sprintf("task %d of phase %s: %v\n%s", i, ph, err, b)
				}
			}(i)
		}
		wg.Wait()
		for _, e := range errs {
			if e != "" {
				t.Fatal(e)
			}
		}
	}
}

func TestSplitRunsMatchSingleProcess(t *testing.T) {
	for _, name := range []string{"dedup", "paragraphs", "contamination", "budget", "perdoc"} {
		t.Run(name, func(t *testing.T) {
			spec, base, plain := splitSpecAndPlain(t, name)
			want := runDigest(t, plain)
			counts := []int{3}
			if name == "dedup" {
				counts = []int{1, 2, 3, 8}
			}
			for _, n := range counts {
				out := filepath.Join(base, fmt.Sprintf("split%d", n))
				runSplit(t, spec, out, n, nil)
				sameRun(t, fmt.Sprintf("%s, %d tasks", name, n), want, runDigest(t, out))
			}
		})
	}
}

// splitSpecAndPlain writes the named split-test spec and runs it once in
// one process, the run a split run must equal byte for byte; base is a
// temporary directory for the split runs.
func splitSpecAndPlain(t *testing.T, kind string) (spec, base, plain string) {
	t.Helper()
	spec = writeSplitSpec(t, kind)
	base = t.TempDir()
	plain = filepath.Join(base, "plain")
	cliRun(t, nil, "run", spec, "--out", plain, "-q")
	return spec, base, plain
}

// TestSplitRunAgainstPreviousRun: incremental dedup against an earlier
// run's keys gives the same bytes split as in one process.
func TestSplitRunAgainstPreviousRun(t *testing.T) {
	spec := writeSplitSpec(t, "paragraphs")
	base := t.TempDir()
	prev := filepath.Join(base, "prev")
	cliRun(t, nil, "run", spec, "--out", prev, "-q")
	plain := filepath.Join(base, "plain")
	cliRun(t, nil, "run", spec, "--out", plain, "--against", prev, "-q")
	out := filepath.Join(base, "split")
	phases := strings.Fields(cliRun(t, nil, "check", spec, "--phases"))
	for _, ph := range phases {
		for task := 0; task < 3; task++ {
			cliRun(t, nil, "run", spec, "--out", out, "--against", prev, "--phase", ph, "--task", fmt.Sprint(task), "--tasks", "3", "-q")
		}
	}
	sameRun(t, "--against, 3 tasks", runDigest(t, plain), runDigest(t, out))
	b, err := os.ReadFile(filepath.Join(out, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m struct {
		Stages []struct {
			Name            string
			Dropped, Edited int64
		}
	}
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for _, st := range m.Stages {
		if st.Name == "exact_dedup" && st.Dropped+st.Edited == 0 {
			t.Error("the previous run's keys removed nothing: the comparison proves little")
		}
	}
}

// TestSplitRunSurvivesKills kills tasks with SIGKILL at fault points and
// at random moments, starts them again, and expects the bytes of a run
// never killed.
func TestSplitRunSurvivesKills(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "dedup")
	want := runDigest(t, plain)
	phases := strings.Fields(cliRun(t, nil, "check", spec, "--phases"))

	// At named points: the killed task is started again with the fault
	// spent, the other task runs normally.
	for i, f := range []string{"read/3/written", "exact_dedup/*/start", "near_dedup/2/renamed", "shards/0/written", "shards/3/start", "write/0/written"} {
		out := filepath.Join(base, fmt.Sprintf("fault%d", i))
		once := filepath.Join(base, fmt.Sprintf("fault%d.once", i))
		env := []string{run.FaultEnv + "=" + f, run.FaultOnceEnv + "=" + once}
		for _, ph := range phases {
			for task := 0; task < 2; task++ {
				args := []string{"run", spec, "--out", out, "--phase", ph, "--task", fmt.Sprint(task), "--tasks", "2", "-q", "--workers", "1"}
				cmd := cliCommand(env, args...)
				b, err := cmd.CombinedOutput()
				if err != nil {
					st, _ := cmd.ProcessState.Sys().(syscall.WaitStatus)
					if !st.Signaled() || st.Signal() != syscall.SIGKILL {
						t.Fatalf("fault %s: %v\n%s", f, err, b)
					}
					cliRun(t, nil, args...) // started again
				}
			}
		}
		if _, err := os.Stat(once); err != nil {
			t.Errorf("fault %s never fired", f)
		}
		sameRun(t, "fault "+f, want, runDigest(t, out))
	}

	// At random moments, several seeds.
	for seed := int64(1); seed <= 2; seed++ {
		rng := rand.New(rand.NewSource(seed))
		out := filepath.Join(base, fmt.Sprintf("random%d", seed))
		kills := 0
		for _, ph := range phases {
			for task := 0; task < 2; task++ {
				args := []string{"run", spec, "--out", out, "--phase", ph, "--task", fmt.Sprint(task), "--tasks", "2", "-q", "--workers", "1"}
				cmd := cliCommand(nil, args...)
				if err := cmd.Start(); err != nil {
					t.Fatal(err)
				}
				timer := time.AfterFunc(time.Duration(rng.Intn(1500))*time.Millisecond, func() { cmd.Process.Signal(syscall.SIGKILL) })
				err := cmd.Wait()
				if !timer.Stop() && err != nil {
					kills++
				} else if err != nil {
					t.Fatalf("seed %d, phase %s: %v", seed, ph, err)
				}
				cliRun(t, nil, args...) // again: finishes what was left, or does nothing
			}
		}
		t.Logf("seed %d: %d tasks killed", seed, kills)
		sameRun(t, fmt.Sprintf("random kills, seed %d", seed), want, runDigest(t, out))
	}
}

// TestSplitTwoAttemptsAtOnce starts every task twice at the same time (a
// scheduler that retried a task it wrongly thought lost): the attempts
// race for each unit, one rename wins, and the bytes are a plain run's.
func TestSplitTwoAttemptsAtOnce(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "dedup")
	out := filepath.Join(base, "twice")
	for _, ph := range strings.Fields(cliRun(t, nil, "check", spec, "--phases")) {
		var wg sync.WaitGroup
		errs := make([]string, 4)
		for i := 0; i < 4; i++ {
			wg.Add(1)
			go func(i int) {
				defer wg.Done()
				cmd := cliCommand(nil, "run", spec, "--out", out, "--phase", ph, "--task", fmt.Sprint(i%2), "--tasks", "2", "-q", "--workers", "1")
				if b, err := cmd.CombinedOutput(); err != nil {
					errs[i] = fmt.Sprintf("attempt %d of phase %s: %v\n%s", i, ph, err, b)
				}
			}(i)
		}
		wg.Wait()
		for _, e := range errs {
			if e != "" {
				t.Fatal(e)
			}
		}
	}
	sameRun(t, "two attempts of every task at once", runDigest(t, plain), runDigest(t, out))
}

// TestPhaseAllResumesFromUnits runs every phase in one process, kills it
// inside a late phase, and resumes: the units done before are not redone
// and the bytes are those of a plain run.
func TestPhaseAllResumesFromUnits(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "dedup")
	out := filepath.Join(base, "all")
	once := filepath.Join(base, "once")
	cmd := cliCommand([]string{run.FaultEnv + "=near_dedup/2/written", run.FaultOnceEnv + "=" + once}, "run", spec, "--out", out, "--phase", "all", "-q")
	if b, err := cmd.CombinedOutput(); err == nil {
		t.Fatalf("the fault did not stop the run:\n%s", b)
	}
	cmd = cliCommand(nil, "run", spec, "--out", out, "--resume", "-q")
	b, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("resume: %v\n%s", err, b)
	}
	// The read and exact_dedup units were all finished: none ran again.
	if !strings.Contains(string(b), "phase read, task 0 of 1: nothing to do") || !strings.Contains(string(b), "phase exact_dedup, task 0 of 1: nothing to do") {
		t.Errorf("resume redid finished phases:\n%s", b)
	}
	sameRun(t, "--phase all, killed and resumed", runDigest(t, plain), runDigest(t, out))
}

// TestAuditListsUnfinishedUnits: a failed unit is listed with its error,
// host and inputs, the units not run are listed, and the commands printed
// finish the run.
func TestAuditListsUnfinishedUnits(t *testing.T) {
	spec := writeSplitSpec(t, "perdoc")
	out := filepath.Join(t.TempDir(), "run")
	// Task 1's first unit fails before it takes any other task's units.
	cmd := cliCommand([]string{run.FaultEnv + "=read/1/start/fail"}, "run", spec, "--out", out, "--phase", "read", "--task", "1", "--tasks", "3", "-q")
	if b, err := cmd.CombinedOutput(); err == nil || !strings.Contains(string(b), "fault injected") {
		t.Fatalf("the unit did not fail: %v\n%s", err, b)
	}
	cmd = cliCommand(nil, "audit", out)
	b, err := cmd.Output()
	if err == nil {
		t.Error("audit of an unfinished run exited 0")
	}
	text := string(b)
	host, _ := os.Hostname()
	for _, want := range []string{"unit 1 failed on " + host, "fault injected", "inputs: corpus/", "units not run: 0, 2-", "--phase read", "phase write            0 of 1 units done"} {
		if !strings.Contains(text, want) {
			t.Errorf("audit lacks %q:\n%s", want, text)
		}
	}
	// The printed commands finish the run.
	for _, line := range strings.Split(text, "\n") {
		if _, cmdline, ok := strings.Cut(line, "to finish it: winnow "); ok {
			args := strings.Fields(strings.Split(cmdline, "   (")[0])
			cliRun(t, nil, append(args, "-q")...)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "manifest.json")); err != nil {
		t.Fatalf("the printed commands did not finish the run: %v", err)
	}
}

// TestSplitTaskFromEnvironment takes the task from Slurm's and
// Kubernetes' variables.
func TestSplitTaskFromEnvironment(t *testing.T) {
	env := func(m map[string]string) func(string) string { return func(k string) string { return m[k] } }
	cases := []struct {
		vars        map[string]string
		task, tasks int
		want        [2]int
		err         string
	}{
		{map[string]string{"SLURM_ARRAY_TASK_ID": "7", "SLURM_ARRAY_TASK_MIN": "5", "SLURM_ARRAY_TASK_COUNT": "4"}, -1, -1, [2]int{2, 4}, ""},
		{map[string]string{"JOB_COMPLETION_INDEX": "2"}, -1, 3, [2]int{2, 3}, ""},
		{map[string]string{"JOB_COMPLETION_INDEX": "2"}, -1, -1, [2]int{}, "pass --tasks"},
		{map[string]string{}, -1, -1, [2]int{0, 1}, ""},
		{map[string]string{}, 3, 3, [2]int{}, "out of range"},
		{map[string]string{"SLURM_ARRAY_TASK_ID": "x"}, -1, -1, [2]int{}, "not a task number"},
		{map[string]string{"SLURM_ARRAY_TASK_ID": "9"}, 1, 2, [2]int{1, 2}, ""}, // flags win
	}
	for _, c := range cases {
		task, tasks, err := run.TaskFromEnv(c.task, c.tasks, env(c.vars))
		if c.err != "" {
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%v: error %v, want %q", c.vars, err, c.err)
			}
			continue
		}
		if err != nil || task != c.want[0] || tasks != c.want[1] {
			t.Errorf("%v %d/%d: got %d/%d %v, want %v", c.vars, c.task, c.tasks, task, tasks, err, c.want)
		}
	}
}

// TestSplitRunOnRealDocuments splits runs over real documentation (Debian
// packages' manuals, Python documentation, prose; testdata/domaindocs and
// testdata/realdocs, licences beside them): a domain stage that keeps a
// fraction (a global stage that measures) before exact dedup, and the
// WARC, HTML and text readers with decontamination against real eval sets.
func TestSplitRunOnRealDocuments(t *testing.T) {
	data := domainDocs(t)
	real, err := filepath.Abs("../../testdata")
	if err != nil {
		t.Fatal(err)
	}
	specs := map[string]string{
		"domain": `name: docs
seed: 5
chunk_bytes: 1KB
inputs:
  - source: docs
    paths: ["` + data + `/*.jsonl.zst"]
stages:
  - kind: normalize
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    background: ["` + data + `/manpages.jsonl.zst", "` + data + `/prose.jsonl.zst"]
    method: importance
    keep_fraction: 0.3
  - kind: exact_dedup
output:
  tokenizer: cl100k_base
  shard_tokens: 50000
`,
		"mixed": `name: mixed
seed: 3
chunk_bytes: 40KB
inputs:
  - source: man
    paths: ["` + real + `/realdocs/man/"]
  - source: docs
    paths: ["` + real + `/realdocs/html/"]
    format: html
  - source: web
    paths: ["` + real + `/webcrawl/crawl.warc.gz", "` + real + `/warcjs/pages.warc.gz"]
  - source: mail
    paths: ["` + real + `/mail-python/msg_*.txt"]
    format: text
stages:
  - kind: normalize
  - kind: quality
  - kind: exact_dedup
    keep: longest
  - kind: near_dedup
  - kind: decontaminate
    max_doc_frequency: 5
    evals:
      - name: manual-qa
        paths: ["` + real + `/realdocs/evals/manual-qa.jsonl"]
        fields: [question, answer]
      - name: npm-mc
        paths: ["` + real + `/evalsets/npm-mc.parquet"]
        fields: [question, "choices[label]"]
output:
  tokenizer: cl100k_base
  shard_tokens: 50000
`,
	}
	for name, body := range specs {
		t.Run(name, func(t *testing.T) {
			dir := t.TempDir()
			spec := filepath.Join(dir, "spec.yaml")
			if err := os.WriteFile(spec, []byte(body), 0o644); err != nil {
				t.Fatal(err)
			}
			plain := filepath.Join(dir, "plain")
			cliRun(t, nil, "run", spec, "--out", plain, "-q")
			out := filepath.Join(dir, "split")
			runSplit(t, spec, out, 3, nil)
			sameRun(t, name, runDigest(t, plain), runDigest(t, out))
		})
	}
}

// TestSplitRunRefusesChangedInputs: an input modified after the first
// phase froze the list makes the next phase refuse, naming the file; an
// input list with standard input is refused at once.
func TestSplitRunRefusesChangedInputs(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "a.jsonl")
	if err := os.WriteFile(in, []byte(`{"id":"1","text":"the yard hauled the ketch out for a new coat of antifouling paint"}`+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	spec := filepath.Join(dir, "spec.yaml")
	if err := os.WriteFile(spec, []byte("name: x\ninputs:\n  - source: s\n    paths: [a.jsonl]\nstages:\n  - kind: exact_dedup\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	cliRun(t, nil, "run", spec, "--out", out, "--phase", "read", "-q")
	if err := os.WriteFile(in, []byte(`{"id":"1","text":"changed text of another length entirely"}`+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := cliCommand(nil, "run", spec, "--out", out, "--phase", "exact_dedup", "-q")
	b, err := cmd.CombinedOutput()
	if err == nil || !strings.Contains(string(b), "a.jsonl") || !strings.Contains(string(b), "inputs differ") {
		t.Errorf("a changed input was not refused: %v\n%s", err, b)
	}
	// The message says how to start over, and doing so works.
	units := filepath.Join(out, ".units")
	if !strings.Contains(string(b), "remove "+units) {
		t.Errorf("the refusal does not say how to start over:\n%s", b)
	}
	if err := os.RemoveAll(units); err != nil {
		t.Fatal(err)
	}
	cliRun(t, nil, "run", spec, "--out", out, "--phase", "read", "-q")
	cliRun(t, nil, "run", spec, "--out", out, "--phase", "all", "-q")
	if m, err := record.ReadManifest(out); err != nil || m.Totals.DocsOut != 1 {
		t.Errorf("started over: %v, want 1 document out", err)
	}
	std := filepath.Join(dir, "stdin.yaml")
	if err := os.WriteFile(std, []byte("name: x\ninputs:\n  - source: s\n    paths: [\"-\"]\nstages:\n  - kind: exact_dedup\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd = cliCommand(nil, "run", std, "--out", filepath.Join(dir, "out2"), "--phase", "read", "-q")
	b, err = cmd.CombinedOutput()
	if err == nil || !strings.Contains(string(b), "standard input") {
		t.Errorf("standard input was not refused: %v\n%s", err, b)
	}
}

// TestSplitWriteRemovesStaleTemps: a task killed while a global stage
// wrote its key files leaves a temp file in keys/; the write phase removes
// it, as a single process does after a crashed attempt (a random-kill run
// found this).
func TestSplitWriteRemovesStaleTemps(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "budget")
	out := filepath.Join(base, "split")
	phases := strings.Fields(cliRun(t, nil, "check", spec, "--phases"))
	for i, ph := range phases {
		if i == 1 {
			if err := os.MkdirAll(filepath.Join(out, "keys"), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(filepath.Join(out, "keys", ".tmp-exact_dedup.hashes-1"), nil, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		cliRun(t, nil, "run", spec, "--out", out, "--phase", ph, "--tasks", "2", "--task", "0", "-q")
		cliRun(t, nil, "run", spec, "--out", out, "--phase", ph, "--tasks", "2", "--task", "1", "-q")
	}
	sameRun(t, "stale temp file in keys/", runDigest(t, plain), runDigest(t, out))
}

// runTask runs one task of one phase and returns its pid and log.
func runTask(t *testing.T, env []string, spec, out, phase string, task, tasks int) (int, string) {
	t.Helper()
	cmd := cliCommand(env, "run", spec, "--out", out, "--phase", phase, "--task", fmt.Sprint(task), "--tasks", fmt.Sprint(tasks), "-q", "--workers", "1")
	var errb bytes.Buffer
	cmd.Stderr = &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("task %d of phase %s: %v\n%s", task, phase, err, errb.String())
	}
	return cmd.Process.Pid, errb.String()
}

// unitPIDs returns, per unit of phase with a completion marker, the pid
// that wrote it.
func unitPIDs(t *testing.T, out, phase string) map[int]int {
	t.Helper()
	got := map[int]int{}
	dirs, _ := filepath.Glob(filepath.Join(out, ".units", phase, "[0-9]*"))
	for _, d := range dirs {
		b, err := os.ReadFile(filepath.Join(d, "done.json"))
		if err != nil {
			continue // a claim or failure marker
		}
		var m struct{ Unit, PID int }
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		got[m.Unit] = m.PID
	}
	return got
}

// phaseUnits reads the number of units of each phase from the run's
// frozen input list.
func phaseUnits(t *testing.T, out string) map[string]int {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(out, ".units", "inputs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var f struct {
		Phases     []string `json:"phases"`
		PhaseUnits []int    `json:"phase_units"`
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	n := map[string]int{}
	for i, p := range f.Phases {
		n[p] = f.PhaseUnits[i]
	}
	return n
}

// TestSplitTaskTakesOtherTasksUnits: task 0 of 2 started alone runs its
// own units and then every unit of task 1 (document and reduce phases);
// task 1 started afterwards has nothing to do; the bytes are a plain
// run's, since every unit writes the same files whoever runs it.
func TestSplitTaskTakesOtherTasksUnits(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "dedup")
	out := filepath.Join(base, "alone")
	for _, ph := range strings.Fields(cliRun(t, nil, "check", spec, "--phases")) {
		if ph == "write" || ph == "shards" {
			// Not taken over: the shards task writes its ranges in one
			// pass, the write phase is one unit.
			runTask(t, nil, spec, out, ph, 0, 2)
			runTask(t, nil, spec, out, ph, 1, 2)
			continue
		}
		pid, log := runTask(t, nil, spec, out, ph, 0, 2)
		n := phaseUnits(t, out)[ph]
		pids := unitPIDs(t, out, ph)
		if len(pids) != n || n < 2 {
			t.Fatalf("phase %s: task 0 alone finished %d of %d units:\n%s", ph, len(pids), n, log)
		}
		for u, p := range pids {
			if p != pid {
				t.Errorf("phase %s: unit %d written by pid %d, not task 0 (%d)", ph, u, p, pid)
			}
		}
		if want := fmt.Sprintf("already done; took %d units of other tasks", n/2); !strings.Contains(log, want) {
			t.Errorf("phase %s: task 0's log lacks %q:\n%s", ph, want, log)
		}
		_, log = runTask(t, nil, spec, out, ph, 1, 2)
		if !strings.Contains(log, "nothing to do") {
			t.Errorf("phase %s: task 1 after task 0 did not report nothing to do:\n%s", ph, log)
		}
	}
	sameRun(t, "task 0 took every unit of task 1", runDigest(t, plain), runDigest(t, out))
}

// TestSplitStolenUnitFails: a unit that fails in a task that took it from
// another task does not fail that task and is not marked failed; the task
// takes no more units, and the unit's own task runs it afterwards.
func TestSplitStolenUnitFails(t *testing.T) {
	spec, base, plain := splitSpecAndPlain(t, "perdoc")
	out := filepath.Join(base, "split")
	_, log := runTask(t, []string{run.FaultEnv + "=read/3/start/fail"}, spec, out, "read", 0, 2)
	n := phaseUnits(t, out)["read"]
	if n < 6 {
		t.Fatalf("only %d units: the test needs more", n)
	}
	pids := unitPIDs(t, out, "read")
	for u := 0; u < n; u++ {
		// Own units all done, task 1's taken from the last down to 5;
		// unit 3 failed and unit 1 was never tried.
		want := u%2 == 0 || u > 3
		if _, done := pids[u]; done != want {
			t.Errorf("unit %d done: %v, want %v", u, done, want)
		}
	}
	if !strings.Contains(log, "fault injected") || !strings.Contains(log, "left to their tasks") {
		t.Errorf("the failed unit is not logged:\n%s", log)
	}
	if _, err := os.Stat(filepath.Join(out, ".units", "read", "00003.failed.json")); !os.IsNotExist(err) {
		t.Errorf("a unit that failed in another task is marked failed: %v", err)
	}
	_, log = runTask(t, nil, spec, out, "read", 1, 2)
	if !strings.Contains(log, "ran units [1 3], ") {
		t.Errorf("task 1 did not run the units left to it:\n%s", log)
	}
	for _, ph := range strings.Fields(cliRun(t, nil, "check", spec, "--phases"))[1:] {
		for task := 0; task < 2; task++ {
			runTask(t, nil, spec, out, ph, task, 2)
		}
	}
	sameRun(t, "a taken unit failed", runDigest(t, plain), runDigest(t, out))
}
