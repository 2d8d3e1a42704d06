package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/run"
)

type contamFlags struct {
	evals      []string
	fields     []string
	idField    string
	evalFormat string
	ngram      int
	minWords   int
	maxDF      int
	source     string
	format     string
	textField  string
	docID      string
	workers    int
	out        string
	asJSON     bool
	quiet      bool
}

var contamOpts contamFlags

var contamCmd = &cobra.Command{
	Use:   "contam --eval FILE... INPUT...",
	Short: "Report which eval-set items occur in a corpus, without a full run",
	Long: `Contam checks corpus files against held-out eval sets the way the
decontaminate stage does (word 13-gram overlap after Unicode NFKC, case
folding and punctuation removal; texts of 8 to 12 words must occur as a
whole, shorter ones are too short to check) and prints, per eval set, the
items checked, the items too short, the items found and the documents
affected, then every contaminated item with its documents and the
matched text. Nothing is removed.

An eval set is JSON lines or Parquet (optionally .gz or .zst), or CSV/TSV
with a header row, found from the content; plain text only with
--eval-format lines or blocks. Fields: keys, nested paths (meta.title),
lists (choices: each element a separate text) and the gold answer by an
index field (choices[label], label 0-based or a letter A-D).
--eval NAME=FILE names the set; otherwise it is named after the file. Inputs are read like "run" inputs:
files, globs, directories or "-"; jsonl, text, warc or parquet; gzip or
zstd by magic bytes.

With --out DIR, contamination.json and the ledger are kept in DIR.`,
	Example: `  winnow contam --eval evals/hull-qa.jsonl --fields question,answer raw/forum/*.jsonl.zst
  winnow contam --eval mc=evals/rigging-mc.parquet --fields 'question,choices[label]' corpus/
  winnow contam --eval qa=evals/a.jsonl.gz --eval evals/b.txt corpus/ --json`,
	Args: cobra.MinimumNArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		out := termOut(cmd.OutOrStdout())
		defer out.Flush()
		return runContam(cmd.Context(), contamOpts, args, out)
	},
}

func init() {
	f := &contamOpts
	fl := contamCmd.Flags()
	fl.StringArrayVar(&f.evals, "eval", nil, "eval set file, or NAME=FILE (repeatable; globs allowed)")
	fl.StringSliceVar(&f.fields, "fields", nil, "fields that make up an item's text, e.g. question,answer (default: every field but the id)")
	fl.StringVar(&f.idField, "id-field", "id", "eval item id field")
	fl.StringVar(&f.evalFormat, "eval-format", "auto", "eval file format: "+strings.Join(stages.EvalFormats, " | "))
	fl.IntVar(&f.ngram, "ngram", 13, "n-gram length in words")
	fl.IntVar(&f.minWords, "min-item-words", stages.DefaultMinItemWords, "texts of an item with fewer words are not matched (items with none longer are listed as too short to check)")
	fl.IntVar(&f.maxDF, "max-doc-frequency", 0, "ignore n-grams found in more than this many documents (0: none; needs a second pass)")
	fl.StringVar(&f.source, "source", "input", "source label of the inputs (used in default document ids)")
	fl.StringVar(&f.format, "format", "auto", "input format: auto | jsonl | text | warc | parquet")
	fl.StringVar(&f.textField, "text-field", "text", "JSONL field holding document text")
	fl.StringVar(&f.docID, "doc-id-field", "id", "JSONL field holding document ids")
	fl.IntVar(&f.workers, "workers", 0, "worker goroutines (default: number of cores)")
	fl.StringVar(&f.out, "out", "", "keep contamination.json and the ledger in this directory")
	fl.BoolVar(&f.asJSON, "json", false, "print the report as JSON")
	fl.BoolVarP(&f.quiet, "quiet", "q", false, "no progress line")
	contamCmd.MarkFlagRequired("eval")
	rootCmd.AddCommand(contamCmd)
}

