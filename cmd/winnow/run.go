package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"runtime/pprof"
	"sort"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"winnow/stages/fsio"
	"winnow/stages/record"
	"winnow/stages/run"
	"winnow/stages/spec"
	"winnow/stages/termtext"
)

type runFlags struct {
	out          string
	workers      int
	force        bool
	allowPartial bool
	memory       string
	against      string
	quiet        bool
	asJSON       bool
	sets         []string
	cpuProfile   string
	resume       bool
	phase        string
	task, tasks  int
}

func (f *runFlags) register(cmd *cobra.Command) {
	cmd.Flags().StringVar(&f.out, "out", "", "output run directory (default: the spec's output.dir)")
	cmd.Flags().IntVar(&f.workers, "workers", 0, "worker goroutines for per-document stages (default: number of cores)")
	cmd.Flags().BoolVar(&f.force, "force", false, "replace a directory that holds a different run")
	cmd.Flags().BoolVar(&f.allowPartial, "allow-partial", false, "exit 0 even when some input could not be read to its end")
	cmd.Flags().StringVar(&f.memory, "memory", "", "memory budget of dedup indexes before they spill to disk, e.g. 512MiB")
	cmd.Flags().StringVar(&f.against, "against", "", "previous run directory: also remove duplicates of what it kept")
	cmd.Flags().BoolVarP(&f.quiet, "quiet", "q", false, "no progress line")
	cmd.Flags().BoolVar(&f.asJSON, "json", false, "print the stage table as JSON")
	cmd.Flags().StringArrayVar(&f.sets, "set", nil, "override a stage parameter, STAGE.KEY=VALUE (repeatable)")
	cmd.Flags().BoolVar(&f.resume, "resume", false, "continue an interrupted run in --out from its last checkpoint")
	cmd.Flags().StringVar(&f.phase, "phase", "", "run one phase of a split run (see `winnow check SPEC --phases`), or \"all\": every phase in this process, resumable per unit")
	cmd.Flags().IntVar(&f.task, "task", -1, "with --phase: this task's index, from 0 (default: SLURM_ARRAY_TASK_ID - SLURM_ARRAY_TASK_MIN or JOB_COMPLETION_INDEX)")
	cmd.Flags().IntVar(&f.tasks, "tasks", -1, "with --phase: the number of tasks sharing the phase (default: SLURM_ARRAY_TASK_COUNT, or 1)")
	cmd.Flags().StringVar(&f.cpuProfile, "cpuprofile", "", "write a Go CPU profile of the run to this file (for developers)")
	cmd.Flags().MarkHidden("cpuprofile")
}

var runOpts runFlags

var runCmd = &cobra.Command{
	Use:   "run SPEC",
	Short: "Run a pipeline spec over its inputs",
	Long: `Run reads the spec's inputs, applies its stages in order and writes the run
directory: shards/, ledger/, metrics/, manifest.json (and contamination.json
when a decontaminate stage runs). Ctrl-C stops cleanly: every decision made
so far is flushed and the manifest says the run was interrupted. A run
checkpoints after each global stage (dedup) has seen all documents;
--resume continues an interrupted or crashed run from the last checkpoint,
without reading or filtering those documents again, and gives the same
bytes as a run never stopped.

A run can also be split across processes or machines sharing one
filesystem: --phase runs one phase (the list: winnow check SPEC --phases),
--task/--tasks which share of its units of work this process takes. Run
every task of a phase before the next phase starts; the run directory is
byte-identical to a single-process run whatever the number of tasks, and a
task started again redoes only the units it did not finish. See README
"Running on a cluster".

Exit status: 0 on success; 3 when some input could not be read to its end
(unless --allow-partial); 4 when a stage failed on some document (an
internal error: the run went on, the manifest lists each one); 130 when
interrupted; 1 on any other error.`,
	Example: `  winnow run configs/default.yaml --out out/ --workers 2
  winnow run spec.yaml --out /shared/run --phase read --task 3 --tasks 8   # one task of a split run
  winnow run spec.yaml --out out/ --phase all     # one process; started again, redoes only unfinished units
  winnow run spec.yaml --set quality.fewest_words=80 --force
  winnow run spec.yaml --out out/ --resume        # after Ctrl-C or a crash`,
	Args: cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		return runSpecFile(cmd.Context(), args[0], runOpts)
	},
}

