package run

// A run split across processes. The pipeline's segments (see runner.go)
// become phases: "read" runs the first segment, each global stage gives a
// phase of its own name that applies its decisions and runs the segment
// after it, and "write" feeds the surviving documents to the sink and puts
// the run directory together. Each document phase is cut into units of
// work fixed by the spec — chunks of consecutive input files (chunk_bytes)
// — and a task of N takes the units u with u mod N = its index, so the
// units, and every byte they write, do not depend on N.
//
// A unit writes its part of every ledger and metrics file (one zstd frame
// each: the single-process runner ends its frames at the same places), the
// documents that survive it, the scan keys of the next global stage, the
// ids it read and its counters, into a temporary directory that is renamed
// into place once complete; its marker (done.json) names the files with
// their sizes and xxh3. A task started again skips the units whose marker
// exists, so a task killed at any moment redoes only unfinished units, and
// two attempts of one unit at once are harmless (the second rename loses).
//
// A document phase after a global stage first rebuilds that stage: it
// feeds the keys of every unit of the previous phase, in input order, to
// Collect and calls Reduce, exactly as a single process does after its
// scan; every task of the phase does this, so no decision file is needed.
// The write phase (one unit) merges counters, replays the id check, feeds
// the sink in input order, merges the stages' report parts and assembles
// every ledger and metrics file by concatenating the parts.

import (
	"bufio"
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/klauspost/compress/zstd"

	"winnow/stages"
	"winnow/stages/fsio"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// Phase is one step of a split run.
type Phase struct {
	Name string
	// Seg is the pipeline segment the phase runs; -1 for the write phase.
	Seg int
}

// The fixed phase names; the others are the names of global stages.
const (
	PhaseRead  = "read"
	PhaseWrite = "write"
	// PhaseAll runs every phase in one process (one task): a run that
	// resumes from its finished units when started again.
	PhaseAll = "all"
)

// unitsDir is where a split run keeps its units until the write phase.
const unitsDir = ".units"

func segmentsOf(steps []spec.Step) []segment {
	r := Runner{Steps: steps}
	return r.segments()
}

// Phases lists the phases of a pipeline in order.
func Phases(steps []spec.Step) []Phase {
	var out []Phase
	for i, seg := range segmentsOf(steps) {
		name := PhaseRead
		if seg.apply >= 0 {
			name = steps[seg.apply].Name
		}
		out = append(out, Phase{Name: name, Seg: i})
	}
	return append(out, Phase{Name: PhaseWrite, Seg: -1})
}

// IsSplitRunDir reports whether dir holds an unfinished split run (or one
// run with --phase all).
func IsSplitRunDir(dir string) bool {
	if dir == "" {
		return false
	}
	_, err := os.Stat(filepath.Join(dir, unitsDir, "inputs.json"))
	return err == nil
}

// PhaseOptions choose one task of one phase.
type PhaseOptions struct {
	RunOptions
	Phase       string
	Task, Tasks int
	// Host names this machine in markers (default os.Hostname).
	Host string
}

// PhaseResult says what a task did.
type PhaseResult struct {
	Dir string
	// Units are the units this task ran; Skipped those already done.
	Units, Skipped []int
	// Manifest is set by the write phase.
	Manifest *record.Manifest
}

// frozenInputs is the input list of a split run, fixed by its first task.
type frozenInputs struct {
	ConfigHash string `json:"config_hash"`
	// Spec, Phases and Units say how to finish the run (audit lists them).
	Spec       string        `json:"spec"`
	Phases     []string      `json:"phases"`
	Units      int           `json:"units"`
	ChunkBytes int64         `json:"chunk_bytes"`
	Inputs     []frozenInput `json:"inputs"`
}

type frozenInput struct {
	Path    string `json:"path"`
	Size    int64  `json:"size"`
	ModTime int64  `json:"mtime_ns"`
}

func freezeList(s *spec.Spec, inputs []read.InputFile) (*frozenInputs, error) {
	f := &frozenInputs{ConfigHash: s.ConfigHash, ChunkBytes: s.ChunkBytes}
	for _, in := range inputs {
		if in.Path == "-" {
			return nil, errors.New("standard input cannot be read by a split run (its tasks cannot share it): list files")
		}
		st, err := os.Stat(in.Path)
		if err != nil {
			return nil, err
		}
		f.Inputs = append(f.Inputs, frozenInput{Path: in.Path, Size: st.Size(), ModTime: st.ModTime().UnixNano()})
	}
	return f, nil
}

// checkFrozen writes the input list at the first phase (the first task to
// get there wins) and compares every later task's list with it.
func checkFrozen(dir string, now *frozenInputs, first bool) error {
	path := filepath.Join(dir, unitsDir, "inputs.json")
	b, err := json.MarshalIndent(now, "", "  ")
	if err != nil {
		return err
	}
	if _, err := os.Stat(path); errors.Is(err, os.ErrNotExist) {
		if !first {
			return fmt.Errorf("%s: no input list: run phase %q first", dir, PhaseRead)
		}
		tmp := fmt.Sprintf("%s.tmp-%d", path, os.Getpid())
		if err := os.WriteFile(tmp, append(b, '\n'), 0o644); err != nil {
			return err
		}
		// Link fails when another task froze the list first: then ours
		// is compared with theirs below.
		lerr := os.Link(tmp, path)
		os.Remove(tmp)
		if lerr == nil {
			return nil
		}
	}
	old, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	var was frozenInputs
	if err := json.Unmarshal(old, &was); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if was.ConfigHash != now.ConfigHash {
		return fmt.Errorf("%s belongs to config %s, the spec is %s: use another --out", dir, was.ConfigHash, now.ConfigHash)
	}
	var diffs []string
	seen := map[string]frozenInput{}
	for _, in := range was.Inputs {
		seen[in.Path] = in
	}
	for _, in := range now.Inputs {
		o, ok := seen[in.Path]
		switch {
		case !ok:
			diffs = append(diffs, in.Path+" (new)")
		case o.Size != in.Size:
			diffs = append(diffs, fmt.Sprintf("%s (%d bytes, was %d)", in.Path, in.Size, o.Size))
		case o.ModTime != in.ModTime:
			diffs = append(diffs, in.Path+" (modified)")
		}
		delete(seen, in.Path)
	}
	for _, in := range was.Inputs {
		if _, gone := seen[in.Path]; gone {
			diffs = append(diffs, in.Path+" (gone)")
		}
	}
	if len(diffs) == 0 && len(was.Inputs) != len(now.Inputs) {
		diffs = append(diffs, "the order of the files changed")
	}
	if len(diffs) > 0 {
		return fmt.Errorf("the inputs differ from the list the run's first phase froze in %s: %s", path, strings.Join(diffs, ", "))
	}
	return nil
}

// unitMarker is a unit's completion (done.json) or failure marker.
type unitMarker struct {
	Phase      string     `json:"phase"`
	Unit       int        `json:"unit"`
	ConfigHash string     `json:"config_hash"`
	Version    string     `json:"tool_version"`
	Host       string     `json:"host"`
	PID        int        `json:"pid"`
	Seconds    float64    `json:"seconds"`
	Inputs     []string   `json:"inputs,omitempty"`
	Files      []unitFile `json:"files,omitempty"`
	Error      string     `json:"error,omitempty"`
	State      *unitState `json:"state,omitempty"`
}

type unitFile struct {
	Path  string `json:"path"`
	Bytes int64  `json:"bytes"`
	XXH3  string `json:"xxh3"`
}

// unitState is what a unit counted: the write phase sums it.
type unitState struct {
	Read         *record.Counters      `json:"read,omitempty"`
	Counters     []*record.Counters    `json:"counters"`
	Write        *record.Counters      `json:"write"`
	InputSums    []record.InputSummary `json:"inputs,omitempty"`
	Errors       []record.RunError     `json:"errors,omitempty"`
	ErrCount     int64                 `json:"error_count"`
	FatalInputs  int                   `json:"fatal_inputs"`
	Internal     int64                 `json:"internal_errors"`
	LedgerCounts map[string]int64      `json:"ledger_counts,omitempty"`
	Ledger       []string              `json:"ledger,omitempty"`
	Metrics      []string              `json:"metrics,omitempty"`
	Keys         bool                  `json:"keys,omitempty"`
	Reports      []string              `json:"reports,omitempty"`
	Docs         int64                 `json:"docs"`
}

func unitDir(dir, phase string, u int) string {
	return filepath.Join(dir, unitsDir, phase, fmt.Sprintf("%05d", u))
}

func failedMarker(dir, phase string, u int) string {
	return filepath.Join(dir, unitsDir, phase, fmt.Sprintf("%05d.failed.json", u))
}

// readMarker returns a unit's completion marker, or nil when the unit is
// not done.
func readMarker(dir, phase string, u int) (*unitMarker, error) {
	b, err := os.ReadFile(filepath.Join(unitDir(dir, phase, u), "done.json"))
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var m unitMarker
	if err := json.Unmarshal(b, &m); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(unitDir(dir, phase, u), "done.json"), err)
	}
	return &m, nil
}

