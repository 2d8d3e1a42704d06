package run

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"runtime"
	"sort"
	"sync"

	"winnow/shard"
	"winnow/stages/read"
	"winnow/stages/termtext"
)

// CountOptions configures CountTokens.
type CountOptions struct {
	// Tokenizer counts the tokens of every document.
	Tokenizer *shard.Tokenizer
	// Format, TextField and TextMode are the read options of the files.
	Format, TextField, TextMode string
	// Workers is the number of counting goroutines (<= 0: number of CPUs).
	Workers int
	// PerDoc, when set, receives one {"id","tokens"} JSON line per
	// document, in input order whatever Workers.
	PerDoc io.Writer
	// Flush, when set with PerDoc, is called after every file.
	Flush func() error
	// Warn receives record problems, one line each (nil: dropped).
	Warn io.Writer
}

// CountRow is one line of the count table.
type CountRow struct {
	Name   string  `json:"name"`
	Docs   int64   `json:"docs"`
	Bytes  int64   `json:"bytes"`
	Tokens int64   `json:"tokens"`
	Share  float64 `json:"share,omitempty"`
}

// CountResult holds the counts per file, per source and in total.
type CountResult struct {
	Tokenizer string     `json:"tokenizer"`
	Files     []CountRow `json:"files"`
	Sources   []CountRow `json:"sources,omitempty"`
	Total     CountRow   `json:"total"`
	Skipped   int64      `json:"skipped_records"`
}

// CountTokens counts the documents, bytes and tokens of files (JSONL, text
// or WARC; "-" is standard input), per file and per "source" field. An
// error names the file it happened in.
func CountTokens(ctx context.Context, files []string, opts CountOptions) (*CountResult, error) {
	if ctx == nil {
		ctx = context.Background()
	}
	if opts.Tokenizer == nil {
		return nil, errors.New("count: no tokenizer")
	}
	if opts.Workers <= 0 {
		opts.Workers = runtime.NumCPU()
	}
	if opts.Warn == nil {
		opts.Warn = io.Discard
	}
	res := &CountResult{Tokenizer: opts.Tokenizer.Name(), Total: CountRow{Name: "total"}}
	bySource := map[string]*CountRow{}
	for i, path := range files {
		row, src, skipped, err := countFile(ctx, path, i, &opts)
		if opts.PerDoc != nil && opts.Flush != nil {
			if ferr := opts.Flush(); err == nil {
				err = ferr
			}
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		res.Skipped += skipped
		res.Files = append(res.Files, row)
		res.Total.Docs += row.Docs
		res.Total.Bytes += row.Bytes
		res.Total.Tokens += row.Tokens
		for s, r := range src {
			a := bySource[s]
			if a == nil {
				a = &CountRow{Name: s}
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
	return res, nil
}

// maxCountIssueLines is how many record problems per file are reported.
const maxCountIssueLines = 5

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

// countDocLine is one per-document line.
type countDocLine struct {
	ID     string `json:"id"`
	Tokens int    `json:"tokens"`
}

// countFile counts one file's documents on opts.Workers goroutines. With
// opts.PerDoc, every document's {"id","tokens"} line is written to it in
// input order (batches finished out of order wait for the earlier ones).
func countFile(ctx context.Context, path string, input int, opts *CountOptions) (CountRow, map[string]CountRow, int64, error) {
	tok, workers, perDoc := opts.Tokenizer, opts.Workers, opts.PerDoc
	row := CountRow{Name: path}
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
	rr, _, err := read.NewRecordReader(dec, path, input, read.ReadOptions{Format: read.Format(opts.Format),
		TextField: opts.TextField, IDField: "id", TextMode: opts.TextMode})
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
			var line []byte
			inOrder(doneCh, func(d done) int64 { return int64(d.seq) }, func(b done) {
				for i, id := range b.ids {
					line, _ = json.Marshal(countDocLine{ID: id, Tokens: b.counts[i]})
					if _, err := perDoc.Write(append(line, '\n')); err != nil && writeErr == nil {
						writeErr = err
					}
				}
			})
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
	src := map[string]CountRow{}
	var skipped int64
	batch := make([]countDoc, 0, countBatch)
	seq := 0
	var readErr error
	issues := 0
	for n := 0; ; n++ {
		if n%countBatch == 0 {
			if err := ctx.Err(); err != nil {
				readErr = err
				break
			}
		}
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
			if issues++; issues <= maxCountIssueLines {
				fmt.Fprintf(opts.Warn, "winnow count: %s\n", termtext.Escape(fmt.Sprint(rec.Issue)))
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
	if issues > maxCountIssueLines {
		fmt.Fprintf(opts.Warn, "winnow count: %s: %d more unreadable records not shown\n", path, issues-maxCountIssueLines)
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
