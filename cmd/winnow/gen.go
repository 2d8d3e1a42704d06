package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"winnow/stages/fsio"
	"winnow/stages/synth"
)

var genOpts struct {
	out         string
	docs        int
	bytes       string
	seed        uint64
	format      string
	nearJaccard float64
	files       int
	force       bool
	jsonOut     bool
}

var genCmd = &cobra.Command{
	Use:   "gen --out DIR [--docs N | --bytes SIZE]",
	Short: "Generate a synthetic Larkspur Marine Works corpus with a truth file",
	Long: `Gen writes a synthetic corpus in the invented Larkspur Marine Works scenario:
repair manuals, forum threads, dealer pages with boilerplate, spam, pages in
German, French and Spanish, short junk, exact copies, near copies at a chosen
word 5-gram Jaccard similarity (plus some at 0.5 and 0.3), and a held-out
eval set "hull-qa" partly leaked into forum posts (verbatim, re-cased,
paraphrased). The same seed always gives byte-identical files.

Layout:
  DIR/<source>/<source>-00000.<ext>   sources manuals, forum, dealer, web
  DIR/evals/hull-qa.jsonl             {"id","question","answer"}
  DIR/truth.jsonl                     per document: kind, copy_of, jaccard, eval_items, leak...
  DIR/gen.json                        options, counts and sizes

Formats: jsonl.zst (default) and jsonl.gz hold {"id","text","url","date"}
lines; warc writes WARC/1.1 conversion records, gzip per record
(.warc.gz); txt writes one DIR/<source>/<id>.txt file per document
(documents have blank lines inside, so read txt with one document per
file). --bytes counts uncompressed serialized bytes and accepts units
(500MB, 2GiB).`,
	Example: `  winnow gen --out raw --docs 5000 --seed 7
  winnow gen --out big --bytes 500MB --files 4
  winnow gen --out warc --docs 2000 --format warc --near-jaccard 0.85`,
	Args: cobra.NoArgs,
	RunE: runGen,
}

func init() {
	f := genCmd.Flags()
	f.StringVar(&genOpts.out, "out", "", "output directory (required)")
	f.IntVar(&genOpts.docs, "docs", 0, "number of documents (default 1000 when --bytes is not set)")
	f.StringVar(&genOpts.bytes, "bytes", "", "approximate uncompressed corpus size, e.g. 500MB or 2GiB")
	f.Uint64Var(&genOpts.seed, "seed", 1, "random seed")
	f.StringVar(&genOpts.format, "format", synth.FormatJSONLZstd, "jsonl.zst, jsonl.gz, txt or warc")
	f.Float64Var(&genOpts.nearJaccard, "near-jaccard", 0.9, "word 5-gram Jaccard similarity of the main near copies")
	f.IntVar(&genOpts.files, "files", 1, "files per source")
	f.BoolVar(&genOpts.force, "force", false, "write into a non-empty directory")
	f.BoolVar(&genOpts.jsonOut, "json", false, "print the summary as JSON")
	genCmd.MarkFlagRequired("out")
	genCmd.MarkFlagsMutuallyExclusive("docs", "bytes")
	rootCmd.AddCommand(genCmd)
}

func runGen(cmd *cobra.Command, args []string) error {
	o := synth.Options{
		Dir: genOpts.out, Docs: genOpts.docs, Seed: genOpts.seed, Format: genOpts.format,
		NearJaccard: genOpts.nearJaccard, Files: genOpts.files, OmitTruthDocs: true,
	}
	if genOpts.bytes != "" {
		n, err := fsio.ParseSize(genOpts.bytes)
		if err != nil {
			return fmt.Errorf("--bytes: %w", err)
		}
		o.Bytes = n
	}
	if entries, err := os.ReadDir(o.Dir); err == nil && len(entries) > 0 && !genOpts.force {
		return fmt.Errorf("%s is not empty: choose a fresh directory or pass --force", o.Dir)
	}
	start := time.Now()
	t, err := synth.Generate(o)
	if err != nil {
		return err
	}
	secs := time.Since(start).Seconds()
	out := cmd.OutOrStdout()
	fmt.Fprintf(cmd.ErrOrStderr(), "winnow: generated %d documents, %.1f MB uncompressed in %.1fs (%.1f MB/s)\n",
		t.NumDocs, float64(t.Bytes)/1e6, secs, float64(t.Bytes)/1e6/max(secs, 1e-9))
	if genOpts.jsonOut {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		return enc.Encode(map[string]any{"dir": o.Dir, "docs": t.NumDocs, "bytes": t.Bytes, "counts": t.Counts,
			"source_bytes": t.SourceBytes, "files": t.Files, "eval": t.EvalPath, "eval_items": t.EvalItems})
	}
	tw := tabwriter.NewWriter(out, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "kind\tdocs\t")
	kinds := make([]string, 0, len(t.Counts))
	for k := range t.Counts {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	for _, k := range kinds {
		fmt.Fprintf(tw, "%s\t%d\t\n", k, t.Counts[k])
	}
	tw.Flush()
	fmt.Fprintln(out)
	for _, s := range synth.Sources {
		fmt.Fprintf(out, "%-8s %8.1f MB  %s\n", s, float64(t.SourceBytes[s])/1e6, strings.Join(t.Files[s], " "))
	}
	fmt.Fprintf(out, "eval set: %s (%d items)\ntruth:    %s\n", t.EvalPath, t.EvalItems, filepath.Join(o.Dir, "truth.jsonl"))
	return nil
}
