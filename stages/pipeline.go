package stages

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"gopkg.in/yaml.v3"
)

// RunOptions are the command-line choices of one run.
type RunOptions struct {
	// Out overrides the spec's output.dir.
	Out     string
	Workers int
	// Force replaces a directory holding a different run.
	Force bool
	// Memory overrides the spec's memory budget (0: keep).
	Memory int64
	// Against is a previous run for incremental dedup.
	Against string
	// Version is written to the manifest.
	Version    string
	OnProgress func(Progress)
	Log        func(format string, args ...any)
	// Sets are "stage.key=value" overrides applied before stages are built.
	Sets []string
	// Resume continues an interrupted run in Out from its last checkpoint.
	Resume bool
	// stopAfter cancels after that many segments (tests).
	stopAfter int
	// afterCheckpoint is called after each checkpoint (tests).
	afterCheckpoint func()
}

// RunResult is a finished run.
type RunResult struct {
	Dir      string
	Manifest *Manifest
	Runner   *Runner
}

// ApplySets applies "stage.key=value" overrides to a spec's stage params
// (the stage is named by its name or kind). An unknown stage is an error;
// an unknown key is reported when the stage is built.
func ApplySets(s *Spec, sets []string) error {
	for _, set := range sets {
		k, v, ok := strings.Cut(set, "=")
		if !ok {
			return fmt.Errorf("--set %q: want STAGE.KEY=VALUE", set)
		}
		st, key, ok := strings.Cut(k, ".")
		if !ok {
			return fmt.Errorf("--set %q: want STAGE.KEY=VALUE", set)
		}
		found := false
		for i, sp := range s.Stages {
			if sp.Name == st || sp.Kind == st {
				sp.Params.SetOverride(key, v)
				s.setConfig(i, key, v)
				found = true
			}
		}
		if !found {
			return fmt.Errorf("--set %q: the spec has no stage %q", set, st)
		}
	}
	if len(sets) > 0 {
		s.hashConfig()
	}
	return nil
}

// setConfig records an override in the plain-data config written to the
// manifest, so the manifest and config hash describe what really ran.
func (s *Spec) setConfig(stage int, key, value string) {
	m, ok := s.Config.(map[string]any)
	if !ok {
		return
	}
	list, ok := m["stages"].([]any)
	if !ok || stage >= len(list) {
		return
	}
	entry, ok := list[stage].(map[string]any)
	if !ok {
		return
	}
	var v any = value
	var parsed any
	if err := yaml.Unmarshal([]byte(value), &parsed); err == nil && parsed != nil {
		v = jsonable(parsed)
	}
	entry[key] = v
}

// RunSpec runs a loaded spec end to end: resolve inputs, prepare the run
// directory, build stages and sink, run, and write the manifest. On
// interruption the manifest is written with interrupted=true and the error
// is context.Canceled.
func RunSpec(ctx context.Context, s *Spec, opt RunOptions) (*RunResult, error) {
	if err := ApplySets(s, opt.Sets); err != nil {
		return nil, err
	}
	inputs, err := ResolveInputs(s)
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
	if err := CheckOutNotInput(out, inputs); err != nil {
		return nil, err
	}
	release, err := LockRunDir(out, opt.Log)
	if err != nil {
		return nil, err
	}
	defer release()
	tmp, err := PrepareRunDir(out, s, inputs, opt.Force, opt.Resume)
	if err != nil {
		return nil, err
	}
	abs, _ := filepath.Abs(out)
	env := Env{SpecDir: s.Dir, RunDir: abs, TempDir: tmp, MemoryBudget: s.Memory, Seed: s.Seed, Against: opt.Against}
	if opt.Memory > 0 {
		env.MemoryBudget = opt.Memory
	}
	steps, err := s.BuildStages(env)
	if err != nil {
		return nil, err
	}
	if ts, err := OutputStage(s.Output, env); err != nil {
		return nil, err
	} else if ts != nil {
		name := ts.Name()
		for _, st := range steps {
			if st.Name == name {
				name = "output_" + name // the spec also has a stage of that name
			}
		}
		steps = append(steps, Step{Name: name, Stage: ts})
	}
	sink, err := OpenSink(s.Output, env, s.Name)
	if err != nil {
		return nil, err
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	r := &Runner{Spec: s, Steps: steps, Inputs: inputs, Sink: sink, Env: env, Workers: workers,
		OnProgress: opt.OnProgress, Log: opt.Log, Resume: opt.Resume, stopAfter: opt.stopAfter,
		afterCheckpoint: opt.afterCheckpoint}
	t0 := time.Now()
	runErr := r.Run(ctx)
	if errors.Is(runErr, context.Canceled) {
		// The work directory (spills, checkpoint) stays for --resume.
		r.Interrupted = true
	} else if runErr != nil {
		if !r.started {
			return nil, runErr
		}
		if ok, from := r.CanResume(); ok {
			return nil, fmt.Errorf("%w\nthe run stopped; once the cause is fixed, `winnow run %s --out %s --resume` continues from %s", runErr, s.File, out, from)
		} else {
			return nil, fmt.Errorf("%w\nthe run stopped; --resume is not possible: %s", runErr, from)
		}
	} else {
		os.RemoveAll(tmp)
		removeStaleTemps(abs)
	}
	m := BuildManifest(opt.Version, s, r, time.Since(t0).Seconds())
	if err := WriteManifest(abs, m); err != nil {
		return nil, err
	}
	return &RunResult{Dir: abs, Manifest: m, Runner: r}, runErr
}

// OutputStage returns the per-document stage the output section implies
// (token counting when output.tokenizer is set), or nil. It is replaced by
// the shard package's tokenizer wiring.
var OutputStage = func(p *Params, env Env) (Stage, error) { return nil, nil }

// removeStaleTemps deletes temp files a crashed earlier attempt left in the
// run's directories (a finished run's own files are all renamed by now).
func removeStaleTemps(runDir string) {
	for _, sub := range []string{"ledger", "metrics", "shards", "keys"} {
		matches, _ := filepath.Glob(filepath.Join(runDir, sub, ".tmp-*"))
		for _, m := range matches {
			os.Remove(m)
		}
	}
}
