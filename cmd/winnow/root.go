package main

import (
	"errors"
	"io"

	"github.com/spf13/cobra"

	"winnow/stages/termtext"
)

// version is the tool version written into every manifest.
const version = "0.1.0"

var rootCmd = &cobra.Command{
	Use:   "winnow",
	Short: "Clean, deduplicate, decontaminate and shard web text for training",
	Long: `winnow turns raw, compressed web-text shards (JSONL, plain text, WARC/WET,
Parquet; gzip or zstd) into clean, deduplicated, decontaminated,
token-counted training shards, and keeps a ledger of every document it
removed and why.

Logs and progress go to stderr, results to stdout.`,
	Example: `  winnow demo                      # generate a small corpus and run the default spec
  winnow check configs/default.yaml
  winnow run configs/default.yaml --out out/ --workers 2`,
	SilenceUsage:  true,
	SilenceErrors: true,
	Version:       version,
}

// termOut wraps a command's output so that no control character from the
// inputs (ids, file names, texts) reaches the terminal raw. Call Flush when
// done.
func termOut(w io.Writer) *termtext.Writer { return termtext.NewWriter(w) }

// exitInternal is the exit status of a run that finished with internal
// errors (a stage panicked on some documents).
const exitInternal = 4

// exitError carries a specific exit status.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

func exitCode(err error) int {
	var e *exitError
	if errors.As(err, &e) {
		return e.code
	}
	return 1
}
