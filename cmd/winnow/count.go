package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"winnow/shard"
	"winnow/stages/audit"
	"winnow/stages/run"
)

var countOpts struct {
	tokenizer string
	jsonOut   bool
	format    string
	textField string
	textMode  string
	workers   int
	perDoc    bool
}

var countCmd = &cobra.Command{
	Use:   "count FILES...",
	Short: "Count the tokens of JSONL or text files (output shards included)",
	Long: `Count reads JSONL, plain-text or WARC files (gzip or zstd detected by content;
"-" is standard input) and counts the tokens of every document with a
tokenizer: an embedded encoding (cl100k_base, o200k_base, r50k_base,
p50k_base, p50k_edit, gpt2, or a model name such as gpt-4o) or the path of a
byte-level BPE tokenizer.json. Counts equal those of the reference library
github.com/tiktoken-go/tokenizer.

It prints a table per file and, when documents carry a "source" field (as
winnow's output shards do), per source with its share of the tokens. With
--per-doc it prints {"id","tokens"} per document instead (JSON lines, in
input order, whatever --workers), ready for pandas or DuckDB.`,
	Example: `  winnow count out/shards/*.jsonl.zst
  winnow count --tokenizer o200k_base --json raw/forum/*.jsonl.gz
  winnow count --tokenizer ./my-tokenizer.json notes.txt
  winnow count --per-doc out/shards/*.jsonl.zst > tokens.jsonl`,
	Args: cobra.MinimumNArgs(1),
	RunE: runCount,
}

func init() {
	f := countCmd.Flags()
	f.StringVar(&countOpts.tokenizer, "tokenizer", "cl100k_base", "encoding name, model name or tokenizer.json path")
	f.BoolVar(&countOpts.jsonOut, "json", false, "print machine-readable JSON instead of a table")
	f.StringVar(&countOpts.format, "format", "auto", "input format: auto | jsonl | text | warc")
	f.StringVar(&countOpts.textField, "text-field", "text", "JSONL field holding the text")
	f.StringVar(&countOpts.textMode, "text-mode", "file", "plain text: file (one document per file) | blocks (per blank-line block)")
	f.IntVar(&countOpts.workers, "workers", 0, "counting goroutines (default: number of CPUs)")
	f.BoolVar(&countOpts.perDoc, "per-doc", false, `print one {"id","tokens"} JSON line per document, in input order, instead of the table`)
	rootCmd.AddCommand(countCmd)
}

// countRow and countResult are the count table (kept by stages/run).
type (
	countRow    = run.CountRow
	countResult = run.CountResult
)

func runCount(cmd *cobra.Command, args []string) error {
	tok, err := shard.Load(countOpts.tokenizer, "")
	if err != nil {
		return err
	}
	// Everything printed goes through the terminal escaper: ids and source
	// names come from the input (the --per-doc lines stay valid JSON).
	out := termOut(cmd.OutOrStdout())
	defer out.Flush()
	opts := run.CountOptions{Tokenizer: tok, Format: countOpts.format, TextField: countOpts.textField,
		TextMode: countOpts.textMode, Workers: countOpts.workers, Warn: os.Stderr}
	if countOpts.perDoc {
		perDoc := bufio.NewWriterSize(out, 64<<10)
		opts.PerDoc = perDoc
		opts.Flush = func() error {
			err := perDoc.Flush()
			if ferr := out.Flush(); err == nil {
				err = ferr
			}
			return err
		}
	}
	res, err := run.CountTokens(cmd.Context(), args, opts)
	if err != nil {
		return err
	}
	if countOpts.perDoc {
		// The lines are the output.
	} else if countOpts.jsonOut {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		if err := enc.Encode(res); err != nil {
			return err
		}
	} else {
		printCountTable(out, res)
	}
	if res.Skipped > 0 {
		fmt.Fprintf(cmd.ErrOrStderr(), "winnow count: skipped %d unreadable records (see messages above)\n", res.Skipped)
	}
	return nil
}

func printCountTable(w io.Writer, res *countResult) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "file\tdocs\tMB\ttokens\ttokens/doc\tbytes/token\t\n")
	line := func(r countRow) {
		perDoc, perTok := 0.0, 0.0
		if r.Docs > 0 {
			perDoc = float64(r.Tokens) / float64(r.Docs)
		}
		if r.Tokens > 0 {
			perTok = float64(r.Bytes) / float64(r.Tokens)
		}
		fmt.Fprintf(tw, "%s\t%s\t%.2f\t%s\t%.1f\t%.2f\t\n", r.Name, audit.Group(r.Docs), float64(r.Bytes)/1e6, audit.Group(r.Tokens), perDoc, perTok)
	}
	for _, r := range res.Files {
		line(r)
	}
	if len(res.Files) > 1 {
		line(res.Total)
	}
	tw.Flush()
	if len(res.Sources) > 0 {
		fmt.Fprintln(w)
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "source\tdocs\ttokens\tshare\t\n")
		for _, r := range res.Sources {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%.2f%%\t\n", r.Name, audit.Group(r.Docs), audit.Group(r.Tokens), 100*r.Share)
		}
		tw.Flush()
	}
	fmt.Fprintf(w, "tokenizer %s: %s tokens in %s documents\n", res.Tokenizer, audit.Group(res.Total.Tokens), audit.Group(res.Total.Docs))
}