// unitIO receives what one unit hands on: surviving documents, the next
// global stage's keys and the ids read.
type unitIO struct {
	docs  *docSpill
	keys  *keyWriter
	ids   *idWriter
	codec stages.KeyCodec
}

func (u *unitIO) addKeys(d *stages.Doc, keys any) error {
	if u.keys == nil {
		return nil
	}
	return u.keys.add(d.Order, d.ID, u.codec.AppendKeys(nil, keys))
}

// keyWriter stores scan keys: per document, length-prefixed order, id and
// encoded keys in a zstd stream.
type keyWriter struct {
	f   *os.File
	enc *zstd.Encoder
	buf []byte
}

func createKeyWriter(path string) (*keyWriter, error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	enc, err := zstd.NewWriter(f, zstd.WithEncoderLevel(zstd.SpeedFastest), zstd.WithEncoderConcurrency(1))
	if err != nil {
		f.Close()
		return nil, err
	}
	return &keyWriter{f: f, enc: enc}, nil
}

func (w *keyWriter) add(order stages.OrderKey, id string, keys []byte) error {
	b := w.buf[:0]
	b = binary.AppendUvarint(b, uint64(order))
	b = appendField(b, id)
	b = appendField(b, string(keys))
	var hdr [binary.MaxVarintLen64]byte
	n := binary.PutUvarint(hdr[:], uint64(len(b)))
	if _, err := w.enc.Write(hdr[:n]); err != nil {
		return err
	}
	_, err := w.enc.Write(b)
	w.buf = b
	return err
}

func (w *keyWriter) close() error {
	err := w.enc.Close()
	if e := w.f.Close(); err == nil {
		err = e
	}
	return err
}

// forEachRecord reads a length-prefixed zstd record file.
func forEachRecord(path string, fn func([]byte) error) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	dec, err := zstd.NewReader(f, zstd.WithDecoderConcurrency(1))
	if err != nil {
		return err
	}
	defer dec.Close()
	br := bufio.NewReaderSize(dec, 1<<20)
	var buf []byte
	for {
		n, err := binary.ReadUvarint(br)
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		if cap(buf) < int(n) {
			buf = make([]byte, n)
		}
		b := buf[:n]
		if _, err := io.ReadFull(br, b); err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		if err := fn(b); err != nil {
			return err
		}
	}
}

// idWriter stores the ids a read unit saw (xxh3, id, file, line), so the
// write phase can count repeated ids across the whole run.
type idWriter struct{ kw *keyWriter }

func (w *idWriter) add(d *stages.Doc) error {
	b := w.kw.buf[:0]
	b = binary.AppendVarint(b, d.Line)
	b = appendField(b, d.ID)
	b = appendField(b, d.File)
	var hdr [binary.MaxVarintLen64]byte
	n := binary.PutUvarint(hdr[:], uint64(len(b)))
	if _, err := w.kw.enc.Write(hdr[:n]); err != nil {
		return err
	}
	_, err := w.kw.enc.Write(b)
	w.kw.buf = b
	return err
}