func init() {
	runOpts.register(runCmd)
	rootCmd.AddCommand(runCmd)
}

func runSpecFile(ctx context.Context, path string, f runFlags) error {
	sp, err := spec.LoadSpec(path)
	if err != nil {
		return err
	}
	_, err = runLoaded(ctx, sp, f)
	return err
}

func runLoaded(ctx context.Context, sp *spec.Spec, f runFlags) (*run.RunResult, error) {
	if ctx == nil {
		ctx = context.Background()
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()
	prog := newProgress(f.quiet)
	finished := make(chan struct{})
	defer close(finished) // runs before stop
	go func() {
		select {
		case <-finished:
		case <-ctx.Done():
			select {
			case <-finished:
				return
			default:
			}
			// The first Ctrl-C stops the run cleanly; the next one ends
			// the process at once (default signal handling).
			stop()
			prog.logf("interrupted: finishing the documents already decided and writing the manifest (Ctrl-C again to stop at once)")
		}
	}()
	var mem int64
	if f.memory != "" {
		var err error
		if mem, err = fsio.ParseSize(f.memory); err != nil {
			return nil, fmt.Errorf("--memory: %w", err)
		}
	}
	if f.resume && f.phase == "" && run.IsSplitRunDir(f.out) {
		// A run with --phase all (or a split run) goes on from its units.
		f.phase, f.resume = run.PhaseAll, false
	}
	if f.phase == "" && (f.task > 0 || f.tasks > 0) {
		return nil, errors.New("--task and --tasks need --phase")
	}
	if f.cpuProfile != "" {
		pf, err := os.Create(f.cpuProfile)
		if err != nil {
			return nil, err
		}
		defer pf.Close()
		if err := pprof.StartCPUProfile(pf); err != nil {
			return nil, err
		}
		defer pprof.StopCPUProfile()
	}
	if f.phase != "" {
		prog.done()
		return nil, runPhase(ctx, sp, f, mem, prog)
	}
	res, err := run.RunSpec(ctx, sp, run.RunOptions{Out: f.out, Workers: f.workers, Force: f.force,
		Memory: mem, Against: f.against, Version: version, OnProgress: prog.update, Log: prog.logf, Sets: f.sets, Resume: f.resume})
	prog.done()
	if res == nil {
		return nil, err
	}
	out := termOut(os.Stdout)
	perr := printStageTable(out, res.Manifest, f.asJSON)
	if ferr := out.Flush(); perr == nil {
		perr = ferr
	}
	if perr != nil {
		return res, perr
	}
	if errors.Is(err, context.Canceled) {
		ok, from := res.Runner.CanResume()
		if !ok {
			return res, &exitError{code: 130, err: fmt.Errorf("interrupted: decisions so far are in %s (manifest says interrupted); --resume is not possible: %s",
				res.Dir, from)}
		}
		return res, &exitError{code: 130, err: fmt.Errorf("interrupted: decisions so far are in %s (manifest says interrupted); `winnow run %s --out %s --resume` continues from %s",
			res.Dir, sp.File, res.Dir, from)}
	}
	return res, finishMessage(res.Manifest, res.Dir, res.Runner.FatalInputs, f.allowPartial)
}

// finishMessage prints what a finished run wrote and left out, and returns
// the error that sets the exit status (internal errors 4, partial inputs
// 3 unless allowed).
func finishMessage(m *record.Manifest, dir string, fatal int, allowPartial bool) error {
	toks := "tokens not counted: no output.tokenizer"
	if m.TokensCounted() {
		toks = fmt.Sprintf("%d tokens", m.Totals.TokensOut)
	}
	recs := ""
	if m.Totals.RecordsOut != m.Totals.DocsOut {
		recs = fmt.Sprintf(" as %d records", m.Totals.RecordsOut)
	}
	fmt.Fprintf(os.Stderr, "winnow: wrote %d documents%s (%s) in %d shards to %s\n",
		m.Totals.DocsOut, recs, toks, len(m.Outputs), dir)
	for _, l := range m.LeftOut() {
		fmt.Fprintln(os.Stderr, "winnow: left out of the output:", termtext.Escape(l))
	}
	if line := skipLine(m.ReadSkips); line != "" {
		fmt.Fprintln(os.Stderr, "winnow:", line)
	}
	if why := m.EmptyReason(); why != "" {
		fmt.Fprintf(os.Stderr, "winnow: warning: %s\n", why)
	}
	if m.InternalErrors > 0 {
		// Listed before the partial-input note so the last line is about
		// the bug; its status wins over 3 and --allow-partial.
		if fatal > 0 {
			fmt.Fprintf(os.Stderr, "winnow: %d input file(s) could not be read to the end: see errors in %s/manifest.json\n", fatal, dir)
		}
		return &exitError{code: exitInternal, err: fmt.Errorf("finished with %d internal error(s): a stage failed on %d document(s), recorded with rule %s in the ledger and listed with their stacks in %s/manifest.json; every other document was processed (please report this bug)",
			m.InternalErrors, m.InternalErrors, run.RuleInternalError, dir)}
	}
	if fatal > 0 {
		msg := fmt.Errorf("finished, but %d input file(s) could not be read to the end and %d record(s) were unreadable: see errors in %s/manifest.json",
			fatal, m.ErrorCount-int64(fatal), dir)
		if allowPartial {
			fmt.Fprintln(os.Stderr, "winnow:", msg)
			return nil
		}
		return &exitError{code: 3, err: msg}
	}
	if m.ErrorCount > 0 {
		fmt.Fprintf(os.Stderr, "winnow: finished; skipped %d unreadable record(s) or empty input(s): see ledger/read.jsonl.zst\n", m.ErrorCount)
	}
	return nil
}

// skipLine sums the records passed over by rule (WARC records that hold no
// page text), rules in name order: "skipped 7 records that hold no page
// text (crawler_record 3, http_status 1, ...): see ledger/read.jsonl.zst".
func skipLine(skips map[string]int64) string {
	if len(skips) == 0 {
		return ""
	}
	rules := make([]string, 0, len(skips))
	var total int64
	for r, n := range skips {
		rules = append(rules, r)
		total += n
	}
	sort.Strings(rules)
	parts := make([]string, len(rules))
	for i, r := range rules {
		parts[i] = fmt.Sprintf("%s %d", r, skips[r])
	}
	return fmt.Sprintf("skipped %d record(s) that hold no page text (%s): see ledger/read.jsonl.zst", total, strings.Join(parts, ", "))
}

// runPhase runs one task of one phase of a split run.
func runPhase(ctx context.Context, sp *spec.Spec, f runFlags, mem int64, prog *progressLine) error {
	if f.resume {
		return errors.New("--resume is implied with --phase: a task started again skips the units it finished")
	}
	task, tasks, err := run.TaskFromEnv(f.task, f.tasks, os.Getenv)
	if err != nil {
		return err
	}
	res, err := run.RunPhase(ctx, sp, run.PhaseOptions{RunOptions: run.RunOptions{Out: f.out, Workers: f.workers, Force: f.force,
		Memory: mem, Against: f.against, Version: version, Log: prog.logf, Sets: f.sets}, Phase: f.phase, Task: task, Tasks: tasks})
	if errors.Is(err, context.Canceled) {
		return &exitError{code: 130, err: errors.New("interrupted: the units finished so far are kept; the same command goes on from there")}
	}
	if err != nil {
		return err
	}
	if res.Manifest == nil {
		fmt.Fprintf(os.Stderr, "winnow: phase %s, task %d of %d: ran units %v, %d already done; took %d units of other tasks %v\n",
			f.phase, task, tasks, res.Units, len(res.Skipped), len(res.Stolen), res.Stolen)
		return nil
	}
	m := res.Manifest
	out := termOut(os.Stdout)
	perr := printStageTable(out, m, f.asJSON)
	if ferr := out.Flush(); perr == nil {
		perr = ferr
	}
	if perr != nil {
		return perr
	}
	var fatal int
	for _, e := range m.Errors {
		if e.Fatal {
			fatal++
		}
	}
	return finishMessage(m, res.Dir, fatal, f.allowPartial)
}
