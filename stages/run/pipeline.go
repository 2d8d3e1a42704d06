// Package run ties a run together: it resolves a spec's inputs, prepares
// the run directory, builds the stages and the sink, runs the stages over
// the documents in segments (spilling between global stages, checkpointing
// for --resume, reporting progress) and writes the manifest.
package run

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"time"

	"winnow/shard"
	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
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
	Manifest *record.Manifest
	Runner   *Runner
}

// RunSpec runs a loaded spec end to end: resolve inputs, prepare the run
// directory, build stages and sink, run, and write the manifest. On
// interruption the manifest is written with interrupted=true and the error
// is context.Canceled.
func RunSpec(ctx context.Context, s *spec.Spec, opt RunOptions) (*RunResult, error) {
	inputs, out, err := prepareSpec(s, opt)
	if err != nil {
		return nil, err
	}
	release, err := record.LockRunDir(out, opt.Log)
	if err != nil {
		return nil, err
	}
	defer release()
	tmp, err := record.PrepareRunDir(out, s.ConfigHash, inputs, opt.Force, opt.Resume)
	if err != nil {
		return nil, err
	}
	abs, _ := filepath.Abs(out)
	env := stages.Env{SpecDir: s.Dir, RunDir: abs, TempDir: tmp, MemoryBudget: s.Memory, Seed: s.Seed, Against: opt.Against,
		Inputs: func() ([]read.InputFile, error) { return inputs, nil }}
	if opt.Memory > 0 {
		env.MemoryBudget = opt.Memory
	}
	steps, err := s.BuildStages(env)
	if err != nil {
		return nil, err
	}
	if ts, err := record.OutputStage(s.Output, env); err != nil {
		return nil, err
	} else if ts != nil {
		name := ts.Name()
		for _, st := range steps {
			if st.Name == name {
				name = "output_" + name // the spec also has a stage of that name
			}
		}
		steps = append(steps, spec.Step{Name: name, Stage: ts})
	}
	sink, err := record.OpenSink(s.Output, env, s.Name)
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
	if r.Output != nil {
		if mr, ok := r.Output.Mix.(*shard.MixReport); ok && len(mr.Missing) > 0 {
			r.logf("warning: mix: %s", mr.Note)
		}
	}
	m := buildManifest(opt.Version, s, r, time.Since(t0).Seconds())
	if err := record.WriteManifest(abs, m); err != nil {
		return nil, err
	}
	return &RunResult{Dir: abs, Manifest: m, Runner: r}, runErr
}

// prepareSpec applies opt's --set overrides, resolves the inputs and
// chooses the output directory (refusing one among the inputs).
func prepareSpec(s *spec.Spec, opt RunOptions) ([]read.InputFile, string, error) {
	if err := spec.ApplySets(s, opt.Sets); err != nil {
		return nil, "", err
	}
	inputs, err := spec.ResolveInputs(s)
	if err != nil {
		return nil, "", err
	}
	out := opt.Out
	if out == "" {
		out = s.OutputDir
	}
	if out == "" {
		return nil, "", errors.New("no output directory: set output.dir in the spec or pass --out")
	}
	if err := record.CheckOutNotInput(out, inputs); err != nil {
		return nil, "", err
	}
	return inputs, out, nil
}

// removeStaleTemps deletes temp files a crashed earlier attempt left in the
// run's directories (a finished run's own files are all renamed by now).
func removeStaleTemps(runDir string) {
	for _, sub := range []string{"", "ledger", "metrics", "shards", "keys"} { // "": manifest, contamination.json
		matches, _ := filepath.Glob(filepath.Join(runDir, sub, ".tmp-*"))
		for _, m := range matches {
			os.Remove(m)
		}
	}
}