// FaultEnv names the environment variable that makes a split run fail on
// purpose, for tests of crash safety: "PHASE/UNIT/POINT[/fail]" kills the
// process with SIGKILL (or, with /fail, fails the unit with an error) when
// unit UNIT ("*": any) of PHASE reaches POINT: "start" (before any work),
// "written" (all files written, before the marker), "renamed" (the unit
// is in place, before the task goes on). With FaultOnceEnv set to a path,
// the fault fires only while that file does not exist (it is created just
// before), so a task started again succeeds.
const (
	FaultEnv     = "WINNOW_FAULT"
	FaultOnceEnv = "WINNOW_FAULT_ONCE"
)

// fault fires the fault FaultEnv asks for at this point, if any.
func fault(phase string, u int, point string) error {
	spec := os.Getenv(FaultEnv)
	if spec == "" {
		return nil
	}
	parts := strings.Split(spec, "/")
	if len(parts) < 3 || parts[0] != phase || parts[2] != point || (parts[1] != "*" && parts[1] != strconv.Itoa(u)) {
		return nil
	}
	if once := os.Getenv(FaultOnceEnv); once != "" {
		f, err := os.OpenFile(once, os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o644)
		if err != nil {
			return nil // fired already
		}
		f.Close()
	}
	if len(parts) > 3 && parts[3] == "fail" {
		return fmt.Errorf("fault injected by %s=%s", FaultEnv, spec)
	}
	killSelf()
	return nil
}

// splitRun is one task's view of a split run.
type splitRun struct {
	spec    *spec.Spec
	opt     PhaseOptions
	dir     string // absolute run directory
	tmp     string // this process's temp directory
	inputs  []read.InputFile
	chunks  [][]int
	steps   []spec.Step
	segs    []segment
	phases  []Phase
	env     stages.Env
	host    string
	workers int
	closers []func()
}

func closeSteps(steps []spec.Step) {
	for _, s := range steps {
		if s.Global != nil {
			s.Global.Close()
		}
	}
}

// TaskFromEnv fills task and tasks from a scheduler's environment when
// they are unset (< 0): Slurm array variables, or a Kubernetes Indexed
// Job's JOB_COMPLETION_INDEX (with tasks given).
func TaskFromEnv(task, tasks int, getenv func(string) string) (int, int, error) {
	atoi := func(name string) (int, bool, error) {
		v := getenv(name)
		if v == "" {
			return 0, false, nil
		}
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return 0, false, fmt.Errorf("%s=%q is not a task number", name, v)
		}
		return n, true, nil
	}
	if task < 0 {
		if id, ok, err := atoi("SLURM_ARRAY_TASK_ID"); err != nil {
			return 0, 0, err
		} else if ok {
			lo, _, err := atoi("SLURM_ARRAY_TASK_MIN")
			if err != nil {
				return 0, 0, err
			}
			task = id - lo
			if tasks < 0 {
				n, ok, err := atoi("SLURM_ARRAY_TASK_COUNT")
				if err != nil {
					return 0, 0, err
				}
				if ok {
					tasks = n
				}
			}
		} else if idx, ok, err := atoi("JOB_COMPLETION_INDEX"); err != nil {
			return 0, 0, err
		} else if ok {
			task = idx
			if tasks < 0 {
				return 0, 0, errors.New("JOB_COMPLETION_INDEX is set but the number of tasks is not: pass --tasks (the completions of the Job)")
			}
		}
	}
	if task < 0 && tasks < 0 {
		task, tasks = 0, 1
	}
	if task < 0 {
		return 0, 0, errors.New("--tasks is set but --task is not (nor SLURM_ARRAY_TASK_ID or JOB_COMPLETION_INDEX)")
	}
	if tasks < 1 {
		return 0, 0, errors.New("--task is set but --tasks is not (nor SLURM_ARRAY_TASK_COUNT)")
	}
	if task >= tasks {
		return 0, 0, fmt.Errorf("task %d is out of range for %d tasks (tasks count from 0)", task, tasks)
	}
	return task, tasks, nil
}

