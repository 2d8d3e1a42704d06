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
// A task claims a unit with a flock'ed file before running it, and once
// its own units are done it takes other tasks' unclaimed units (steal).
//
// A document phase after a global stage first rebuilds that stage: it
// feeds the keys of every unit of the previous phase, in input order, to
// Collect and calls Reduce, exactly as a single process does after its
// scan; every task of the phase does this, so no decision file is needed.
// The write phase (one unit) merges counters, replays the id check, feeds
// the sink in input order, merges the stages' report parts and assembles
// every ledger and metrics file by concatenating the parts.

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"time"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// Phase is one step of a split run.
type Phase struct {
	Name string
	// Seg is the pipeline segment the phase runs; -1 for the write phase.
	// A reduce phase has the segment whose scan feeds it.
	Seg int
	// Reduce is the step of the global stage a reduce phase reduces; -1
	// for other phases.
	Reduce int
}

// docsPhaseOf names the document phase that runs segment seg.
func (sr *splitRun) docsPhaseOf(seg int) string {
	for _, p := range sr.phases {
		if p.Seg == seg && p.Reduce < 0 {
			return p.Name
		}
	}
	return ""
}

// splitReducer returns g's SplitReducer when its reduce is cut into parts
// in this configuration (ReduceParts > 0), else nil.
func splitReducer(g stages.GlobalStage) stages.SplitReducer {
	if sp, ok := g.(stages.SplitReducer); ok && sp.ReduceParts() > 0 {
		return sp
	}
	return nil
}

// reducePhaseName names the reduce phase of a global stage.
func reducePhaseName(stage string) string { return "reduce-" + stage }