// printDemoContamination shows the leaked items the demo's decontaminate
// stage found (nothing when the run has no contamination report).
func printDemoContamination(res *run.RunResult) error {
	path := filepath.Join(res.Dir, "contamination.json")
	if _, err := os.Stat(path); err != nil {
		return nil
	}
	r, err := stages.ReadContamReport(path)
	if err != nil {
		return err
	}
	fmt.Printf("\ncontamination (%s):\n", path)
	out := termOut(os.Stdout)
	defer out.Flush()
	return r.WriteTableN(out, demoContamItems)
}

// demoContamItems is the number of contaminated items the demo lists per
// eval set (the full list is in contamination.json).
const demoContamItems = 10

func runContam(ctx context.Context, f contamFlags, args []string, w io.Writer) error {
	if ctx == nil {
		ctx = context.Background()
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()
	if f.ngram < 1 || f.ngram > 64 {
		return fmt.Errorf("--ngram %d: want 1..64", f.ngram)
	}
	if f.minWords < 1 {
		return fmt.Errorf("--min-item-words %d: want 1 or more", f.minWords)
	}
	if f.maxDF < 0 {
		return fmt.Errorf("--max-doc-frequency %d: want 0 or more", f.maxDF)
	}
	var sets []*stages.EvalSet
	names := map[string]bool{}
	for _, e := range f.evals {
		name, path, ok := strings.Cut(e, "=")
		if !ok {
			name, path = evalName(e), e
		}
		if names[name] {
			return fmt.Errorf("--eval %s: eval set %q named twice (use NAME=FILE)", e, name)
		}
		names[name] = true
		set, err := stages.LoadEvalSet(stages.EvalSpec{Name: name, Paths: []string{path}, Fields: f.fields,
			IDField: f.idField, IDExplicit: f.idField != "id", Format: f.evalFormat})
		if err != nil {
			return err
		}
		sets = append(sets, set)
	}
	cfg := stages.DefaultDecontamConfig()
	cfg.Ngram, cfg.Action, cfg.MaxDocFrequency = f.ngram, "flag", f.maxDF
	cfg.MinItemWords = min(f.minWords, f.ngram)
	d, err := stages.NewDecontaminate("decontaminate", cfg, sets)
	if err != nil {
		return err
	}
	prog := newProgress(f.quiet)
	res, err := run.CheckContamination(ctx, args, d, run.ContamOptions{
		Read:    read.ReadOptions{Source: f.source, Format: read.Format(f.format), TextField: f.textField, IDField: f.docID},
		Workers: f.workers, Out: f.out, JSON: f.asJSON, OnProgress: prog.update, Log: prog.logf})
	prog.done()
	if err != nil {
		return err
	}
	if f.asJSON {
		_, err = w.Write(res.JSON)
	} else {
		err = d.Report().WriteTable(w)
	}
	if err != nil {
		return err
	}
	if res.Interrupted {
		return &exitError{code: 130, err: errors.New("interrupted: the report covers the documents read so far")}
	}
	if res.InternalErrors > 0 {
		return &exitError{code: exitInternal, err: fmt.Errorf("finished with %d internal error(s): the check failed on %d document(s), which the report leaves out (please report this bug)", res.InternalErrors, res.InternalErrors)}
	}
	if res.FatalInputs > 0 {
		return &exitError{code: 3, err: fmt.Errorf("finished, but %d input file(s) could not be read to the end: the report covers the documents before the break", res.FatalInputs)}
	}
	if res.ErrCount > 0 {
		fmt.Fprintf(os.Stderr, "winnow: finished; skipped %d unreadable record(s) or empty input(s)\n", res.ErrCount)
	}
	return nil
}

// evalName names an eval set after its file: "evals/hull-qa.jsonl.zst"
// is "hull-qa".
func evalName(path string) string {
	base := filepath.Base(path)
	for _, suf := range []string{".gz", ".zst", ".zstd", ".gzip"} {
		base = strings.TrimSuffix(base, suf)
	}
	if ext := filepath.Ext(base); ext != "" && ext != base {
		base = strings.TrimSuffix(base, ext)
	}
	return base
}