// RunPhase runs task opt.Task of opt.Tasks of phase opt.Phase.
func RunPhase(ctx context.Context, s *spec.Spec, opt PhaseOptions) (*PhaseResult, error) {
	if err := spec.ApplySets(s, opt.Sets); err != nil {
		return nil, err
	}
	inputs, err := spec.ResolveInputs(s)
	if err != nil {
		return nil, err
	}
	out := opt.Out
	if out == "" {
		out = s.OutputDir
	}
	if out == "" {
		return nil, errors.New("no output directory: set output.dir in the spec or pass --out")
	}
	if err := record.CheckOutNotInput(out, inputs); err != nil {
		return nil, err
	}
	abs, err := filepath.Abs(out)
	if err != nil {
		return nil, err
	}
	sr := &splitRun{spec: s, opt: opt, dir: abs, inputs: inputs, chunks: Chunks(inputs, s.ChunkBytes)}
	sr.host = opt.Host
	if sr.host == "" {
		sr.host, _ = os.Hostname()
	}
	sr.workers = opt.Workers
	if sr.workers <= 0 {
		sr.workers = runtime.NumCPU()
	}
	res := &PhaseResult{Dir: abs}
	if old, _ := filepath.Glob(filepath.Join(abs, ".units-done-*")); len(old) > 0 {
		for _, o := range old {
			os.RemoveAll(o) // left by a write phase killed while it cleaned up
		}
	}
	// A finished run: every task has nothing to do.
	if _, err := os.Stat(filepath.Join(abs, "manifest.json")); err == nil {
		if _, err := os.Stat(filepath.Join(abs, unitsDir)); errors.Is(err, os.ErrNotExist) {
			if m, err := record.ReadManifest(abs); err == nil && m.ConfigHash == s.ConfigHash && !m.Interrupted {
				sr.logf("%s holds the finished run of this spec: nothing to do", out)
				return res, nil
			}
			if (opt.Phase == PhaseRead || opt.Phase == PhaseAll) && !opt.Force {
				return nil, fmt.Errorf("output directory %s holds another run: use --force to replace it, or another --out", out)
			}
		}
	}
	// The phases, from stages built as `check` builds them (cheap: no
	// model is loaded), so a task with nothing to do ends at once.
	cenv := stages.Env{SpecDir: s.Dir, RunDir: abs, MemoryBudget: s.Memory, Seed: s.Seed, Checking: true,
		Inputs: func() ([]read.InputFile, error) { return inputs, nil }}
	csteps, err := s.BuildStages(cenv)
	if err != nil {
		return nil, err
	}
	closeSteps(csteps)
	phases := Phases(csteps)
	frozen, err := freezeList(s, inputs)
	if err != nil {
		return nil, err
	}
	frozen.Units = len(sr.chunks)
	frozen.Spec, _ = filepath.Abs(s.File)
	for _, p := range phases {
		frozen.Phases = append(frozen.Phases, p.Name)
	}
	if err := os.MkdirAll(filepath.Join(abs, unitsDir), 0o755); err != nil {
		return nil, err
	}
	if (opt.Phase == PhaseRead || opt.Phase == PhaseAll) && opt.Force {
		if err := clearForSplit(abs); err != nil {
			return nil, err
		}
	}
	if err := checkFrozen(abs, frozen, opt.Phase == PhaseRead || opt.Phase == PhaseAll); err != nil {
		return nil, err
	}
	sr.tmp, err = os.MkdirTemp(filepath.Join(abs, unitsDir), fmt.Sprintf("tmp-%s-%d-", sanitizeHost(sr.host), os.Getpid()))
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(sr.tmp)
	defer func() {
		for _, c := range sr.closers {
			c()
		}
	}()
	sr.env = stages.Env{SpecDir: s.Dir, RunDir: abs, TempDir: sr.tmp, MemoryBudget: s.Memory, Seed: s.Seed, LazyModels: true, Against: opt.Against,
		Inputs: func() ([]read.InputFile, error) { return inputs, nil }}
	if opt.Memory > 0 {
		sr.env.MemoryBudget = opt.Memory
	}
	var names []string
	for _, p := range phases {
		names = append(names, p.Name)
	}
	todo := []string{opt.Phase}
	if opt.Phase == PhaseAll {
		if opt.Tasks != 1 {
			return nil, fmt.Errorf("--phase %s runs every phase in this one process: it takes no --task/--tasks (got %d tasks)", PhaseAll, opt.Tasks)
		}
		todo = names
	} else if !slices.Contains(names, opt.Phase) {
		return nil, fmt.Errorf("no phase %q in this spec (phases: %s, or %s)", opt.Phase, strings.Join(names, ", "), PhaseAll)
	}
	for _, name := range todo {
		pi := slices.Index(names, name)
		var mine []int
		if phases[pi].Seg < 0 {
			if opt.Task != 0 {
				sr.logf("phase %s is one unit, run by task 0: task %d has nothing to do", PhaseWrite, opt.Task)
				continue
			}
		} else {
			for u := range sr.chunks {
				if u%opt.Tasks != opt.Task {
					continue
				}
				m, err := readMarker(abs, name, u)
				if err != nil {
					return nil, err
				}
				if m != nil {
					res.Skipped = append(res.Skipped, u)
					continue
				}
				mine = append(mine, u)
			}
			if len(mine) == 0 {
				sr.logf("phase %s, task %d of %d: nothing to do (%d units done already)", name, opt.Task, opt.Tasks, len(res.Skipped))
				continue
			}
		}
		if opt.Phase != PhaseAll && phases[pi].Seg > 0 && !slices.Contains(mine, 0) {
			// Unit 0's task writes the global stage's key files.
			sr.env.NoKeyFiles = true
		}
		if err := sr.build(); err != nil {
			return nil, err
		}
		if len(sr.phases) != len(phases) {
			return nil, errors.New("the phases of the built stages differ from the checked ones")
		}
		if phases[pi].Seg < 0 {
			m, err := sr.write(ctx)
			if err != nil {
				return nil, err
			}
			res.Manifest = m
			res.Units = append(res.Units, 0)
			continue
		}
		if err := sr.docsPhase(ctx, sr.phases[pi], mine, res); err != nil {
			return res, err
		}
	}
	return res, nil
}

// build builds the stages for real (once per process).
func (sr *splitRun) build() error {
	if sr.steps != nil {
		return nil
	}
	steps, err := sr.spec.BuildStages(sr.env)
	if err != nil {
		return err
	}
	sr.closers = append(sr.closers, func() { closeSteps(steps) })
	if ts, err := record.OutputStage(sr.spec.Output, sr.env); err != nil {
		return err
	} else if ts != nil {
		name := ts.Name()
		for _, st := range steps {
			if st.Name == name {
				name = "output_" + name
			}
		}
		steps = append(steps, spec.Step{Name: name, Stage: ts})
	}
	sr.steps, sr.segs, sr.phases = steps, segmentsOf(steps), Phases(steps)
	return nil
}

func sanitizeHost(h string) string {
	return strings.Map(func(r rune) rune {
		if r == '/' || r == os.PathSeparator || r < ' ' {
			return '_'
		}
		return r
	}, h)
}

// clearForSplit removes a previous run's files before a forced first
// phase.
func clearForSplit(abs string) error {
	for _, sub := range []string{"shards", "ledger", "metrics", "keys", ".work"} {
		if err := os.RemoveAll(filepath.Join(abs, sub)); err != nil {
			return err
		}
	}
	for _, f := range []string{"manifest.json", "contamination.json"} {
		os.Remove(filepath.Join(abs, f))
	}
	return nil
}

