package cluster

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"gopkg.in/yaml.v3"
)

// The tests share one winnow binary, one generated corpus with its plain
// (single-process) run, and one private Slurm, each made on first use and
// removed by TestMain.
var (
	shared     string // temp dir holding all of it
	moduleRoot string

	buildOnce sync.Once
	winnowBin string
	buildErr  error

	plainOnce sync.Once
	plainDir  string // DIR of a plain `winnow run`
	plainErr  error

	slurmOnce sync.Once
	slurmDir  string
	slurmErr  error
)

func TestMain(m *testing.M) {
	var err error
	shared, err = os.MkdirTemp("", "winnow-cluster-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	code := m.Run()
	if slurmDir != "" {
		if out, err := exec.Command("bash", filepath.Join(moduleRoot, "scripts", "slurm-local.sh"), "stop", slurmDir).CombinedOutput(); err != nil {
			fmt.Fprintf(os.Stderr, "stopping Slurm: %v\n%s", err, out)
			code = 1
		}
	}
	os.RemoveAll(shared)
	os.Exit(code)
}

// The corpus: `winnow gen` documents of four sources, three files each,
// with exact and near copies planted (see cmd/winnow/gen.go).
const (
	genDocs  = "400"
	genFiles = "3"
)

// testSpec runs the global stages that must be split by key across tasks
// (exact and near dedup) after per-document filters, in small input chunks
// so that every task of every document phase has units to run.
const testSpec = `# configs/cluster test spec: Larkspur Marine Works corpus from winnow gen
name: larkspur-cluster
seed: 7
chunk_bytes: 16KiB          # about ten units of work in this small corpus
inputs:
  - source: manuals
    paths: ["corpus/manuals/"]
  - source: forum
    paths: ["corpus/forum/"]
  - source: dealer
    paths: ["corpus/dealer/"]
  - source: web
    paths: ["corpus/web/"]
stages:
  - kind: normalize
  - kind: quality
  - kind: exact_dedup
  - kind: near_dedup
    ngram: 5
    permutations: 128
    bands: 16
    threshold: 0.8
output:
  dir: run/
  tokenizer: cl100k_base
  shard_tokens: 20000
`

func root(t *testing.T) string {
	t.Helper()
	if moduleRoot != "" {
		return moduleRoot
	}
	out, err := exec.Command("go", "env", "GOMOD").Output()
	if err != nil || strings.TrimSpace(string(out)) == "" || strings.TrimSpace(string(out)) == os.DevNull {
		t.Fatalf("go env GOMOD: %v %q", err, out)
	}
	moduleRoot = filepath.Dir(strings.TrimSpace(string(out)))
	return moduleRoot
}

func winnow(t *testing.T) string {
	t.Helper()
	r := root(t)
	buildOnce.Do(func() {
		winnowBin = filepath.Join(shared, "bin", "winnow")
		cmd := exec.Command("go", "build", "-o", winnowBin, "./cmd/winnow")
		cmd.Dir = r
		if out, err := cmd.CombinedOutput(); err != nil {
			buildErr = fmt.Errorf("go build ./cmd/winnow: %v\n%s", err, out)
		}
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return winnowBin
}

// run runs a command and fails the test with its output when it fails.
func run(t *testing.T, dir string, env []string, name string, args ...string) string {
	t.Helper()
	out, err := runErr(dir, env, name, args...)
	if err != nil {
		t.Fatalf("%s %s: %v\n%s", name, strings.Join(args, " "), err, out)
	}
	return out
}

func runErr(dir string, env []string, name string, args ...string) (string, error) {
	ctx, cancel := context.WithTimeout(context.Background(), 4*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, name, args...)
	cmd.Dir = dir
	cmd.Env = append(cleanEnv(), env...)
	var buf bytes.Buffer
	cmd.Stdout = &buf
	cmd.Stderr = &buf
	err := cmd.Run()
	return buf.String(), err
}

// cleanEnv is the test's environment without the variables that would give
// a winnow task its number behind the test's back (the test may itself run
// inside a Slurm job or a Kubernetes pod), with /usr/sbin on PATH for the
// Slurm daemons.
func cleanEnv() []string {
	var env []string
	for _, kv := range os.Environ() {
		k, _, _ := strings.Cut(kv, "=")
		if strings.HasPrefix(k, "SLURM_") || k == "JOB_COMPLETION_INDEX" || strings.HasPrefix(k, "WINNOW_") {
			continue
		}
		if k == "PATH" {
			kv += ":/usr/sbin:/sbin"
		}
		env = append(env, kv)
	}
	return env
}

// workspace makes DIR with the corpus and spec.yaml in it; the spec's
// input paths are relative to DIR.
func workspace(t *testing.T, dir string) {
	t.Helper()
	bin := winnow(t)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	run(t, dir, nil, bin, "gen", "--out", "corpus", "--docs", genDocs, "--seed", "7", "--files", genFiles)
	if err := os.WriteFile(filepath.Join(dir, "spec.yaml"), []byte(testSpec), 0o644); err != nil {
		t.Fatal(err)
	}
}

// plain is the run directory of a plain single-process `winnow run`.
func plain(t *testing.T) string {
	t.Helper()
	bin := winnow(t)
	plainOnce.Do(func() {
		dir := filepath.Join(shared, "plain")
		workspace(t, dir)
		out, err := runErr(dir, nil, bin, "run", "spec.yaml", "--out", "run", "--quiet")
		if err != nil {
			plainErr = fmt.Errorf("plain winnow run: %v\n%s", err, out)
			return
		}
		plainDir = filepath.Join(dir, "run")
	})
	if plainErr != nil {
		t.Fatal(plainErr)
	}
	return plainDir
}

// phases lists the phases of the test spec as winnow prints them.
func phases(t *testing.T, specDir string) []string {
	t.Helper()
	out, err := exec.Command(winnow(t), "check", filepath.Join(specDir, "spec.yaml"), "--phases").Output()
	if err != nil {
		var ee *exec.ExitError
		if errors.As(err, &ee) {
			t.Fatalf("winnow check --phases: %v\n%s", err, ee.Stderr)
		}
		t.Fatalf("winnow check --phases: %v", err)
	}
	var ps []string
	for _, l := range strings.Split(strings.TrimRight(string(out), "\n"), "\n") {
		if l == "" || strings.TrimSpace(l) != l {
			t.Fatalf("winnow check --phases printed %q: want one phase name per line", out)
		}
		ps = append(ps, l)
	}
	if len(ps) == 0 {
		t.Fatal("winnow check --phases printed no phase")
	}
	return ps
}

// compared are the parts of a run directory that must be byte-identical
// whatever the number of tasks; manifest.json is compared apart from its
// timings and host fields (sameManifest).
var compared = []string{"ledger", "metrics", "shards", "keys", "contamination.json"}

// volatile are the manifest keys, at any depth, that may differ between
// two runs of the same spec: how long a step took and where it ran.
var volatile = map[string]bool{"seconds": true, "host": true, "hostname": true, "pid": true, "started": true, "finished": true}

func stripVolatile(v any) any {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			if volatile[k] {
				delete(x, k)
			} else {
				x[k] = stripVolatile(e)
			}
		}
	case []any:
		for i, e := range x {
			x[i] = stripVolatile(e)
		}
	}
	return v
}

// sameManifest fails the test unless the manifests of want and got agree
// apart from the volatile keys.
func sameManifest(t *testing.T, want, got string) {
	t.Helper()
	var norm [2][]byte
	for i, dir := range []string{want, got} {
		data, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
		if err != nil {
			t.Fatal(err)
		}
		var v any
		if err := json.Unmarshal(data, &v); err != nil {
			t.Fatalf("%s/manifest.json: %v", dir, err)
		}
		norm[i], _ = json.MarshalIndent(stripVolatile(v), "", "  ")
	}
	if !bytes.Equal(norm[0], norm[1]) {
		a, b := strings.Split(string(norm[0]), "\n"), strings.Split(string(norm[1]), "\n")
		for i := 0; i < len(a) && i < len(b); i++ {
			if a[i] != b[i] {
				t.Errorf("%s/manifest.json differs from the plain run's at line %d (timings and hosts left out):\nplain: %s\nsplit: %s", got, i+1, a[i], b[i])
				return
			}
		}
		t.Errorf("%s/manifest.json differs from the plain run's in length (%d vs %d lines)", got, len(a), len(b))
	}
}

// digests maps each compared file under dir (path relative to dir) to its sha256.
func digests(t *testing.T, dir string) map[string]string {
	t.Helper()
	m := map[string]string{}
	for _, top := range compared {
		p := filepath.Join(dir, top)
		if _, err := os.Stat(p); errors.Is(err, fs.ErrNotExist) {
			continue
		}
		err := filepath.WalkDir(p, func(path string, d fs.DirEntry, err error) error {
			if err != nil || d.IsDir() {
				return err
			}
			f, err := os.Open(path)
			if err != nil {
				return err
			}
			defer f.Close()
			h := sha256.New()
			if _, err := io.Copy(h, f); err != nil {
				return err
			}
			rel, _ := filepath.Rel(dir, path)
			m[filepath.ToSlash(rel)] = hex.EncodeToString(h.Sum(nil))
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	return m
}

// sameRun fails the test unless got holds exactly the files of want, byte for byte.
func sameRun(t *testing.T, want, got string) {
	t.Helper()
	w, g := digests(t, want), digests(t, got)
	shards := 0
	for p := range w {
		if strings.HasPrefix(p, "shards/") {
			shards++
		}
	}
	if shards == 0 || len(w) < 4 {
		t.Fatalf("plain run %s wrote %d files and %d shards: too little to compare", want, len(w), shards)
	}
	var diffs []string
	for p, h := range w {
		switch gh, ok := g[p]; {
		case !ok:
			diffs = append(diffs, "missing "+p)
		case gh != h:
			diffs = append(diffs, "differs "+p)
		}
	}
	for p := range g {
		if _, ok := w[p]; !ok {
			diffs = append(diffs, "extra "+p)
		}
	}
	sort.Strings(diffs)
	if len(diffs) > 0 {
		t.Errorf("%s differs from the plain run %s in %d of %d files:\n%s", got, want, len(diffs), len(w), strings.Join(diffs, "\n"))
	}
	sameManifest(t, want, got)
}

// slurm starts the private Slurm once and returns the SLURM_CONF setting.
func slurm(t *testing.T) []string {
	t.Helper()
	r := root(t)
	slurmOnce.Do(func() {
		dir := filepath.Join(shared, "slurm")
		out, err := runErr(r, nil, "bash", filepath.Join(r, "scripts", "slurm-local.sh"), "start", dir)
		slurmDir = dir // stop whatever did start
		if err != nil {
			logs, _ := runErr(r, nil, "bash", filepath.Join(r, "scripts", "slurm-local.sh"), "logs", dir)
			slurmErr = fmt.Errorf("private Slurm did not start: %v\n%s\n%s", err, out, logs)
		}
	})
	if slurmErr != nil {
		t.Fatal(slurmErr)
	}
	return []string{"SLURM_CONF=" + filepath.Join(slurmDir, "slurm.conf")}
}

// jobLogs is every job output file of a submission and the daemon logs, for failure messages.
func jobLogs(t *testing.T, logDir string) string {
	var b strings.Builder
	files, _ := filepath.Glob(filepath.Join(logDir, "*"))
	sort.Strings(files)
	for _, f := range files {
		data, _ := os.ReadFile(f)
		fmt.Fprintf(&b, "==== %s\n%s", filepath.Base(f), data)
	}
	if slurmDir != "" {
		logs, _ := runErr(root(t), nil, "bash", filepath.Join(root(t), "scripts", "slurm-local.sh"), "logs", slurmDir)
		b.WriteString(logs)
	}
	return b.String()
}

// submitWait runs submit.sh --wait on a jobs file and returns its exit status and output.
func submitWait(t *testing.T, dir string, env []string, jobs string) (int, string) {
	t.Helper()
	out, err := runErr(dir, env, "bash", filepath.Join(root(t), "configs", "cluster", "submit.sh"), "--wait", jobs, "150")
	var ee *exec.ExitError
	switch {
	case err == nil:
		return 0, out
	case errors.As(err, &ee):
		return ee.ExitCode(), out
	}
	t.Fatalf("submit.sh --wait: %v\n%s", err, out)
	return -1, ""
}

// Every phase of the spec runs as a 3-task Slurm array chained by
// submit.sh on a real (private, single-node) Slurm; the run directory the
// tasks share is byte-identical to a plain run's.
func TestSlurmArrays(t *testing.T) {
	want := plain(t)
	env := slurm(t)
	dir := t.TempDir()
	workspace(t, dir)
	ps := phases(t, dir)
	submit := filepath.Join(root(t), "configs", "cluster", "submit.sh")
	out := run(t, dir, env, "bash", submit, "--tasks", "3", "--winnow", winnow(t), "spec.yaml", "run")
	// submit.sh prints "PHASE JOBID" per phase, in phase order.
	lines := strings.Split(strings.TrimSpace(out), "\n")
	var printed []string
	for _, l := range lines {
		f := strings.Fields(l)
		if len(f) == 2 {
			if _, err := strconv.Atoi(f[1]); err == nil {
				printed = append(printed, f[0])
			}
		}
	}
	if strings.Join(printed, " ") != strings.Join(ps, " ") {
		t.Fatalf("submit.sh printed phases %v, want %v:\n%s", printed, ps, out)
	}
	code, status := submitWait(t, dir, env, "run.jobs")
	if code != 0 {
		t.Fatalf("jobs did not all complete (submit.sh --wait exit %d):\n%s\n%s", code, status, jobLogs(t, filepath.Join(dir, "run.logs")))
	}
	for _, p := range ps {
		if !strings.Contains(status, p+": 3/3 done") {
			t.Errorf("status has no %q:\n%s", p+": 3/3 done", status)
		}
		// One output file per array task: the tasks really ran under Slurm.
		logs, _ := filepath.Glob(filepath.Join(dir, "run.logs", "winnow-"+p+"-*_*.out"))
		if len(logs) != 3 {
			t.Errorf("phase %s: %d job output files, want 3: %v", p, len(logs), logs)
		}
	}
	sameRun(t, want, filepath.Join(dir, "run"))
}

// One task of one phase is killed on its first attempt (SIGKILL after it
// wrote a unit's files, before the unit's marker: winnow's fault point
// WINNOW_FAULT, fired once through WINNOW_FAULT_ONCE; Slurm passes the
// submitting environment to the jobs). The later phases then wait forever
// behind an afterok that cannot be met; submit.sh --resubmit reruns only
// that task and re-chains the later phases, and the finished run equals
// the plain run.
func TestSlurmResubmitFailedTask(t *testing.T) {
	want := plain(t)
	slurmEnv := slurm(t)
	dir := t.TempDir()
	workspace(t, dir)
	ps := phases(t, dir)
	failPhase := ps[0]
	if len(ps) > 2 {
		failPhase = ps[1] // a middle phase, so that earlier and later phases are both involved
	}
	once := filepath.Join(dir, "fault-fired")
	// With 2 tasks, task 0 runs the even units; unit 0 is never taken by
	// another task, so the fault hits task 0 whichever task starts first.
	env := append([]string{"WINNOW_FAULT=" + failPhase + "/0/written", "WINNOW_FAULT_ONCE=" + once}, slurmEnv...)
	submit := filepath.Join(root(t), "configs", "cluster", "submit.sh")
	run(t, dir, env, "bash", submit, "--tasks", "2", "--winnow", winnow(t), "spec.yaml", "run")
	code, status := submitWait(t, dir, env, "run.jobs")
	if code != 1 || !strings.Contains(status, failPhase+": 1/2 done, failed tasks 0") {
		t.Fatalf("want phase %s failed at task 0 (exit 1), got exit %d:\n%s\n%s", failPhase, code, status, jobLogs(t, filepath.Join(dir, "run.logs")))
	}
	if _, err := os.Stat(once); err != nil {
		t.Fatalf("the fault never fired: %v", err)
	}
	res := run(t, dir, slurmEnv, "bash", submit, "--resubmit", "run.jobs")
	// Only task 0 of the failed phase is rerun; every later phase is
	// submitted again in full behind it; earlier phases are left alone.
	// submit.sh prints "PHASE JOBID (tasks LIST)" per new array.
	got := map[string]string{}
	for _, l := range strings.Split(strings.TrimSpace(res), "\n") {
		var p, id, list string
		if n, _ := fmt.Sscanf(l, "%s %s (tasks %s", &p, &id, &list); n == 3 {
			got[p] = strings.TrimSuffix(list, ")")
		}
	}
	wantRerun := map[string]string{}
	after := false
	for _, p := range ps {
		switch {
		case p == failPhase:
			wantRerun[p] = "0"
			after = true
		case after:
			wantRerun[p] = "0,1"
		}
	}
	if fmt.Sprint(got) != fmt.Sprint(wantRerun) {
		t.Errorf("--resubmit submitted %v, want %v:\n%s", got, wantRerun, res)
	}
	code, status = submitWait(t, dir, slurmEnv, "run.jobs")
	if code != 0 {
		t.Fatalf("after --resubmit, jobs did not all complete (exit %d):\n%s\n%s", code, status, jobLogs(t, filepath.Join(dir, "run.logs")))
	}
	sameRun(t, want, filepath.Join(dir, "run"))
}

// k8sJob is the part of a Kubernetes Job manifest the test checks.
type k8sJob struct {
	APIVersion string `yaml:"apiVersion"`
	Kind       string `yaml:"kind"`
	Metadata   struct {
		Name string `yaml:"name"`
	} `yaml:"metadata"`
	Spec struct {
		CompletionMode       string `yaml:"completionMode"`
		Completions          int    `yaml:"completions"`
		Parallelism          int    `yaml:"parallelism"`
		BackoffLimitPerIndex *int   `yaml:"backoffLimitPerIndex"`
		Template             struct {
			Spec struct {
				RestartPolicy string `yaml:"restartPolicy"`
				Containers    []struct {
					Command      []string `yaml:"command"`
					VolumeMounts []struct {
						Name      string `yaml:"name"`
						MountPath string `yaml:"mountPath"`
					} `yaml:"volumeMounts"`
				} `yaml:"containers"`
				Volumes []struct {
					Name                  string `yaml:"name"`
					PersistentVolumeClaim *struct {
						ClaimName string `yaml:"claimName"`
					} `yaml:"persistentVolumeClaim"`
				} `yaml:"volumes"`
			} `yaml:"spec"`
		} `yaml:"template"`
	} `yaml:"spec"`
}

// The Kubernetes Jobs render.sh writes (one Indexed Job per phase) are run
// here as Kubernetes would run them: the container command of each phase,
// with /data mapped to a temp dir, once per index with
// JOB_COMPLETION_INDEX set by hand and all indexes of a phase at once,
// phase after phase. The result equals the plain run.
func TestKubernetesCommand(t *testing.T) {
	want := plain(t)
	bin := winnow(t)
	data := t.TempDir()
	workspace(t, data)
	ps := phases(t, data)
	const tasks = 3
	rendered := run(t, data, []string{"WINNOW_BIN=" + bin}, "bash",
		filepath.Join(root(t), "configs", "cluster", "k8s", "render.sh"), filepath.Join(data, "spec.yaml"), strconv.Itoa(tasks))

	dec := yaml.NewDecoder(strings.NewReader(rendered))
	var jobs []k8sJob
	for {
		var j k8sJob
		err := dec.Decode(&j)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("rendered manifest: %v\n%s", err, rendered)
		}
		jobs = append(jobs, j)
	}
	if len(jobs) != len(ps) {
		t.Fatalf("render.sh wrote %d jobs for %d phases %v", len(jobs), len(ps), ps)
	}
	// The pods mount the claim volume.yaml makes, which many pods can mount at once.
	var pvc struct {
		Kind     string `yaml:"kind"`
		Metadata struct {
			Name string `yaml:"name"`
		} `yaml:"metadata"`
		Spec struct {
			AccessModes []string `yaml:"accessModes"`
		} `yaml:"spec"`
	}
	vol, err := os.ReadFile(filepath.Join(root(t), "configs", "cluster", "k8s", "volume.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if err := yaml.Unmarshal(vol, &pvc); err != nil {
		t.Fatalf("volume.yaml: %v", err)
	}
	if pvc.Kind != "PersistentVolumeClaim" || len(pvc.Spec.AccessModes) != 1 || pvc.Spec.AccessModes[0] != "ReadWriteMany" {
		t.Errorf("volume.yaml: %s with access modes %v, want a ReadWriteMany PersistentVolumeClaim", pvc.Kind, pvc.Spec.AccessModes)
	}
	for i, j := range jobs {
		// Field meanings: Kubernetes batch/v1 Job API reference
		// (completionMode Indexed, backoffLimitPerIndex needs restartPolicy Never).
		if j.APIVersion != "batch/v1" || j.Kind != "Job" || j.Spec.CompletionMode != "Indexed" {
			t.Errorf("job %d: %s %s completionMode %q, want batch/v1 Job Indexed", i, j.APIVersion, j.Kind, j.Spec.CompletionMode)
		}
		if j.Spec.Completions != tasks || j.Spec.Parallelism != tasks {
			t.Errorf("job %s: completions %d parallelism %d, want %d", j.Metadata.Name, j.Spec.Completions, j.Spec.Parallelism, tasks)
		}
		if j.Spec.BackoffLimitPerIndex == nil || j.Spec.Template.Spec.RestartPolicy != "Never" {
			t.Errorf("job %s: want backoffLimitPerIndex with restartPolicy Never", j.Metadata.Name)
		}
		pod := j.Spec.Template.Spec
		if len(pod.Containers) != 1 || len(pod.Volumes) != 1 || pod.Volumes[0].PersistentVolumeClaim == nil ||
			pod.Volumes[0].PersistentVolumeClaim.ClaimName != pvc.Metadata.Name ||
			len(pod.Containers[0].VolumeMounts) != 1 || pod.Containers[0].VolumeMounts[0].MountPath != "/data" ||
			pod.Containers[0].VolumeMounts[0].Name != pod.Volumes[0].Name {
			t.Fatalf("job %s: want one container with the claimed volume at /data", j.Metadata.Name)
		}
		command := pod.Containers[0].Command
		want := []string{"winnow", "run", "/data/spec.yaml", "--out", "/data/out", "--phase", ps[i], "--tasks", strconv.Itoa(tasks)}
		if len(command) < len(want) || strings.Join(command[:len(want)], " ") != strings.Join(want, " ") {
			t.Fatalf("job %s: command %q, want it to start %q", j.Metadata.Name, command, want)
		}

		// Run the phase: every index at once, as separate processes.
		args := make([]string, len(command)-1)
		for k, a := range command[1:] {
			if a == "/data" || strings.HasPrefix(a, "/data/") {
				a = data + strings.TrimPrefix(a, "/data")
			}
			args[k] = a
		}
		var wg sync.WaitGroup
		errs := make([]string, tasks)
		for idx := 0; idx < tasks; idx++ {
			wg.Add(1)
			go func(idx int) {
				defer wg.Done()
				out, err := runErr(data, []string{"JOB_COMPLETION_INDEX=" + strconv.Itoa(idx)}, bin, args...)
				if err != nil {
					errs[idx] = fmt.Sprintf("index %d: %v\n%s", idx, err, out)
				}
			}(idx)
		}
		wg.Wait()
		for _, e := range errs {
			if e != "" {
				t.Fatalf("phase %s: %s", ps[i], e)
			}
		}
	}
	sameRun(t, want, filepath.Join(data, "out"))
}

// The private Slurm really runs array jobs: each task of a 3-task array
// sees its own SLURM_ARRAY_TASK_ID, the array's minimum and count, which
// is what winnow derives its task number from when --task is not given.
func TestSlurmArrayEnvironment(t *testing.T) {
	env := slurm(t)
	dir := t.TempDir()
	out := run(t, dir, env, "sbatch", "--parsable", "--array=0-2", "--output="+filepath.Join(dir, "o-%a.txt"),
		"--wrap", `echo "$SLURM_ARRAY_TASK_ID $SLURM_ARRAY_TASK_MIN $SLURM_ARRAY_TASK_COUNT" > task-$SLURM_ARRAY_TASK_ID`)
	id := strings.TrimSpace(strings.Split(out, ";")[0])
	if _, err := strconv.Atoi(id); err != nil {
		t.Fatalf("sbatch --parsable printed %q", out)
	}
	deadline := time.Now().Add(90 * time.Second)
	for {
		q := run(t, dir, env, "squeue", "-h", "-j", id)
		if strings.TrimSpace(q) == "" {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("array %s still queued after 90s:\n%s\n%s", id, q, jobLogs(t, dir))
		}
		time.Sleep(500 * time.Millisecond)
	}
	for i := 0; i < 3; i++ {
		got, err := os.ReadFile(filepath.Join(dir, "task-"+strconv.Itoa(i)))
		if err != nil {
			t.Fatalf("task %d wrote nothing: %v\n%s", i, err, jobLogs(t, dir))
		}
		if want := fmt.Sprintf("%d 0 3\n", i); string(got) != want {
			t.Errorf("task %d saw %q, want %q", i, got, want)
		}
	}
}

// winnow.sbatch submitted by hand, as configs/cluster/README.md shows, one
// array per phase numbered from 1 (--array=1-2) and without WINNOW_TASKS:
// winnow takes each task's number and the count from Slurm's
// SLURM_ARRAY_TASK_ID − SLURM_ARRAY_TASK_MIN and SLURM_ARRAY_TASK_COUNT.
// The phases are chained with afterok by the test; the run equals the plain run.
func TestSlurmBatchScriptByHand(t *testing.T) {
	want := plain(t)
	slurmEnv := slurm(t)
	dir := t.TempDir()
	workspace(t, dir)
	batch := filepath.Join(root(t), "configs", "cluster", "winnow.sbatch")
	var ids []string
	prev := ""
	for _, p := range phases(t, dir) {
		env := append([]string{"WINNOW_SPEC=" + filepath.Join(dir, "spec.yaml"), "WINNOW_OUT=" + filepath.Join(dir, "run"),
			"WINNOW_PHASE=" + p, "WINNOW_BIN=" + winnow(t)}, slurmEnv...)
		args := []string{"--parsable", "--array=1-2", "--output=" + filepath.Join(dir, "logs", "%x-%A_%a.out")}
		if prev != "" {
			args = append(args, "--dependency=afterok:"+prev)
		}
		if err := os.MkdirAll(filepath.Join(dir, "logs"), 0o755); err != nil {
			t.Fatal(err)
		}
		out := run(t, dir, env, "sbatch", append(args, batch)...)
		prev = strings.TrimSpace(strings.Split(out, ";")[0])
		ids = append(ids, prev)
	}
	// Wait until Slurm has no task of these arrays left to run, then
	// require every task to have completed.
	deadline := time.Now().Add(150 * time.Second)
	for {
		q := run(t, dir, slurmEnv, "squeue", "-h", "-r", "-o", "%i %T %r", "-j", strings.Join(ids, ","))
		if strings.TrimSpace(q) == "" || strings.Contains(q, "DependencyNeverSatisfied") {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("arrays still queued after 150s:\n%s\n%s", q, jobLogs(t, filepath.Join(dir, "logs")))
		}
		time.Sleep(time.Second)
	}
	completed := 0
	for _, id := range ids {
		for _, l := range strings.Split(strings.TrimSpace(run(t, dir, slurmEnv, "scontrol", "-o", "show", "job", id)), "\n") {
			if !strings.Contains(l, " JobState=COMPLETED ") {
				t.Fatalf("array %s has a task that did not complete:\n%s\n%s", id, l, jobLogs(t, filepath.Join(dir, "logs")))
			}
			completed++
		}
	}
	if completed != 2*len(ids) {
		t.Fatalf("%d tasks completed, want %d", completed, 2*len(ids))
	}
	// winnow says which task of how many each one was ("phase P, task I
	// of N: ran units ..."): array indices 1 and 2 are tasks 0 and 1.
	logs := jobLogs(t, filepath.Join(dir, "logs"))
	for _, task := range []string{"task 0 of 2:", "task 1 of 2:"} {
		if !strings.Contains(logs, task) {
			t.Errorf("no task says %q in its output:\n%s", task, logs)
		}
	}
	if strings.Contains(logs, "task 2 of 2") {
		t.Errorf("a task took its array index as its number:\n%s", logs)
	}
	sameRun(t, want, filepath.Join(dir, "run"))
}
