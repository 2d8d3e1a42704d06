package main

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"sort"
	"sync"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"winnow/shard"
	"winnow/stages/audit"
	"winnow/stages/read"
	"winnow/stages/termtext"
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

// countRow is one line of the count table.
type countRow struct {
	Name   string  `json:"name"`
	Docs   int64   `json:"docs"`
	Bytes  int64   `json:"bytes"`
	Tokens int64   `json:"tokens"`
	Share  float64 `json:"share,omitempty"`
}

type countResult struct {
	Tokenizer string     `json:"tokenizer"`
	Files     []countRow `json:"files"`
	Sources   []countRow `json:"sources,omitempty"`
	Total     countRow   `json:"total"`
	Skipped   int64      `json:"skipped_records"`
}

func runCount(cmd *cobra.Command, args []string) error {
	tok, err := shard.Load(countOpts.tokenizer, "")
	if err != nil {
		return err
	}
	workers := countOpts.workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	res := countResult{Tokenizer: tok.Name(), Total: countRow{Name: "total"}}
	bySource := map[string]*countRow{}
	// Everything printed goes through the terminal escaper: ids and source
	// names come from the input (the --per-doc lines stay valid JSON).
	out := termOut(cmd.OutOrStdout())
	defer out.Flush()
	var perDoc *bufio.Writer
	var perDocW io.Writer // nil unless --per-doc (not a nil *bufio.Writer)
	if countOpts.perDoc {
		perDoc = bufio.NewWriterSize(out, 64<<10)
		perDocW = perDoc
	}
	for i, path := range args {
		row, src, skipped, err := countFile(tok, path, i, workers, perDocW)
		if perDoc != nil {
			if ferr := perDoc.Flush(); err == nil {
				err = ferr
			}
			if ferr := out.Flush(); err == nil {
				err = ferr
			}
		}
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		res.Skipped += skipped
		res.Files = append(res.Files, row)
		res.Total.Docs += row.Docs
		res.Total.Bytes += row.Bytes
		res.Total.Tokens += row.Tokens
		for s, r := range src {
			a := bySource[s]
			if a == nil {
				a = &countRow{Name: s}
				bySource[s] = a
			}
			a.Docs += r.Docs
			a.Bytes += r.Bytes
			a.Tokens += r.Tokens
		}
	}
	names := make([]string, 0, len(bySource))
	for s := range bySource {
		names = append(names, s)
	}
	sort.Strings(names)
	for _, s := range names {
		r := *bySource[s]
		if res.Total.Tokens > 0 {
			r.Share = float64(r.Tokens) / float64(res.Total.Tokens)
		}
		res.Sources = append(res.Sources, r)
	}
	if perDoc != nil {
		// The lines are the output.
	} else if countOpts.jsonOut {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		if err := enc.Encode(res); err != nil {
			return err
		}
	} else {
		printCountTable(out, &res)
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

// maxIssueLines is how many record problems per file are printed.
const maxIssueLines = 5

// countBatch is the number of documents a counting goroutine takes at once.
const countBatch = 256

type countDoc struct {
	text, source, id string
}

// countBatchJob is a batch of documents with its place in the file.
type countBatchJob struct {
	seq  int
	docs []countDoc
}

// countDocLine is one line of --per-doc.
type countDocLine struct {
	ID     string `json:"id"`
	Tokens int    `json:"tokens"`
}

// countFile counts one file's documents on workers goroutines. With
// perDoc, every document's {"id","tokens"} line is written to it in input
// order (batches finished out of order wait for the earlier ones).
func countFile(tok *shard.Tokenizer, path string, input, workers int, perDoc io.Writer) (countRow, map[string]countRow, int64, error) {
	row := countRow{Name: path}
	f, err := read.OpenFile(path)
	if err != nil {
		return row, nil, 0, err
	}
	defer f.Close()
	dec, err := read.Decode(f)
	if err != nil {
		return row, nil, 0, err
	}
	defer dec.Close()
	rr, _, err := read.NewRecordReader(dec, path, input, read.ReadOptions{Format: read.Format(countOpts.format),
		TextField: countOpts.textField, IDField: "id", TextMode: countOpts.textMode})
	if err != nil {
		return row, nil, 0, err
	}
	batches := make(chan countBatchJob, workers*2)
	type partial struct {
		tokens int64
		src    map[string]int64
	}
	type done struct {
		seq    int
		ids    []string
		counts []int
	}
	var doneCh chan done
	var printed sync.WaitGroup
	var writeErr error
	if perDoc != nil {
		doneCh = make(chan done, workers*2)
		printed.Add(1)
		go func() { // restores input order
			defer printed.Done()
			pending := map[int]done{}
			next := 0
			var line []byte
			for d := range doneCh {
				pending[d.seq] = d
				for {
					b, ok := pending[next]
					if !ok {
						break
					}
					delete(pending, next)
					next++
					for i, id := range b.ids {
						line, _ = json.Marshal(countDocLine{ID: id, Tokens: b.counts[i]})
						if _, err := perDoc.Write(append(line, '\n')); err != nil && writeErr == nil {
							writeErr = err
						}
					}
				}
			}
		}()
	}
	results := make([]partial, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			p := partial{src: map[string]int64{}}
			for b := range batches {
				var dn done
				if doneCh != nil {
					dn = done{seq: b.seq, ids: make([]string, len(b.docs)), counts: make([]int, len(b.docs))}
				}
				for i, d := range b.docs {
					n := tok.Count(d.text)
					p.tokens += int64(n)
					if d.source != "" {
						p.src[d.source] += int64(n)
					}
					if doneCh != nil {
						dn.ids[i], dn.counts[i] = d.id, n
					}
				}
				if doneCh != nil {
					doneCh <- dn
				}
			}
			results[w] = p
		}(w)
	}
	src := map[string]countRow{}
	var skipped int64
	batch := make([]countDoc, 0, countBatch)
	seq := 0
	var readErr error
	issues := 0
	for {
		rec, err := rr.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			readErr = err
			break
		}
		if rec.Issue != nil && rec.Issue.Skip && rec.Doc == nil {
			continue // a WARC record without page text: not a document, not an error
		}
		if rec.Issue != nil {
			if issues++; issues <= maxIssueLines {
				fmt.Fprintf(os.Stderr, "winnow count: %s\n", termtext.Escape(fmt.Sprint(rec.Issue)))
			}
			if rec.Doc == nil {
				skipped++
				continue
			}
		}
		d := rec.Doc
		s := metaString(d.Meta["source"])
		row.Docs++
		row.Bytes += int64(len(d.Text))
		if s != "" {
			r := src[s]
			r.Name, r.Docs, r.Bytes = s, r.Docs+1, r.Bytes+int64(len(d.Text))
			src[s] = r
		}
		batch = append(batch, countDoc{text: d.Text, source: s, id: d.ID})
		if len(batch) == countBatch {
			batches <- countBatchJob{seq: seq, docs: batch}
			seq++
			batch = make([]countDoc, 0, countBatch)
		}
	}
	if len(batch) > 0 {
		batches <- countBatchJob{seq: seq, docs: batch}
	}
	close(batches)
	wg.Wait()
	if doneCh != nil {
		close(doneCh)
		printed.Wait()
		if writeErr != nil && readErr == nil {
			readErr = writeErr
		}
	}
	if issues > maxIssueLines {
		fmt.Fprintf(os.Stderr, "winnow count: %s: %d more unreadable records not shown\n", path, issues-maxIssueLines)
	}
	for _, p := range results {
		row.Tokens += p.tokens
		for s, n := range p.src {
			r := src[s]
			r.Tokens += n
			src[s] = r
		}
	}
	if readErr != nil {
		return row, src, skipped, readErr
	}
	return row, src, skipped, nil
}

// metaString returns a meta value as a string: a string, or a raw JSON
// string kept from the input record.
func metaString(v any) string {
	switch x := v.(type) {
	case string:
		return x
	case json.Marshaler:
		b, err := x.MarshalJSON()
		if err != nil {
			return ""
		}
		var s string
		if json.Unmarshal(b, &s) != nil {
			return ""
		}
		return s
	}
	return ""
}