func (sr *splitRun) logf(format string, args ...any) {
	if sr.opt.Log != nil {
		sr.opt.Log(format, args...)
	}
}

// docsPhase runs the units mine of a document phase.
func (sr *splitRun) docsPhase(ctx context.Context, ph Phase, mine []int, res *PhaseResult) error {
	seg := sr.segs[ph.Seg]
	var prev string
	if seg.apply >= 0 {
		prev = sr.phases[ph.Seg-1].Name
		if err := sr.requireDone(prev); err != nil {
			return err
		}
		if err := sr.rebuild(ctx, prev, seg.apply); err != nil {
			return err
		}
	}
	for _, u := range mine {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		t0 := time.Now()
		err := sr.runUnit(ctx, ph, u, prev)
		if err != nil {
			if !errors.Is(err, context.Canceled) {
				sr.writeFailed(ph.Name, u, err, time.Since(t0))
			}
			return fmt.Errorf("phase %s, unit %d: %w", ph.Name, u, err)
		}
		res.Units = append(res.Units, u)
	}
	return nil
}

// requireDone checks that every unit of phase is done.
func (sr *splitRun) requireDone(phase string) error {
	var missing, failed []string
	for u := range sr.chunks {
		m, err := readMarker(sr.dir, phase, u)
		if err != nil {
			return err
		}
		if m == nil {
			if b, err := os.ReadFile(failedMarker(sr.dir, phase, u)); err == nil {
				var fm unitMarker
				if json.Unmarshal(b, &fm) == nil {
					failed = append(failed, fmt.Sprintf("%d (%s on %s)", u, fm.Error, fm.Host))
					continue
				}
			}
			missing = append(missing, strconv.Itoa(u))
		}
	}
	if len(missing) == 0 && len(failed) == 0 {
		return nil
	}
	msg := fmt.Sprintf("phase %s is not finished:", phase)
	if len(missing) > 0 {
		msg += fmt.Sprintf(" units %s missing;", strings.Join(missing, ", "))
	}
	if len(failed) > 0 {
		msg += fmt.Sprintf(" units %s failed;", strings.Join(failed, ", "))
	}
	return fmt.Errorf("%s run `winnow run %s --out %s --phase %s` (any task count) first", msg, sr.spec.File, sr.dir, phase)
}

// rebuild feeds the keys every unit of phase prev stored to the global
// stage at step gi, in input order, and reduces it.
func (sr *splitRun) rebuild(ctx context.Context, prev string, gi int) error {
	g := sr.steps[gi].Global
	codec, _ := g.(stages.KeyCodec)
	for u := range sr.chunks {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		m, err := readMarker(sr.dir, prev, u)
		if err != nil {
			return err
		}
		ud := unitDir(sr.dir, prev, u)
		if codec != nil && m.State.Keys {
			err = forEachRecord(filepath.Join(ud, "keys.zst"), func(b []byte) error {
				o, rest, ok := takeUvarint(b)
				if !ok {
					return errSpill
				}
				id, rest, ok := takeField(rest)
				if !ok {
					return errSpill
				}
				kb, _, ok := takeField(rest)
				if !ok {
					return errSpill
				}
				keys, err := codec.DecodeKeys([]byte(kb))
				if err != nil {
					return fmt.Errorf("keys of %s: %w", id, err)
				}
				return g.Collect(stages.OrderKey(o), id, keys)
			})
		} else {
			// No stored keys: scan the unit's documents again (Scan is pure).
			err = forEachSpilled(filepath.Join(ud, "docs.zst"), func(d *stages.Doc) error {
				return g.Collect(d.Order, d.ID, g.Scan(d))
			})
		}
		if err != nil {
			return fmt.Errorf("stage %s, unit %d of phase %s: %w", sr.steps[gi].Name, u, prev, err)
		}
	}
	if err := g.Reduce(); err != nil {
		return fmt.Errorf("stage %s: %w", sr.steps[gi].Name, err)
	}
	return nil
}

// newRunner returns a runner for one unit: its counters are fresh.
func (sr *splitRun) newRunner(inputs []read.InputFile) *Runner {
	r := &Runner{Spec: sr.spec, Steps: sr.steps, Inputs: inputs, Env: sr.env, Workers: sr.workers, Log: sr.opt.Log}
	r.wantMetrics()
	r.Read = record.Counters{Name: "read", Kind: "read"}
	for _, s := range sr.steps {
		kind := ""
		if s.Stage != nil {
			kind = s.Stage.Kind()
		} else {
			kind = s.Global.Kind()
		}
		c := &record.Counters{Name: s.Name, Kind: kind, Global: s.Stage == nil}
		if fw, ok := s.Stage.(stages.FileWriter); ok {
			c.Files = fw.StageFiles()
		}
		r.Counters = append(r.Counters, c)
	}
	r.Write = record.Counters{Name: "write", Kind: "write"}
	r.checkpointSeg = -1
	return r
}

