package run

import (
	"context"
	"errors"
	"os"
	"path/filepath"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/spec"
)

// ContamOptions configures CheckContamination.
type ContamOptions struct {
	// Read are the read options of the inputs (source, format, fields).
	Read read.ReadOptions
	// Workers is the number of worker goroutines (<= 0: number of cores).
	Workers int
	// Out, when set, keeps contamination.json and the ledger in this
	// directory; otherwise they go to a temporary directory removed on return.
	Out string
	// JSON asks for contamination.json's bytes in the result.
	JSON bool
	// OnProgress and Log are passed to the runner.
	OnProgress func(Progress)
	Log        func(format string, args ...any)
}

// ContamResult is what a contamination check found besides the report
// the stage keeps (Decontaminate.Report).
type ContamResult struct {
	// JSON is contamination.json as written (with ContamOptions.JSON).
	JSON []byte
	// Interrupted is set when the context was cancelled: the report covers
	// the documents read so far.
	Interrupted bool
	// InternalErrors, FatalInputs and ErrCount are the runner's counts.
	InternalErrors int64
	FatalInputs    int
	ErrCount       int64
}

// CheckContamination runs the decontaminate stage d alone over the inputs
// (files, globs, directories or "-") without writing output shards.
func CheckContamination(ctx context.Context, inputs []string, d *stages.Decontaminate, opts ContamOptions) (*ContamResult, error) {
	if ctx == nil {
		ctx = context.Background()
	}
	sp := &spec.Spec{Dir: ".", Inputs: []spec.InputSpec{{Paths: inputs, ReadOptions: opts.Read}}}
	resolved, err := spec.ResolveInputs(sp)
	if err != nil {
		return nil, err
	}
	tmp, err := os.MkdirTemp("", "winnow-contam-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)
	runDir := filepath.Join(tmp, "run")
	if opts.Out != "" {
		runDir = opts.Out
	}
	step := spec.Step{Name: "decontaminate"}
	if s := d.PerDocument(); s != nil {
		step.Stage = s
	} else {
		step.Global = d
	}
	r := &Runner{Spec: sp, Steps: []spec.Step{step}, Inputs: resolved, Workers: opts.Workers,
		Env: stages.Env{SpecDir: ".", RunDir: runDir, TempDir: tmp}, OnProgress: opts.OnProgress, Log: opts.Log}
	runErr := r.Run(ctx)
	if runErr != nil && !errors.Is(runErr, context.Canceled) {
		return nil, runErr
	}
	res := &ContamResult{Interrupted: errors.Is(runErr, context.Canceled),
		InternalErrors: r.InternalErrors, FatalInputs: r.FatalInputs, ErrCount: r.ErrCount}
	if opts.JSON {
		if res.JSON, err = os.ReadFile(filepath.Join(runDir, "contamination.json")); err != nil {
			return nil, err
		}
	}
	return res, nil
}
