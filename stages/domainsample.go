package stages

import (
	"container/heap"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/zeebo/xxh3"

	"winnow/stages/read"
)

// minDomainSample is the smallest default background: the sample holds
// max(number of examples, minDomainSample) documents before earlier
// stages and the examples thin it (common practice: a background at
// least as large as the positive set).
const minDomainSample = 1000

// bgSample says where a default background came from, for `winnow check`.
type bgSample struct {
	files    int // input files read
	skipped  int // input files that are examples (or standard input)
	broken   int // input files that stopped with an error (their first documents count)
	seen     int64
	drawn    int // documents drawn (the lowest hashes)
	upstream int // of those, dropped by earlier per-document stages
	example  int // of those, equal to an example's text
	kept     int
	sources  string // the stage's sources ("" for all)
}

func (b bgSample) String() string {
	of := "the run's inputs"
	if b.sources != "" {
		of = "the inputs of sources " + b.sources
	}
	s := fmt.Sprintf("background: a sample of %s, %d documents (the %d of %d documents in %d files with the lowest xxh3 of id and seed",
		of, b.kept, b.drawn, b.seen, b.files)
	if b.skipped > 0 {
		s += fmt.Sprintf("; %d input files skipped as examples or standard input", b.skipped)
	}
	if b.broken > 0 {
		s += fmt.Sprintf("; %d unreadable input files, read up to the error", b.broken)
	}
	return s + fmt.Sprintf("; %d dropped by earlier stages, %d equal to an example)", b.upstream, b.example)
}

// sampleCand is one drawn document: its hash, its place in the inputs
// (the tie-break) and the document.
type sampleCand struct {
	h   uint64
	seq int64
	doc *read.Doc
}

// sampleHeap is a max-heap on (h, seq): the root is the candidate the
// next lower hash replaces.
type sampleHeap []sampleCand

func (h sampleHeap) Len() int { return len(h) }
func (h sampleHeap) Less(i, j int) bool {
	if h[i].h != h[j].h {
		return h[i].h > h[j].h
	}
	return h[i].seq > h[j].seq
}
func (h sampleHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *sampleHeap) Push(x any)   { *h = append(*h, x.(sampleCand)) }
func (h *sampleHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

// sampleBackground draws the default background from the run's inputs:
// of the documents of the input files that are not examples (and, with
// `sources`, of those sources), the k whose xxh3 of id under the seed is
// lowest (ties: earlier in the inputs), at most k documents in memory.
// The drawn documents, in hash order, pass through the per-document
// stages before this one (upstream); the dropped ones and those whose
// text equals an example's are left out. The sample depends on the
// inputs, the spec and the seed only, never on the number of workers.
func sampleBackground(inputs []read.InputFile, exampleFiles []string, exampleTexts []string,
	sources map[string]bool, seed uint64, k int, upstream func(*Doc) bool) ([]string, bgSample, error) {
	info := bgSample{sources: describeSources(sources)}
	skip := map[string]bool{}
	for _, pat := range exampleFiles {
		files, err := read.ExpandPath(pat)
		if err != nil {
			return nil, info, fmt.Errorf("%s: %w", pat, err)
		}
		for _, f := range files {
			if a, err := filepath.Abs(f); err == nil {
				skip[a] = true
			}
		}
	}
	h := &sampleHeap{}
	var seq int64
	for _, in := range inputs {
		if sources != nil && !sources[in.Options.Source] {
			continue
		}
		abs, _ := filepath.Abs(in.Path)
		if in.Path == "-" || skip[abs] {
			info.skipped++
			continue
		}
		info.files++
		err := readInputDocs(in, func(d *read.Doc) {
			seq++
			info.seen++
			c := sampleCand{h: xxh3.HashStringSeed(d.ID, seed), seq: seq}
			if h.Len() < k {
				c.doc = d
				heap.Push(h, c)
			} else if c.h < (*h)[0].h {
				c.doc = d
				(*h)[0] = c
				heap.Fix(h, 0)
			}
		})
		if err != nil {
			info.broken++
		}
	}
	cands := []sampleCand(*h)
	sort.Slice(cands, func(i, j int) bool {
		if cands[i].h != cands[j].h {
			return cands[i].h < cands[j].h
		}
		return cands[i].seq < cands[j].seq
	})
	info.drawn = len(cands)
	isExample := make(map[uint64]bool, len(exampleTexts))
	for _, t := range exampleTexts {
		isExample[xxh3.HashString(t)] = true
	}
	var out []string
	for _, c := range cands {
		if isExample[xxh3.HashString(c.doc.Text)] {
			info.example++
			continue
		}
		d := DocFromRead(c.doc)
		if upstream != nil && !upstream(d) {
			info.upstream++
			continue
		}
		if isExample[xxh3.HashString(d.Text)] {
			info.example++
			continue
		}
		out = append(out, d.Text)
	}
	info.kept = len(out)
	return out, info, nil
}

// readInputDocs reads one run input with its group's read options and
// calls emit for every document (records the reader turns into issues
// only are passed over: the run records them). It returns the error that
// stopped the file, after emitting the documents before it.
func readInputDocs(in read.InputFile, emit func(*read.Doc)) error {
	f, err := read.OpenFile(in.Path)
	if err != nil {
		return err
	}
	defer f.Close()
	opt := *in.Options
	var rr read.RecordReader
	if opt.Format == read.FormatParquet || (opt.Format == read.FormatAuto && read.GuessFormat(in.Path, nil) == read.FormatParquet) {
		osf, ok := f.(*os.File)
		if !ok {
			return fmt.Errorf("%s: parquet cannot be read from standard input", in.Display)
		}
		if rr, err = read.NewParquetReader(osf, in.Display, in.Index, opt); err != nil {
			return err
		}
	} else {
		dec, err := read.Decode(f)
		if err != nil {
			return err
		}
		defer dec.Close()
		if rr, _, err = read.NewRecordReader(dec, in.Display, in.Index, opt); err != nil {
			return err
		}
	}
	for {
		rec, err := rr.Next()
		if rec.Doc != nil {
			emit(rec.Doc)
		}
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

// describeSources lists a stage's sources for messages ("" for all).
func describeSources(sources map[string]bool) string {
	var s []string
	for k := range sources {
		s = append(s, k)
	}
	sort.Strings(s)
	return strings.Join(s, ", ")
}