// runUnit runs unit u of a document phase into a temp directory and
// renames it into place.
func (sr *splitRun) runUnit(ctx context.Context, ph Phase, u int, prev string) error {
	t0 := time.Now()
	if err := fault(ph.Name, u, "start"); err != nil {
		return err
	}
	seg := sr.segs[ph.Seg]
	tmp, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), fmt.Sprintf("unit-%s-%05d-", ph.Name, u))
	if err != nil {
		return err
	}
	defer os.RemoveAll(tmp)
	var files []read.InputFile
	for _, i := range sr.chunks[u] {
		files = append(files, sr.inputs[i])
	}
	r := sr.newRunner(files)
	r.chunkOf = nil // one chunk: frames end only at the unit's end
	r.ledger = record.NewLedger(filepath.Join(tmp, "ledger"))
	r.metrics = record.NewMetrics(filepath.Join(tmp, "metrics"))
	uio := &unitIO{}
	r.unit = uio
	if uio.docs, err = createDocSpill(filepath.Join(tmp, "docs.zst")); err != nil {
		return err
	}
	state := &unitState{}
	if seg.scan >= 0 {
		if c, ok := sr.steps[seg.scan].Global.(stages.KeyCodec); ok {
			uio.codec = c
			if uio.keys, err = createKeyWriter(filepath.Join(tmp, "keys.zst")); err != nil {
				return err
			}
			state.Keys = true
		}
	}
	if seg.apply < 0 {
		kw, err := createKeyWriter(filepath.Join(tmp, "ids.zst"))
		if err != nil {
			return err
		}
		uio.ids = &idWriter{kw: kw}
	}
	closeAll := func() error {
		var first error
		for _, c := range []func() error{uio.docs.close, func() error {
			if uio.keys != nil {
				return uio.keys.close()
			}
			return nil
		}, func() error {
			if uio.ids != nil {
				return uio.ids.kw.close()
			}
			return nil
		}} {
			if err := c(); err != nil && first == nil {
				first = err
			}
		}
		return first
	}
	var produce func(ctx context.Context, out chan<- *batch) error
	if seg.apply < 0 {
		produce = r.produceInputs
	} else {
		sp := filepath.Join(unitDir(sr.dir, prev, u), "docs.zst")
		produce = func(ctx context.Context, out chan<- *batch) error { return r.produceSpill(ctx, sp, out) }
	}
	// Reports of observing stages start empty for this unit.
	for _, st := range sr.steps {
		if rs, ok := stageOf(st).(stages.ReportSplitter); ok {
			if _, err := rs.SaveReport(); err != nil {
				return err
			}
		} else if _, obs := stageOf(st).(stages.Observer); obs && sr.stepInSeg(st.Name, seg) {
			return fmt.Errorf("stage %s keeps a run-wide report that cannot be built in parts: run this spec in one process", st.Name)
		}
	}
	err = r.runSegment(ctx, seg, produce, uio.docs)
	if cerr := closeAll(); cerr != nil && err == nil {
		err = cerr
	}
	if err != nil {
		r.ledger.Abort()
		r.metrics.Abort()
		return err
	}
	if state.Ledger, err = r.ledger.CommitParts(); err != nil {
		return err
	}
	if state.Metrics, err = r.metrics.CommitParts(); err != nil {
		return err
	}
	for _, st := range sr.steps {
		rs, ok := stageOf(st).(stages.ReportSplitter)
		if !ok || !sr.stepInSeg(st.Name, seg) {
			continue
		}
		part, err := rs.SaveReport()
		if err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(tmp, "report-"+st.Name+".bin"), part, 0o644); err != nil {
			return err
		}
		state.Reports = append(state.Reports, st.Name)
	}
	state.Read, state.Write = r.Read.Snapshot(), r.Write.Snapshot()
	for _, c := range r.Counters {
		s := c.Snapshot()
		s.Seconds = float64(c.Nanos()) / 1e9
		state.Counters = append(state.Counters, s)
	}
	state.InputSums, state.Errors, state.ErrCount, state.FatalInputs = r.InputSums, r.Errors, r.ErrCount, r.FatalInputs
	state.Internal, state.LedgerCounts, state.Docs = r.InternalErrors, r.ledger.Counts(), uio.docs.n
	if err := fault(ph.Name, u, "written"); err != nil {
		return err
	}
	if err := sr.commitUnit(tmp, ph.Name, u, state, files, t0); err != nil {
		return err
	}
	return fault(ph.Name, u, "renamed")
}

// stepInSeg reports whether the named step runs in seg (per document or
// as the global stage it applies).
func (sr *splitRun) stepInSeg(name string, seg segment) bool {
	if seg.apply >= 0 && sr.steps[seg.apply].Name == name {
		return true
	}
	for _, i := range seg.steps {
		if sr.steps[i].Name == name {
			return true
		}
	}
	return false
}

// commitUnit writes the unit's marker into tmp and renames tmp into place.
func (sr *splitRun) commitUnit(tmp, phase string, u int, state *unitState, files []read.InputFile, t0 time.Time) error {
	m := unitMarker{Phase: phase, Unit: u, ConfigHash: sr.spec.ConfigHash, Version: sr.opt.Version, Host: sr.host,
		PID: os.Getpid(), State: state}
	for _, in := range files {
		m.Inputs = append(m.Inputs, in.Display)
	}
	err := filepath.Walk(tmp, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		n, h, err := fsio.HashFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(tmp, p)
		m.Files = append(m.Files, unitFile{Path: filepath.ToSlash(rel), Bytes: n, XXH3: h})
		return nil
	})
	if err != nil {
		return err
	}
	m.Seconds = time.Since(t0).Seconds()
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	if err := fsio.WriteFileAtomic(filepath.Join(tmp, "done.json"), append(b, '\n')); err != nil {
		return err
	}
	final := unitDir(sr.dir, phase, u)
	if err := os.MkdirAll(filepath.Dir(final), 0o755); err != nil {
		return err
	}
	if err := os.Rename(tmp, final); err != nil {
		if done, _ := readMarker(sr.dir, phase, u); done != nil {
			return nil // another attempt of this unit finished first
		}
		return err
	}
	os.Remove(failedMarker(sr.dir, phase, u))
	return nil
}

// writeFailed records a failed unit: its error, host and inputs.
func (sr *splitRun) writeFailed(phase string, u int, uerr error, took time.Duration) {
	m := unitMarker{Phase: phase, Unit: u, ConfigHash: sr.spec.ConfigHash, Version: sr.opt.Version, Host: sr.host,
		PID: os.Getpid(), Seconds: took.Seconds(), Error: uerr.Error()}
	if u < len(sr.chunks) {
		for _, i := range sr.chunks[u] {
			m.Inputs = append(m.Inputs, sr.inputs[i].Display)
		}
	}
	b, _ := json.MarshalIndent(m, "", "  ")
	os.MkdirAll(filepath.Join(sr.dir, unitsDir, phase), 0o755)
	fsio.WriteFileAtomic(failedMarker(sr.dir, phase, u), append(b, '\n'))
}