// The fixed phase names; the others are the names of global stages.
const (
	PhaseRead  = "read"
	PhaseWrite = "write"
	// PhaseShards writes a planned output's shards in ranges (units).
	PhaseShards = "shards"
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
//
// planned adds the phase that writes the shards of a planned output (one
// with a tokenizer: record.PlannedOutput) in ranges before the write
// phase.
func Phases(steps []spec.Step, planned bool) []Phase {
	var out []Phase
	for i, seg := range segmentsOf(steps) {
		name := PhaseRead
		if seg.apply >= 0 {
			name = steps[seg.apply].Name
			if splitReducer(steps[seg.apply].Global) != nil {
				out = append(out, Phase{Name: reducePhaseName(name), Seg: i - 1, Reduce: seg.apply})
			}
		}
		out = append(out, Phase{Name: name, Seg: i, Reduce: -1})
	}
	if planned {
		out = append(out, Phase{Name: PhaseShards, Seg: -1, Reduce: -1})
	}
	return append(out, Phase{Name: PhaseWrite, Seg: -1, Reduce: -1})
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
	// afterCheck, when set (tests), runs once the task has seen the run
	// unfinished, before it touches the units.
	afterCheck func()
}

// PhaseResult says what a task did.
type PhaseResult struct {
	Dir string
	// Units are the units of its own this task ran; Skipped those of its
	// own already done (by an earlier attempt, or taken by another task);
	// Stolen the units of other tasks it ran.
	Units, Skipped, Stolen []int
	// Manifest is set by the write phase.
	Manifest *record.Manifest
}

// splitRun is one task's view of a split run.
type splitRun struct {
	spec    *spec.Spec
	opt     PhaseOptions
	dir     string // absolute run directory
	tmp     string // this process's temp directory
	inputs  []read.InputFile
	chunks  [][]int
	planned bool // the output is planned: phase shards writes it in ranges
	steps   []spec.Step
	segs    []segment
	phases  []Phase
	env     stages.Env
	host    string
	workers int
	closers []func()
	// closeBuilt closes the stages of the last build (once).
	closeBuilt func()
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
	inputs, out, err := prepareSpec(s, opt.RunOptions)
	if err != nil {
		return nil, err
	}
	abs, err := filepath.Abs(out)
	if err != nil {
		return nil, err
	}
	sr := &splitRun{spec: s, opt: opt, dir: abs, inputs: inputs, chunks: Chunks(inputs, s.ChunkBytes), planned: record.PlannedOutput(s.Output)}
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
	if fin, other := finishedRun(abs, s.ConfigHash); fin {
		sr.logf("%s holds the finished run of this spec: nothing to do", out)
		return res, nil
	} else if other && (opt.Phase == PhaseRead || opt.Phase == PhaseAll) && !opt.Force {
		return nil, fmt.Errorf("output directory %s holds another run: use --force to replace it, or another --out", out)
	}
	if opt.afterCheck != nil {
		opt.afterCheck()
	}
	res, err = sr.runPhases(ctx, opt, res)
	if err != nil {
		// Another attempt of the write phase may have finished the run
		// (and moved the units away) while this one was starting.
		if fin, _ := finishedRun(abs, s.ConfigHash); fin {
			sr.logf("another attempt finished the run in %s: nothing to do", out)
			return &PhaseResult{Dir: abs}, nil
		}
	}
	return res, err
}

// finishedRun tells whether dir holds a finished run of the config
// (fin), or a finished run of another config (other).
func finishedRun(dir, configHash string) (fin, other bool) {
	if _, err := os.Stat(filepath.Join(dir, "manifest.json")); err != nil {
		return false, false
	}
	if _, err := os.Stat(filepath.Join(dir, unitsDir)); !errors.Is(err, os.ErrNotExist) {
		return false, false
	}
	if m, err := record.ReadManifest(dir); err == nil && m.ConfigHash == configHash && !m.Interrupted {
		return true, false
	}
	return false, true
}

// runPhases runs the phases of opt in the prepared split run.
func (sr *splitRun) runPhases(ctx context.Context, opt PhaseOptions, res *PhaseResult) (*PhaseResult, error) {
	s, abs, inputs := sr.spec, sr.dir, sr.inputs
	// The phases, from stages built as `check` builds them (cheap: no
	// model is loaded), so a task with nothing to do ends at once.
	cenv := stages.Env{SpecDir: s.Dir, RunDir: abs, MemoryBudget: s.Memory, Seed: s.Seed, Checking: true,
		Inputs: func() ([]read.InputFile, error) { return inputs, nil }}
	csteps, err := s.BuildStages(cenv)
	if err != nil {
		return nil, err
	}
	closeSteps(csteps)
	phases := Phases(csteps, sr.planned)
	frozen, err := freezeList(s, inputs)
	if err != nil {
		return nil, err
	}
	frozen.Units = len(sr.chunks)
	frozen.Spec, _ = filepath.Abs(s.File)
	for _, p := range phases {
		n := len(sr.chunks)
		switch {
		case p.Name == PhaseShards:
			n = shardRanges
		case p.Seg < 0:
			n = 1
		case p.Reduce >= 0:
			n = csteps[p.Reduce].Global.(stages.SplitReducer).ReduceParts()
		}
		frozen.Phases = append(frozen.Phases, p.Name)
		frozen.PhaseUnits = append(frozen.PhaseUnits, n)
	}
	first := opt.Phase == PhaseRead || opt.Phase == PhaseAll
	if first {
		if err := os.MkdirAll(filepath.Join(abs, unitsDir), 0o755); err != nil {
			return nil, err
		}
	} else if _, err := os.Stat(filepath.Join(abs, unitsDir)); err != nil {
		// Later phases never create the units directory: a late task
		// must not bring it back after the write phase moved it away.
		return nil, fmt.Errorf("%s: no units of a split run (%v): run phase %q first", abs, err, PhaseRead)
	}
	if (opt.Phase == PhaseRead || opt.Phase == PhaseAll) && opt.Force {
		if err := clearForSplit(abs); err != nil {
			return nil, err
		}
	}
	if err := checkFrozen(abs, frozen, first); err != nil {
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
		var mine, steal []int
		done := 0
		if phases[pi].Name == PhaseWrite {
			if opt.Task != 0 {
				sr.logf("phase %s is one unit, run by task 0: task %d has nothing to do", PhaseWrite, opt.Task)
				continue
			}
		} else {
			n := len(sr.chunks)
			if phases[pi].Reduce >= 0 {
				n = csteps[phases[pi].Reduce].Global.(stages.SplitReducer).ReduceParts()
			} else if name == PhaseShards {
				n = shardRanges
			}
			for u := 0; u < n; u++ {
				if u%opt.Tasks != opt.Task {
					// Another task's unit: taken when done with our own,
					// never unit 0 (its task writes the key files), never
					// in the shards phase (its ranges are written in one
					// pass).
					if u != 0 && name != PhaseShards && !unitDone(abs, name, u) {
						steal = append(steal, u)
					}
					continue
				}
				m, err := readMarker(abs, name, u)
				if err != nil {
					return nil, err
				}
				if m != nil {
					res.Skipped = append(res.Skipped, u)
					done++
					continue
				}
				mine = append(mine, u)
			}
			if len(mine) == 0 {
				// Build the stages only when some unit is free to take.
				steal = sr.unclaimed(name, steal)
			}
			if len(mine) == 0 && len(steal) == 0 {
				sr.logf("phase %s, task %d of %d: nothing to do (%d units done already)", name, opt.Task, opt.Tasks, done)
				continue
			}
		}
		if opt.Phase != PhaseAll && (phases[pi].Reduce >= 0 || (phases[pi].Seg > 0 && !slices.Contains(mine, 0))) {
			// Unit 0's task of the phase after a global stage writes the
			// stage's key files.
			sr.env.NoKeyFiles = true
		}
		if name == PhaseShards {
			if err := sr.shardsPhase(ctx, phases, mine, res); err != nil {
				return res, err
			}
			continue
		}
		if err := sr.build(); err != nil {
			return nil, err
		}
		if len(sr.phases) != len(phases) {
			return nil, errors.New("the phases of the built stages differ from the checked ones")
		}
		if name == PhaseWrite {
			m, err := sr.write(ctx)
			if err != nil {
				return nil, err
			}
			res.Manifest = m
			res.Units = append(res.Units, 0)
			continue
		}
		if phases[pi].Reduce >= 0 {
			if err := sr.reducePhase(ctx, sr.phases[pi], mine, steal, res); err != nil {
				return res, err
			}
			// The stage reduced parts; the next phase loads all of them
			// into a stage built afresh.
			sr.steps = nil
			continue
		}
		if err := sr.docsPhase(ctx, sr.phases[pi], mine, steal, res); err != nil {
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
	closed := false
	sr.closeBuilt = func() {
		if !closed {
			closed = true
			closeSteps(steps)
		}
	}
	sr.closers = append(sr.closers, sr.closeBuilt)
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
	sr.steps, sr.segs, sr.phases = steps, segmentsOf(steps), Phases(steps, sr.planned)
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

// docsPhase runs the units mine of a document phase, then takes the units
// steal of other tasks (see steal).
func (sr *splitRun) docsPhase(ctx context.Context, ph Phase, mine, steal []int, res *PhaseResult) error {
	seg := sr.segs[ph.Seg]
	var prev string
	if seg.apply >= 0 {
		prev = sr.docsPhaseOf(ph.Seg - 1)
		if err := sr.requireDone(prev, len(sr.chunks)); err != nil {
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
		release, err := sr.claimUndone(ph.Name, u)
		if err != nil {
			return err
		}
		if release == nil {
			res.Skipped = append(res.Skipped, u) // another task took it
			continue
		}
		t0 := time.Now()
		docs, err := sr.runUnit(ctx, ph, u, prev)
		if err != nil {
			if !errors.Is(err, context.Canceled) {
				sr.writeFailed(ph.Name, u, err, time.Since(t0))
			}
			release()
			return fmt.Errorf("phase %s, unit %d: %w", ph.Name, u, err)
		}
		release()
		res.Units = append(res.Units, u)
		sr.logf("phase %s, unit %d of %d: %d documents passed on, %.1f s", ph.Name, u, len(sr.chunks), docs, time.Since(t0).Seconds())
	}
	return sr.steal(ctx, ph.Name, steal, false, func(us []int) ([]int, error) {
		t0 := time.Now()
		docs, err := sr.runUnit(ctx, ph, us[0], prev)
		if err != nil {
			return nil, err
		}
		sr.logf("phase %s, unit %d of %d (task %d's): %d documents passed on, %.1f s", ph.Name, us[0], len(sr.chunks), us[0]%sr.opt.Tasks, docs, time.Since(t0).Seconds())
		return us, nil
	}, res)
}

// claimPath is the file a task locks while it runs unit u of phase.
func claimPath(dir, phase string, u int) string {
	return filepath.Join(dir, unitsDir, phase, fmt.Sprintf("%05d.claim", u))
}

// claimFile returns the claim file of unit u, creating the phase's
// directory (never the units directory: see runPhases).
func (sr *splitRun) claimFile(phase string, u int) (string, error) {
	if err := os.Mkdir(filepath.Join(sr.dir, unitsDir, phase), 0o755); err != nil && !errors.Is(err, os.ErrExist) {
		return "", err
	}
	return claimPath(sr.dir, phase, u), nil
}

// claim locks unit u of phase for this task, waiting while another task
// runs it. The kernel drops the lock of a task that dies.
func (sr *splitRun) claim(phase string, u int) (release func(), err error) {
	p, err := sr.claimFile(phase, u)
	if err != nil {
		return nil, err
	}
	return record.WaitLock(p)
}

// claimUndone claims unit u of phase (waiting while another task runs it)
// unless the unit is finished: then, or on error, release is nil.
func (sr *splitRun) claimUndone(phase string, u int) (release func(), err error) {
	release, err = sr.claim(phase, u)
	if err != nil {
		return nil, err
	}
	if m, err := readMarker(sr.dir, phase, u); err != nil || m != nil {
		release()
		return nil, err
	}
	return release, nil
}

// tryClaim locks unit u of phase when no other task holds it.
func (sr *splitRun) tryClaim(phase string, u int) (release func(), ok bool, err error) {
	p, err := sr.claimFile(phase, u)
	if err != nil {
		return nil, false, err
	}
	return record.TryLock(p)
}

// unitDone reports whether unit u of phase has its completion marker.
func unitDone(dir, phase string, u int) bool {
	_, err := os.Stat(filepath.Join(unitDir(dir, phase, u), "done.json"))
	return err == nil
}

// unclaimed returns the units of us that no task holds at the moment.
func (sr *splitRun) unclaimed(phase string, us []int) []int {
	var out []int
	for _, u := range us {
		release, ok, err := sr.tryClaim(phase, u)
		if err != nil {
			sr.logf("phase %s: cannot claim unit %d: %v", phase, u, err)
			return out
		}
		if ok {
			release()
			out = append(out, u)
		}
	}
	return out
}

// steal runs, once this task's own units are done, the units us (other
// tasks', ascending) that no task holds and none finished, from the last
// down: a task that runs behind loses its last units first. A document
// phase runs them one call of run each; a reduce phase (batch) claims
// every free part first and runs them in one call, since each call reads
// all stored keys. run returns the units it committed. A failure is logged
// and ends the stealing without failing the task or marking a unit
// failed: its own task runs it again. Cancellation still ends the task.
func (sr *splitRun) steal(ctx context.Context, phase string, us []int, batch bool, run func([]int) ([]int, error), res *PhaseResult) error {
	var claimed []int
	var releases []func()
	releaseAll := func() {
		for _, r := range releases {
			r()
		}
		claimed, releases = nil, nil
	}
	defer releaseAll()
	runClaimed := func() (bool, error) {
		slices.Sort(claimed)
		done, err := run(claimed)
		res.Stolen = append(res.Stolen, done...)
		units := claimed
		releaseAll()
		if err == nil {
			return true, nil
		}
		if ctx.Err() != nil || errors.Is(err, context.Canceled) {
			return false, err
		}
		sr.logf("phase %s, units %v of other tasks: %v; left to their tasks, taking no more", phase, units, err)
		return false, nil
	}
	for i := len(us) - 1; i >= 0; i-- {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		u := us[i]
		release, ok, err := sr.tryClaim(phase, u)
		if err != nil {
			sr.logf("phase %s: cannot claim unit %d: %v; taking no more units of other tasks", phase, u, err)
			break
		}
		if !ok {
			continue // its task (or another) runs it
		}
		if unitDone(sr.dir, phase, u) {
			release()
			continue
		}
		claimed, releases = append(claimed, u), append(releases, release)
		if !batch {
			if more, err := runClaimed(); !more {
				return err
			}
		}
	}
	if len(claimed) > 0 {
		_, err := runClaimed()
		return err
	}
	return nil
}

// requireDone checks that every unit of phase is done.
func (sr *splitRun) requireDone(phase string, n int) error {
	var missing, failed []string
	for u := 0; u < n; u++ {
		m, err := readMarker(sr.dir, phase, u)
		if err != nil {
			return err
		}
		if m != nil && (m.Version != sr.opt.Version || m.ConfigHash != sr.spec.ConfigHash) {
			// Units must agree byte for byte: one tool version and spec.
			return fmt.Errorf("unit %d of phase %s was written by winnow %s for config %s on %s; this is winnow %s, config %s: run every task with one binary and one spec",
				u, phase, m.Version, m.ConfigHash, m.Host, sr.opt.Version, sr.spec.ConfigHash)
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

// feed returns the keys every unit of phase prev stored for the global
// stage at step gi, in input order (the Collect sequence of one process).
func (sr *splitRun) feed(ctx context.Context, prev string, gi int) stages.Feed {
	g := sr.steps[gi].Global
	codec, _ := g.(stages.KeyCodec)
	return func(collect func(order stages.OrderKey, id string, keys any) error) error {
		for u := range sr.chunks {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			m, err := readMarker(sr.dir, prev, u)
			if err != nil {
				return err
			}
			if m == nil {
				return fmt.Errorf("unit %d of phase %s is not done", u, prev)
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
					kb, _, ok := takeBytes(rest)
					if !ok {
						return errSpill
					}
					keys, err := codec.DecodeKeys(kb)
					if err != nil {
						return fmt.Errorf("keys of %s: %w", id, err)
					}
					return collect(stages.OrderKey(o), id, keys)
				})
			} else {
				// No stored keys: scan the unit's documents again (Scan is pure).
				err = forEachSpilled(filepath.Join(ud, "docs.zst"), func(d *stages.Doc) error {
					return collect(d.Order, d.ID, g.Scan(d))
				})
			}
			if err != nil {
				return fmt.Errorf("stage %s, unit %d of phase %s: %w", sr.steps[gi].Name, u, prev, err)
			}
		}
		return nil
	}
}

// rebuild prepares the global stage at step gi for Apply: from the
// results of its reduce phase when it has one, else by feeding it every
// stored key and reducing here.
func (sr *splitRun) rebuild(ctx context.Context, prev string, gi int) error {
	g := sr.steps[gi].Global
	name := sr.steps[gi].Name
	feed := sr.feed(ctx, prev, gi)
	if sp := splitReducer(g); sp != nil {
		rp := reducePhaseName(name)
		n := sp.ReduceParts()
		if err := sr.requireDone(rp, n); err != nil {
			return err
		}
		results := make([][]byte, n)
		for p := 0; p < n; p++ {
			b, err := os.ReadFile(filepath.Join(unitDir(sr.dir, rp, p), "result.bin"))
			if err != nil {
				return err
			}
			results[p] = b
		}
		if err := sp.LoadReduced(results, feed); err != nil {
			return fmt.Errorf("stage %s: %w", name, err)
		}
		return nil
	}
	if err := feed(g.Collect); err != nil {
		return err
	}
	if err := g.Reduce(); err != nil {
		return fmt.Errorf("stage %s: %w", name, err)
	}
	return nil
}

// reducePhase runs the parts mine of a global stage's reduce in one call,
// each claimed first, and commits each part's result as a unit; then it
// takes the parts steal of other tasks (see steal).
func (sr *splitRun) reducePhase(ctx context.Context, ph Phase, mine, steal []int, res *PhaseResult) error {
	prev := sr.docsPhaseOf(ph.Seg) // the document phase that scanned the stage's keys
	if err := sr.requireDone(prev, len(sr.chunks)); err != nil {
		return err
	}
	// Own parts are claimed in ascending order, so two attempts of a task
	// never wait for each other in a circle (stealers never wait).
	var ps []int
	var releases []func()
	releaseAll := func() {
		for _, r := range releases {
			r()
		}
		releases = nil
	}
	defer releaseAll()
	for _, p := range mine {
		release, err := sr.claimUndone(ph.Name, p)
		if err != nil {
			return err
		}
		if release == nil {
			res.Skipped = append(res.Skipped, p) // another task took it
			continue
		}
		ps, releases = append(ps, p), append(releases, release)
	}
	if len(ps) > 0 {
		done, err := sr.reduceParts(ctx, ph, prev, ps, true)
		res.Units = append(res.Units, done...)
		if err != nil {
			return err
		}
	}
	releaseAll()
	return sr.steal(ctx, ph.Name, steal, true, func(parts []int) ([]int, error) {
		if len(ps) > 0 {
			// A stage reduces once: other parts need it built afresh.
			sr.closeBuilt()
			sr.steps = nil
			if err := sr.build(); err != nil {
				return nil, err
			}
		}
		return sr.reduceParts(ctx, ph, prev, parts, false)
	}, res)
}

// reduceParts reduces the parts ps in one call and commits each; it
// returns the parts committed. A failure of the task's own parts (own) is
// recorded beside them.
func (sr *splitRun) reduceParts(ctx context.Context, ph Phase, prev string, ps []int, own bool) ([]int, error) {
	sp := sr.steps[ph.Reduce].Global.(stages.SplitReducer)
	t0 := time.Now()
	for _, p := range ps {
		if err := fault(ph.Name, p, "start"); err != nil {
			return nil, err
		}
	}
	results, err := sp.ReduceSome(ps, sr.feed(ctx, prev, ph.Reduce))
	if err == nil && len(results) != len(ps) {
		err = fmt.Errorf("stage %s returned %d results for %d parts", sr.steps[ph.Reduce].Name, len(results), len(ps))
	}
	if err != nil {
		if own && !errors.Is(err, context.Canceled) {
			for _, p := range ps {
				sr.writeFailed(ph.Name, p, err, time.Since(t0))
			}
		}
		return nil, fmt.Errorf("phase %s, parts %v: %w", ph.Name, ps, err)
	}
	var done []int
	for i, p := range ps {
		tmp, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), fmt.Sprintf("unit-%s-%05d-", ph.Name, p))
		if err != nil {
			return done, err
		}
		err = os.WriteFile(filepath.Join(tmp, "result.bin"), results[i], 0o644)
		if err == nil {
			err = fault(ph.Name, p, "written")
		}
		if err == nil {
			err = sr.commitUnit(tmp, ph.Name, p, &unitState{}, nil, t0)
		}
		os.RemoveAll(tmp)
		if err != nil {
			return done, err
		}
		if err := fault(ph.Name, p, "renamed"); err != nil {
			return done, err
		}
		done = append(done, p)
	}
	if !own {
		sr.logf("phase %s, parts %v of other tasks: %.1f s", ph.Name, ps, time.Since(t0).Seconds())
	}
	return done, nil
}

// newRunner returns a runner for one unit: its counters are fresh.
func (sr *splitRun) newRunner(inputs []read.InputFile) *Runner {
	r := &Runner{Spec: sr.spec, Steps: sr.steps, Inputs: inputs, Env: sr.env, Workers: sr.workers, Log: sr.opt.Log}
	r.wantMetrics()
	r.initCounters()
	return r
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