// write is the write phase: it puts the run directory together.
func (sr *splitRun) write(ctx context.Context) (*record.Manifest, error) {
	t0 := time.Now()
	// One attempt of the write phase at a time; one that waited finds
	// the run finished.
	release, err := record.WaitLock(filepath.Join(sr.dir, unitsDir, "write.lock"))
	if err != nil {
		return nil, err
	}
	defer release()
	if !IsSplitRunDir(sr.dir) {
		sr.logf("another attempt of phase %s finished the run", PhaseWrite)
		return record.ReadManifest(sr.dir)
	}
	if err := fault(PhaseWrite, 0, "start"); err != nil {
		return nil, err
	}
	docPhases := sr.phases[:len(sr.phases)-1]
	markers := make([][]*unitMarker, len(docPhases))
	for pi, ph := range docPhases {
		if err := sr.requireDone(ph.Name); err != nil {
			return nil, err
		}
		for u := range sr.chunks {
			m, err := readMarker(sr.dir, ph.Name, u)
			if err != nil {
				return nil, err
			}
			markers[pi] = append(markers[pi], m)
		}
	}
	r := sr.newRunner(sr.inputs)
	// Counters, inputs and errors, summed in input order.
	for pi := range docPhases {
		for _, m := range markers[pi] {
			st := m.State
			if pi == 0 && st.Read != nil {
				addCounters(&r.Read, st.Read)
			}
			for i, c := range st.Counters {
				if i < len(r.Counters) {
					addCounters(r.Counters[i], c)
				}
			}
			addCounters(&r.Write, st.Write)
			r.InputSums = append(r.InputSums, st.InputSums...)
			// The caps of a single process, replayed: read errors while
			// the list is short, internal errors by their number.
			internal := r.InternalErrors
			for _, e := range st.Errors {
				switch {
				case e.Rule == RuleInternalError && e.Stage != "":
					internal++
					if internal <= maxManifestErrors {
						r.Errors = append(r.Errors, e)
					}
				case e.Fatal || e.Rule == read.RuleEmptyInput || len(r.Errors) < maxManifestErrors:
					r.Errors = append(r.Errors, e)
				}
			}
			r.ErrCount += st.ErrCount
			r.FatalInputs += st.FatalInputs
			r.InternalErrors += st.Internal
		}
	}
	// The id check, in input order.
	for u := range sr.chunks {
		err := forEachRecord(filepath.Join(unitDir(sr.dir, PhaseRead, u), "ids.zst"), func(b []byte) error {
			line, k := binary.Varint(b)
			if k <= 0 {
				return errSpill
			}
			id, rest, ok := takeField(b[k:])
			if !ok {
				return errSpill
			}
			file, _, ok := takeField(rest)
			if !ok {
				return errSpill
			}
			r.noteID(&stages.Doc{ID: id, File: file, Line: line})
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	r.reportDuplicates()
	r.ids = nil
	// Reports built in parts.
	for _, st := range sr.steps {
		rs, ok := stageOf(st).(stages.ReportSplitter)
		if !ok {
			continue
		}
		for pi := range docPhases {
			for u, m := range markers[pi] {
				if !slices.Contains(m.State.Reports, st.Name) {
					continue
				}
				part, err := os.ReadFile(filepath.Join(unitDir(sr.dir, docPhases[pi].Name, u), "report-"+st.Name+".bin"))
				if err != nil {
					return nil, err
				}
				if err := rs.MergeReport(part); err != nil {
					return nil, fmt.Errorf("stage %s: report of unit %d: %w", st.Name, u, err)
				}
			}
		}
	}
	// The sink, fed in input order; its own ledger records go to a part
	// written after every unit's.
	wtmp, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), "write-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(wtmp)
	// What an earlier attempt of this phase may have left.
	for _, sub := range []string{"shards", "ledger", "metrics"} {
		if err := os.RemoveAll(filepath.Join(sr.dir, sub)); err != nil {
			return nil, err
		}
	}
	sink, err := record.OpenSink(sr.spec.Output, sr.env, sr.spec.Name)
	if err != nil {
		return nil, err
	}
	r.Sink = sink
	r.ledger = record.NewLedger(filepath.Join(wtmp, "ledger"))
	r.metrics = record.NewMetrics(filepath.Join(wtmp, "metrics"))
	if lo, ok := sink.(record.LeftOutRecorder); ok {
		lo.OnLeftOut(func(rec *record.LedgerRecord) error {
			if rec.Action == "drop" {
				r.Write.Dropped++
			} else {
				r.Write.Edited++
			}
			return r.ledger.Add(rec)
		})
	}
	last := docPhases[len(docPhases)-1].Name
	for u := range sr.chunks {
		if ctx.Err() != nil {
			sink.Abort()
			return nil, ctx.Err()
		}
		err := forEachSpilled(filepath.Join(unitDir(sr.dir, last, u), "docs.zst"), func(d *stages.Doc) error {
			if err := sink.Add(d); err != nil {
				return fmt.Errorf("write: %w", err)
			}
			return nil
		})
		if err == nil {
			err = r.endFrames()
		}
		if err != nil {
			sink.Abort()
			r.ledger.Abort()
			r.metrics.Abort()
			return nil, err
		}
	}
	out, err := sink.Close()
	if err != nil {
		r.ledger.Abort()
		r.metrics.Abort()
		return nil, err
	}
	r.Output = out
	if _, ok := sink.(record.LeftOutRecorder); !ok && out != nil {
		r.Write.Dropped += out.BudgetLeftOut
	}
	for i := range out.Edits {
		if err := r.ledger.Add(&out.Edits[i]); err != nil {
			return nil, err
		}
	}
	for _, s := range sr.steps {
		if f, ok := stageOf(s).(stages.Finisher); ok {
			if err := f.Finish(sr.dir); err != nil {
				return nil, err
			}
		}
	}
	if err := fault(PhaseWrite, 0, "written"); err != nil {
		return nil, err
	}
	wLedger, err := r.ledger.CommitParts()
	if err != nil {
		return nil, err
	}
	wMetrics, err := r.metrics.CommitParts()
	if err != nil {
		return nil, err
	}
	// Every ledger and metrics file: the units' parts in phase and input
	// order, then the write phase's.
	for _, kind := range []string{"ledger", "metrics"} {
		names := map[string]bool{}
		var order []string
		add := func(n string) {
			if !names[n] {
				names[n] = true
				order = append(order, n)
			}
		}
		if kind == "ledger" {
			add("read") // a single process opens these even without a record
			for _, s := range sr.steps {
				add(s.Name)
			}
		}
		for pi := range docPhases {
			for _, m := range markers[pi] {
				list := m.State.Ledger
				if kind == "metrics" {
					list = m.State.Metrics
				}
				for _, n := range list {
					add(n)
				}
			}
		}
		wl := wLedger
		if kind == "metrics" {
			wl = wMetrics
		}
		for _, n := range wl {
			add(n)
		}
		if err := os.MkdirAll(filepath.Join(sr.dir, kind), 0o755); err != nil {
			return nil, err
		}
		sort.Strings(order)
		for _, n := range order {
			var parts []string
			for pi := range docPhases {
				for u := range markers[pi] {
					parts = append(parts, filepath.Join(unitDir(sr.dir, docPhases[pi].Name, u), kind, n+".jsonl.zst"))
				}
			}
			parts = append(parts, filepath.Join(wtmp, kind, n+".jsonl.zst"))
			if err := record.AssembleStream(filepath.Join(sr.dir, kind, n+".jsonl.zst"), parts); err != nil {
				return nil, err
			}
		}
	}
	for _, c := range r.Counters {
		c.Seconds = float64(c.Nanos()) / 1e9
	}
	m := buildManifest(sr.opt.Version, sr.spec, r, time.Since(t0).Seconds())
	if err := record.WriteManifest(sr.dir, m); err != nil {
		return nil, err
	}
	if err := record.MarkRunDir(sr.dir, sr.spec.ConfigHash); err != nil {
		return nil, err
	}
	// The units go in one rename, so a task killed here leaves either a
	// finished run or one whose write phase can run again.
	gone := filepath.Join(sr.dir, fmt.Sprintf(".units-done-%d", os.Getpid()))
	if err := os.Rename(filepath.Join(sr.dir, unitsDir), gone); err != nil {
		return nil, err
	}
	os.RemoveAll(gone)
	os.RemoveAll(filepath.Join(sr.dir, ".work"))
	return m, nil
}

// addCounters adds the counts of b to a.
func addCounters(a, b *record.Counters) {
	if b == nil {
		return
	}
	a.DocsIn += b.DocsIn
	a.DocsOut += b.DocsOut
	a.BytesIn += b.BytesIn
	a.BytesOut += b.BytesOut
	a.TokensOut += b.TokensOut
	a.RecordsOut += b.RecordsOut
	a.Dropped += b.Dropped
	a.Edited += b.Edited
	a.Skipped += b.Skipped
	a.AddNanos(int64(b.Seconds * 1e9))
}

// SplitStatus is where an unfinished split run stands, phase by phase.
type SplitStatus struct {
	Dir    string        `json:"dir"`
	Spec   string        `json:"spec"`
	Phases []PhaseStatus `json:"phases"`
}

// PhaseStatus counts a phase's units; Failed and Missing list the units
// not done (a failed unit wrote its error, host and inputs).
type PhaseStatus struct {
	Name    string        `json:"name"`
	Units   int           `json:"units"`
	Done    int           `json:"done"`
	Failed  []UnitFailure `json:"failed,omitempty"`
	Missing []int         `json:"missing,omitempty"`
	// Rerun is the command that finishes the phase (any --tasks works:
	// finished units are skipped).
	Rerun string `json:"rerun,omitempty"`
}

// UnitFailure is a failed unit's marker.
type UnitFailure struct {
	Unit   int      `json:"unit"`
	Error  string   `json:"error"`
	Host   string   `json:"host"`
	PID    int      `json:"pid"`
	Inputs []string `json:"inputs"`
}

// ReadSplitStatus reads the units of the split run in dir.
func ReadSplitStatus(dir string) (*SplitStatus, error) {
	if abs, err := filepath.Abs(dir); err == nil {
		dir = abs
	}
	b, err := os.ReadFile(filepath.Join(dir, unitsDir, "inputs.json"))
	if err != nil {
		return nil, err
	}
	var f frozenInputs
	if err := json.Unmarshal(b, &f); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(dir, unitsDir, "inputs.json"), err)
	}
	st := &SplitStatus{Dir: dir, Spec: f.Spec}
	for _, name := range f.Phases {
		ps := PhaseStatus{Name: name, Units: f.Units}
		if name == PhaseWrite {
			ps.Units = 1
		}
		for u := 0; u < ps.Units; u++ {
			if name == PhaseWrite {
				if _, err := os.Stat(filepath.Join(dir, "manifest.json")); err == nil {
					ps.Done++
				} else {
					ps.Missing = append(ps.Missing, 0)
				}
				continue
			}
			m, err := readMarker(dir, name, u)
			if err != nil {
				return nil, err
			}
			if m != nil {
				ps.Done++
				continue
			}
			if b, err := os.ReadFile(failedMarker(dir, name, u)); err == nil {
				var fm unitMarker
				if json.Unmarshal(b, &fm) == nil {
					ps.Failed = append(ps.Failed, UnitFailure{Unit: u, Error: fm.Error, Host: fm.Host, PID: fm.PID, Inputs: fm.Inputs})
					continue
				}
			}
			ps.Missing = append(ps.Missing, u)
		}
		if ps.Done < ps.Units {
			ps.Rerun = fmt.Sprintf("winnow run %s --out %s --phase %s", f.Spec, dir, name)
		}
		st.Phases = append(st.Phases, ps)
	}
	return st, nil
}
