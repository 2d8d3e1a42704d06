package shard

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strconv"

	"winnow/stages/jsonl"

	"github.com/zeebo/xxh3"
)

// Doc is one surviving document handed to a Builder.
type Doc struct {
	ID, Text, Source string
	File             string
	Line             int64
	// Tokens is the document's count by the builder's tokenizer; when 0
	// and the text is not empty the builder counts it.
	Tokens int
	Meta   map[string]any
}

// Options configures a Builder. Zero values mean the defaults noted.
type Options struct {
	// Dir receives the shards (OUT/shards); report paths are relative to
	// its parent.
	Dir string
	// Name prefixes shard files: <name>-00000.jsonl.zst.
	Name string
	// Tokenizer counts tokens; nil shards by bytes and allows no mix.
	Tokenizer *Tokenizer
	// ShardTokens is the target tokens per shard (default 1,000,000).
	ShardTokens int64
	// ShardBytes is the uncompressed bytes per shard without a tokenizer
	// (default 256 MiB).
	ShardBytes int64
	// SplitTokens: longer documents are split at paragraph boundaries
	// before mixing (default ShardTokens/100 with a mix, ShardTokens
	// without).
	SplitTokens int64
	// Mix gives target token shares by source (nil: input order, all
	// sources).
	Mix map[string]float64
	// Shuffle orders the documents of an unmixed output by a keyed hash
	// of their ids (with Seed) instead of input order, so every shard
	// holds every source; pieces of a split document stay together.
	// Needs a tokenizer (ignored with a mix, which already interleaves).
	Shuffle bool
	// Parts: the builder takes one part of the documents and is ended
	// with SavePart (written later in ranges: WriteRanges); with a
	// tokenizer it spills even without a mix or a shuffle.
	Parts bool
	// BudgetTokens caps the total output (0: no cap).
	BudgetTokens int64
	// MaxEpochs bounds up-sampling by repetition (default 1: none).
	MaxEpochs int
	// TokenFiles also writes flat token-id files per shard.
	TokenFiles bool
	// MetaKeys lists the meta keys written; nil writes all.
	MetaKeys []string
	// Seed keys the document hash that orders the mix.
	Seed uint64
	// TempDir holds the spill and reorder files of a mix (removed at
	// Close); default <Dir>/../.work.
	TempDir string
	// MemoryBudget bounds the documents held at once while reordering
	// (default 512 MiB).
	MemoryBudget int64
}

// Defaults.
const (
	DefaultShardTokens = 1_000_000
	DefaultShardBytes  = 256 << 20
	// defaultSplitShare: with a mix, documents are split into pieces of at
	// most 1% of a shard, since one piece can move a shard's source share
	// by its own size; 1% keeps the ±2-point balance reachable.
	defaultSplitShare = 100
	defaultMemory     = 512 << 20
	// maxBuckets bounds the reorder files open at once.
	maxBuckets = 256
)

// Split records a document the builder cut into pieces (a ledger edit).
type Split struct {
	Doc, Source, File string
	Line              int64
	// Rule is split_paragraphs, split_lines, split_words or split_chars:
	// the finest boundary the cut needed.
	Rule string
	// Reason is "long_document" (longer than split_tokens, cut before
	// mixing) or "shard_boundary" (cut to end a shard within ±1%).
	Reason string
	Pieces []string
	Tokens int
	// At orders splits as one Builder writing in input order records
	// them: the output position of a shard_boundary cut, the input
	// position of the last piece of a long_document split.
	At int `json:"at"`
}

// Report is what Close returns.
type Report struct {
	Files  []File
	Mix    *MixReport
	Splits []Split
	// Docs counts the lines written (records: a split or repeated
	// document is several).
	Docs   int64
	Tokens int64
	// DocsWritten counts the documents Add took of which at least one
	// piece was written; TextBytes sums the text bytes of the written
	// lines.
	DocsWritten int64
	TextBytes   int64
	// BudgetLeftOut counts the documents an output written in input order
	// left out once budget_tokens was reached (each also gets a LeftOut
	// call, made from Add, when SetLeftOut was called before).
	BudgetLeftOut int64
}

// LeftOut is a document that passed every stage but that the mix placed
// nowhere (none of its pieces), or, when Pieces is set, only in part: its
// source had more tokens than its share needed. Tokens and Bytes are those
// of the pieces left out.
type LeftOut struct {
	Doc, Source, File string
	Line              int64
	Tokens            int
	Bytes             int
	// Pieces are the ids of the pieces left out of a document of which
	// other pieces were written; nil when the whole document is left out.
	Pieces []string
	// Reason is why its source lost documents, in words (the mix
	// report's left_out_reason, or the budget of a shuffled output).
	Reason string
	// Part is the saved part the document came from (WriteRanges; 0 for
	// one Builder).
	Part int
}

// SetLeftOut makes Close (or, for an output written in input order with
// budget_tokens, Add) call fn, in input order, for each document the
// mix (or a shuffled output's token budget) leaves out, so the run can
// record it (bounded memory: nothing is kept). It has no effect on an
// output written in input order.
func (b *Builder) SetLeftOut(fn func(LeftOut) error) { b.leftOut = fn }

// Builder writes a run's output shards. Without a tokenizer it streams
// documents into shards cut by bytes; with one and no mix it streams them
// in input order, ending shards at multiples of shard_tokens; with a mix it
// spills documents in Add and selects, orders and writes them in Close.
type Builder struct {
	opt  Options
	tok  *Tokenizer
	keep func(string) bool
	w    *shardWriter

	spill    *spillWriter  // mix mode only
	stream   *streamCutter // in-order token mode
	asm      *assembler
	units    []unit
	srcIdx   map[string]uint16
	srcNames []string
	splits   []Split
	leftOut  func(LeftOut) error
	leftWhy  map[string]string // source -> reason its documents are left out
	raw      int64             // uncompressed bytes of the spilled records
	partEnd  []int             // ranges: the end of each part in units
	nput     int               // records put (pieces count one each)
	line     []byte
	closed   bool

	docsOut    int64 // documents with at least one piece written
	budgetLeft int64 // documents the in-order budget left out
	pieceOut   bool  // a piece of the current document was written (in-order mode)
}

// withDefaults validates opt and fills in its defaults.
func withDefaults(opt Options) (Options, error) {
	if opt.ShardTokens <= 0 {
		opt.ShardTokens = DefaultShardTokens
	}
	if opt.ShardBytes <= 0 {
		opt.ShardBytes = DefaultShardBytes
	}
	if opt.MaxEpochs <= 0 {
		opt.MaxEpochs = 1
	}
	if opt.MemoryBudget <= 0 {
		opt.MemoryBudget = defaultMemory
	}
	if opt.Tokenizer == nil && (opt.Mix != nil || opt.BudgetTokens > 0 || opt.TokenFiles || opt.Shuffle) {
		return opt, errors.New("mix, shuffle, budget_tokens and token_files need output.tokenizer")
	}
	if opt.SplitTokens <= 0 {
		opt.SplitTokens = opt.ShardTokens
		if opt.Mix != nil {
			opt.SplitTokens = max(1, opt.ShardTokens/defaultSplitShare)
		}
	}
	if opt.SplitTokens > opt.ShardTokens {
		return opt, fmt.Errorf("split_tokens %d is larger than shard_tokens %d", opt.SplitTokens, opt.ShardTokens)
	}
	if opt.Name == "" {
		opt.Name = "shard"
	}
	return opt, nil
}

// NewBuilder validates opt and prepares the output directory.
func NewBuilder(opt Options) (*Builder, error) {
	opt, err := withDefaults(opt)
	if err != nil {
		return nil, err
	}
	b := &Builder{opt: opt, tok: opt.Tokenizer, srcIdx: map[string]uint16{}}
	if opt.MetaKeys != nil {
		set := map[string]bool{}
		for _, k := range opt.MetaKeys {
			set[k] = true
		}
		b.keep = func(k string) bool { return set[k] }
	}
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("output: %w", err)
	}
	b.w = newShardWriter(opt.Dir, opt.Name, b.tok, opt.TokenFiles)
	if b.tok != nil {
		b.asm = &assembler{b: b, w: b.w, splits: &b.splits, tol: int(opt.ShardTokens / cutTolerance)}
	}
	if b.tok != nil && opt.Mix == nil && !opt.Shuffle && !opt.Parts {
		b.stream = &streamCutter{shardTokens: opt.ShardTokens, budget: opt.BudgetTokens}
	}
	if b.tok != nil && (opt.Mix != nil || opt.Shuffle || opt.Parts) {
		tmp := opt.TempDir
		if tmp == "" {
			tmp = filepath.Join(filepath.Dir(opt.Dir), ".work")
		}
		b.opt.TempDir = tmp
		s, err := createSpill(tmp, "output-spill-*.s2")
		if err != nil {
			return nil, err
		}
		b.spill = s
	}
	return b, nil
}

// Add takes one surviving document. Documents arrive in input order.
func (b *Builder) Add(d *Doc) (err error) {
	if b.closed {
		return errors.New("output: Add after Close")
	}
	meta := jsonl.AppendMeta(nil, d.Meta, b.keep)
	if b.tok == nil {
		b.line = appendLineMeta(b.line[:0], d.ID, d.Text, d.Source, d.Tokens, meta)
		if err := b.w.write(b.line, d.ID, d.Source, d.Text, d.Tokens); err != nil {
			return err
		}
		b.docsOut++
		if b.w.rawBytes() >= b.opt.ShardBytes {
			return b.w.finish()
		}
		return nil
	}
	si, ok := b.srcIdx[d.Source]
	if !ok {
		if len(b.srcNames) >= 1<<16-1 {
			return fmt.Errorf("output: more than %d sources", 1<<16-1)
		}
		si = uint16(len(b.srcNames))
		b.srcIdx[d.Source] = si
		b.srcNames = append(b.srcNames, d.Source)
	}
	tokens := d.Tokens
	if tokens <= 0 && d.Text != "" {
		tokens = b.tok.Count(d.Text)
	}
	h := xxh3.HashStringSeed(d.ID, b.opt.Seed)
	rec := record{file: d.File, line: d.Line, id: d.ID, source: d.Source, text: d.Text, meta: meta, tokens: tokens}
	b.pieceOut = false
	if b.stream != nil {
		defer func() {
			if b.pieceOut {
				b.docsOut++
				return
			}
			b.budgetLeft++
			if err == nil && b.leftOut != nil {
				err = b.leftOut(LeftOut{Doc: d.ID, Source: d.Source, File: d.File, Line: d.Line, Tokens: tokens, Bytes: len(d.Text),
					Reason: fmt.Sprintf("total capped at budget_tokens %d", b.opt.BudgetTokens)})
			}
		}()
	}
	if int64(tokens) <= b.opt.SplitTokens {
		return b.put(&rec, h, si, 0)
	}
	pieces, level := packPieces(b.tok, d.Text, int(b.opt.SplitTokens))
	sp := Split{Doc: d.ID, Source: d.Source, File: d.File, Line: d.Line, Rule: levelRule[level], Reason: "long_document", Tokens: tokens}
	for i, p := range pieces {
		pr := rec
		pr.id = d.ID + "#" + strconv.Itoa(i+1)
		pr.text = p
		pr.tokens = b.tok.Count(p)
		pr.original, pr.piece, pr.total = d.ID, i+1, len(pieces)
		sp.Pieces = append(sp.Pieces, pr.id)
		if err := b.put(&pr, h, si, min(i+1, 1<<16-1)); err != nil {
			return err
		}
	}
	if len(pieces) > 1 {
		sp.At = b.nput - 1
		b.splits = append(b.splits, sp)
	}
	return nil
}

func (b *Builder) put(r *record, h uint64, si uint16, piece int) error {
	b.nput++
	if b.stream != nil {
		err := b.stream.add(b.asm, r)
		if !b.stream.full {
			b.pieceOut = true
		}
		return err
	}
	if r.tokens >= 1<<32 {
		return fmt.Errorf("output: document %s has %d tokens", r.id, r.tokens)
	}
	if len(b.units) >= 1<<32-1 {
		return errors.New("output: too many documents")
	}
	b.units = append(b.units, unit{hash: h, tokens: uint32(r.tokens), src: si, piece: uint16(piece)})
	return b.spill.put(r, false)
}

// appendLineMeta is jsonl.AppendDocLine with the meta tail already encoded.
func appendLineMeta(b []byte, id, text, source string, tokens int, meta []byte) []byte {
	b = jsonl.AppendDocLine(b, id, text, source, tokens, nil, nil)
	b = b[:len(b)-2] // drop "}\n"
	b = append(b, meta...)
	return append(b, '}', '\n')
}

// Close writes every shard and reports them.
func (b *Builder) Close() (*Report, error) {
	if b.closed {
		return nil, errors.New("output: closed twice")
	}
	b.closed = true
	if b.tok == nil {
		if err := b.w.finish(); err != nil {
			return nil, err
		}
		return b.report(nil), nil
	}
	if b.stream != nil {
		if err := b.w.finish(); err != nil {
			return nil, err
		}
		return b.report(nil), nil
	}
	defer b.spill.remove()
	if err := b.spill.close(); err != nil {
		return nil, err
	}
	if len(b.units) == 0 {
		// Every document was removed before the output: there is nothing
		// to mix or shuffle, and no shard to write. The run still ends
		// with its manifest, which says where the documents went.
		if err := b.w.finish(); err != nil {
			return nil, err
		}
		return b.report(b.emptyMix()), nil
	}
	order, mix, err := b.plan()
	if err != nil {
		return nil, err
	}
	b.raw = b.spill.raw
	win := window{lo: 0, hi: len(order), cuts: planCuts(slotTokens(b.units, order), b.opt.ShardTokens)}
	err = b.writeReordered(b.asm, reorder{order: order, wins: []window{win}, files: []string{b.spill.f.Name()}, full: true})
	if err == nil {
		err = b.w.finish()
	}
	if err != nil {
		b.w.abort()
		return nil, err
	}
	return b.report(mix), nil
}

// emptyMix is the mix report of an output no document reached (nil
// without a mix).
func (b *Builder) emptyMix() *MixReport {
	if b.opt.Mix == nil {
		return nil
	}
	return &MixReport{Mode: "empty", Note: "no document reached the output: nothing to mix", MaxEpochs: b.opt.MaxEpochs,
		BudgetTokens: b.opt.BudgetTokens, Sources: []MixSource{}}
}

// plan orders the output positions of a mix or a shuffle and notes why
// each source loses documents.
func (b *Builder) plan() ([]slot, *MixReport, error) {
	var order []slot
	var mix *MixReport
	switch {
	case b.opt.Mix != nil:
		var err error
		order, mix, err = planMix(b.units, b.srcNames, b.opt.Mix, b.opt.BudgetTokens, b.opt.MaxEpochs)
		if err != nil {
			return nil, nil, fmt.Errorf("output: %w", err)
		}
	case b.opt.Shuffle:
		order = planShuffle(b.units, b.opt.BudgetTokens)
	default:
		order = planInOrder(b.units, b.opt.BudgetTokens)
	}
	b.leftWhy = map[string]string{}
	if mix != nil {
		for _, s := range mix.Sources {
			b.leftWhy[s.Source] = s.LeftOutWhy
		}
	} else if b.opt.BudgetTokens > 0 {
		for _, src := range b.srcNames {
			b.leftWhy[src] = fmt.Sprintf("total capped at budget_tokens %d", b.opt.BudgetTokens)
		}
	}
	return order, mix, nil
}

func (b *Builder) report(mix *MixReport) *Report {
	r := &Report{Files: b.w.files, Mix: mix, Splits: b.splits, DocsWritten: b.docsOut, TextBytes: b.w.textBytes,
		BudgetLeftOut: b.budgetLeft}
	for _, f := range r.Files {
		r.Docs += f.Docs
		r.Tokens += f.Tokens
	}
	return r
}

// Abort removes unfinished files.
func (b *Builder) Abort() {
	b.w.abort()
	if b.spill != nil {
		b.spill.remove()
	}
}

// window is a range of output positions [lo, hi) written as whole
// shards, with the cuts that fall inside it (ends of shards within the
// range; the range ends the last one).
type window struct {
	lo, hi int
	cuts   []cut
}

// reorder is one writing of planned output positions: the windows to
// write, the spill files holding every unit's record in unit order, and
// what to do as each window starts and ends.
type reorder struct {
	order []slot
	wins  []window
	files []string
	// full reads every record and reports left-out documents and
	// docsOut; otherwise records without a position in a window are
	// skipped unread.
	full  bool
	start func(i int) error // before window i's first record
	end   func(i int) error // after its last
}

// writeReordered writes the records of the windows in output order. The
// windows' positions are laid end to end ("compact" positions) and cut
// into contiguous groups of at most half the memory budget; one pass
// over the spills sends each record to the bucket file of each group that
// holds one of its positions (a repeated document has several), then each
// group is read, placed by position and written. With one group the
// records stay in memory.
func (b *Builder) writeReordered(a *assembler, ro reorder) error {
	order := ro.order
	// Positions of each unit, in CSR form.
	start := make([]uint32, len(b.units)+1)
	for _, s := range order {
		start[s.unit+1]++
	}
	for i := 1; i < len(start); i++ {
		start[i] += start[i-1]
	}
	pos := make([]uint32, len(order))
	fill := append([]uint32(nil), start[:len(b.units)]...)
	for p, s := range order {
		pos[fill[s.unit]] = uint32(p)
		fill[s.unit]++
	}
	fill = nil
	// Compact positions: window i's positions follow window i-1's.
	off := make([]int, len(ro.wins)+1)
	for i, w := range ro.wins {
		off[i+1] = off[i] + w.hi - w.lo
	}
	compact := func(p int) int {
		i := sort.Search(len(ro.wins), func(i int) bool { return ro.wins[i].hi > p })
		if i == len(ro.wins) || p < ro.wins[i].lo {
			return -1
		}
		return off[i] + p - ro.wins[i].lo
	}
	// Group boundaries (compact) by estimated bytes.
	var totalTok int64
	for _, u := range b.units {
		totalTok += int64(u.tokens)
	}
	bytesPerTok := 4.0
	if totalTok > 0 {
		bytesPerTok = float64(b.raw) / float64(totalTok)
	}
	groupBytes := float64(b.opt.MemoryBudget / 2)
	var outTok int64
	for _, w := range ro.wins {
		for p := w.lo; p < w.hi; p++ {
			outTok += int64(b.units[order[p].unit].tokens)
		}
	}
	if g := float64(outTok) * bytesPerTok / groupBytes; g > maxBuckets {
		groupBytes = float64(outTok) * bytesPerTok / maxBuckets
	}
	groupStart := []int{0}
	acc := 0.0
	for i, w := range ro.wins {
		for p := w.lo; p < w.hi; p++ {
			tk := float64(b.units[order[p].unit].tokens)*bytesPerTok + 64
			cp := off[i] + p - w.lo
			acc += tk
			if acc > groupBytes && cp > groupStart[len(groupStart)-1] {
				groupStart = append(groupStart, cp)
				acc = tk
			}
		}
	}
	total := off[len(ro.wins)]
	groupEnd := func(g int) int {
		if g+1 < len(groupStart) {
			return groupStart[g+1]
		}
		return total
	}
	groupOf := func(c int) int { return sort.SearchInts(groupStart, c+1) - 1 }

	if total == 0 && !ro.full {
		// Nothing to write here (empty ranges): no need to read.
		return b.emptyWindows(ro)
	}
	r, err := openSpills(ro.files)
	if err != nil {
		return err
	}
	defer r.close()
	single := len(groupStart) == 1
	// Every output position is held by exactly one record, so a group's
	// records are placed at their positions directly.
	var mem []record
	if single {
		mem = make([]record, total)
	}
	var buckets []*spillWriter
	defer func() {
		for _, w := range buckets {
			if w != nil {
				w.remove()
			}
		}
	}()
	if !single {
		buckets = make([]*spillWriter, len(groupStart))
		for g := range buckets {
			w, err := createSpill(b.opt.TempDir, fmt.Sprintf("output-bucket-%03d-*.zst", g))
			if err != nil {
				return err
			}
			buckets[g] = w
		}
	}
	var rec record
	// A document's units (its pieces) are consecutive in the spill; it is
	// left out when none of them has a position, and partly left out when
	// some of its pieces have none.
	var cur, part LeftOut
	curUsed, curOpen := false, false
	curLast := 0 // unit index of the document's last piece so far
	inOrder := b.opt.Mix == nil && !b.opt.Shuffle
	si := 0 // next long_document split (input order), for in-order output
	flushDoc := func() error {
		if curOpen && curUsed {
			b.docsOut++
		}
		if inOrder && curOpen {
			// As a Builder writing in input order reports them: a
			// document none of whose pieces was written, with its whole
			// count; a document written in part is not reported.
			curOpen = false
			if curUsed {
				return nil
			}
			b.budgetLeft++
			for si < len(b.splits) && b.splits[si].At < curLast {
				si++
			}
			if si < len(b.splits) && b.splits[si].At == curLast && b.splits[si].Doc == cur.Doc {
				cur.Tokens = b.splits[si].Tokens
			}
			if b.leftOut == nil {
				return nil
			}
			return b.leftOut(cur)
		}
		switch {
		case !curOpen || b.leftOut == nil:
		case !curUsed:
			if err := b.leftOut(cur); err != nil {
				return err
			}
		case len(part.Pieces) > 0:
			if err := b.leftOut(part); err != nil {
				return err
			}
		}
		curOpen = false
		return nil
	}
	for ui := 0; ui < len(b.units); ui++ {
		if !ro.full {
			need := false
			for _, p := range pos[start[ui]:start[ui+1]] {
				if compact(int(p)) >= 0 {
					need = true
					break
				}
			}
			if !need {
				if err := r.skip(); err != nil {
					return fmt.Errorf("output: reading spill: %w", err)
				}
				continue
			}
		}
		if err := r.next(&rec, false); err != nil {
			return fmt.Errorf("output: reading spill: %w", err)
		}
		if ro.full {
			doc := rec.id
			if rec.original != "" {
				doc = rec.original
			}
			if !curOpen || rec.original == "" || rec.piece <= 1 || doc != cur.Doc {
				if err := flushDoc(); err != nil {
					return err
				}
				cur = LeftOut{Doc: doc, Source: rec.source, File: rec.file, Line: rec.line, Reason: b.leftWhy[rec.source], Part: b.partOf(ui)}
				part = cur
				curUsed, curOpen = false, true
			}
			curLast = ui
			cur.Tokens += rec.tokens
			cur.Bytes += len(rec.text)
			if start[ui+1] > start[ui] {
				curUsed = true
			} else if rec.original != "" {
				part.Tokens += rec.tokens
				part.Bytes += len(rec.text)
				part.Pieces = append(part.Pieces, rec.id)
			}
		}
		for _, p := range pos[start[ui]:start[ui+1]] {
			c := compact(int(p))
			if c < 0 {
				continue
			}
			rec.pos = uint64(c)
			if single {
				mem[c] = rec
				continue
			}
			if err := buckets[groupOf(c)].put(&rec, true); err != nil {
				return err
			}
		}
	}
	if ro.full {
		if err := flushDoc(); err != nil {
			return err
		}
	}
	// Assembly, window by window in compact order.
	wi := -1
	advance := func(c int) error {
		for wi < len(ro.wins)-1 && (wi < 0 || c >= off[wi+1]) {
			if wi >= 0 && ro.end != nil {
				if err := ro.end(wi); err != nil {
					return err
				}
			}
			wi++
			a.cuts, a.next = ro.wins[wi].cuts, 0
			if ro.start != nil {
				if err := ro.start(wi); err != nil {
					return err
				}
			}
		}
		return nil
	}
	place := func(recs []record, base int) error {
		for i := range recs {
			c := base + i
			if err := advance(c); err != nil {
				return err
			}
			if err := a.add(ro.wins[wi].lo+c-off[wi], &recs[i]); err != nil {
				return err
			}
		}
		return nil
	}
	if single {
		if err := place(mem, 0); err != nil {
			return err
		}
	} else {
		for g, w := range buckets {
			if err := w.close(); err != nil {
				return err
			}
			br, err := openSpill(w.f.Name())
			if err != nil {
				return err
			}
			first, end := groupStart[g], groupEnd(g)
			recs := make([]record, end-first)
			for {
				var rr record
				err := br.next(&rr, true)
				if err == io.EOF {
					break
				}
				if err == nil && (rr.pos < uint64(first) || rr.pos >= uint64(end)) {
					err = fmt.Errorf("position %d outside the group", rr.pos)
				}
				if err != nil {
					br.close()
					return fmt.Errorf("output: reading bucket %d: %w", g, err)
				}
				recs[rr.pos-uint64(first)] = rr
			}
			br.close()
			w.remove()
			buckets[g] = nil
			if err := place(recs, first); err != nil {
				return err
			}
		}
	}
	// Windows after the last record (empty ones), and the last one's end.
	if err := advance(total); err != nil {
		return err
	}
	if wi >= 0 && ro.end != nil {
		return ro.end(wi)
	}
	return nil
}

// emptyWindows starts and ends each window of ro, none of which holds a
// position.
func (b *Builder) emptyWindows(ro reorder) error {
	for k := range ro.wins {
		if ro.start != nil {
			if err := ro.start(k); err != nil {
				return err
			}
		}
		if ro.end != nil {
			if err := ro.end(k); err != nil {
				return err
			}
		}
	}
	return nil
}

// partOf returns the part (WriteRanges) holding unit ui; 0 for one
// Builder.
func (b *Builder) partOf(ui int) int {
	return sort.SearchInts(b.partEnd, ui+1)
}

// planInOrder is the order of an output written in input order: every
// unit until the budget is reached, decided as streamCutter decides it
// (a unit is left out, with every unit after it, when at most half of it
// would fit).
func planInOrder(units []unit, budget int64) []slot {
	var start int64
	order := make([]slot, 0, len(units))
	for i, u := range units {
		t := int64(u.tokens)
		if budget > 0 && 2*(budget-start) <= t {
			break
		}
		order = append(order, slot{unit: uint32(i)})
		start += t
	}
	return order
}

// streamCuts are the cuts streamCutter makes over slot token counts
// written in order (input order, no total known in advance): a shard
// ends at the record boundary nearest each multiple of shardTokens when
// within the tolerance, else inside the record that straddles it; a
// boundary just before a record ends the shard after the previous one.
func streamCuts(tokens []int64, shardTokens int64) []cut {
	tol := shardTokens / cutTolerance
	var cuts []cut
	var start int64
	k := int64(1)
	open := false // a shard holds something
	for p, t := range tokens {
		mine := 0 // cuts placed in this record
		for c := k * shardTokens; c < start+t; c = k * shardTokens {
			k++
			before, after := c-start, start+t-c
			switch {
			case before == 0 || (before <= after && before <= tol):
				if mine == 0 && open {
					cuts = append(cuts, cut{pos: p - 1, offset: tokens[p-1]})
					open = false
				}
			case after <= tol:
				cuts = append(cuts, cut{pos: p, offset: t})
				mine++
			default:
				cuts = append(cuts, cut{pos: p, offset: before})
				mine++
			}
		}
		start += t
		open = !(mine > 0 && cuts[len(cuts)-1].offset >= t)
	}
	return cuts
}

// slotTokens lists the tokens of each output position.
func slotTokens(units []unit, order []slot) []int64 {
	tokens := make([]int64, len(order))
	for i, s := range order {
		tokens[i] = int64(units[s.unit].tokens)
	}
	return tokens
}

// assembler writes records in output order and ends shards at the
// planned cuts, splitting a document's text where a cut falls inside it.
type assembler struct {
	b      *Builder
	w      *shardWriter
	splits *[]Split // where shard_boundary splits go
	cuts   []cut
	next   int // index of the next cut
	tol    int
}

func (a *assembler) add(p int, r *record) error {
	w := a.w
	if a.next >= len(a.cuts) || a.cuts[a.next].pos != p {
		return a.write(r, r.id, r.text, r.tokens)
	}
	// One or more cuts fall in or after this record.
	text := r.text
	var done int64 // planned tokens of r already written
	var parts []string
	rule := 0
	for a.next < len(a.cuts) && a.cuts[a.next].pos == p {
		c := a.cuts[a.next]
		a.next++
		if c.offset >= int64(r.tokens) {
			break // cut after the record
		}
		at, level := splitNear(a.b.tok, text, int(c.offset-done), a.tol)
		if at <= 0 || at >= len(text) {
			continue // nothing to cut at: the shard ends later
		}
		parts = append(parts, text[:at])
		rule = max(rule, level)
		if err := a.write(r, fmt.Sprintf("%s~%d", r.id, len(parts)), text[:at], -1); err != nil {
			return err
		}
		if err := w.finish(); err != nil {
			return err
		}
		done = c.offset
		text = text[at:]
	}
	id := r.id
	if len(parts) > 0 {
		parts = append(parts, text)
		id = fmt.Sprintf("%s~%d", r.id, len(parts))
		sp := Split{Doc: r.id, Source: r.source, File: r.file, Line: r.line, Rule: levelRule[rule], Reason: "shard_boundary", Tokens: r.tokens, At: p}
		for i := range parts {
			sp.Pieces = append(sp.Pieces, fmt.Sprintf("%s~%d", r.id, i+1))
		}
		*a.splits = append(*a.splits, sp)
		if err := a.write(r, id, text, -1); err != nil {
			return err
		}
	} else if err := a.write(r, id, text, r.tokens); err != nil {
		return err
	}
	// A cut after the record (possibly following splits) ends the shard.
	if a.next > 0 && a.cuts[a.next-1].pos == p && a.cuts[a.next-1].offset >= int64(r.tokens) {
		return w.finish()
	}
	return nil
}

// write emits one line; tokens < 0 means count the text.
func (a *assembler) write(r *record, id, text string, tokens int) error {
	if tokens < 0 {
		tokens = a.b.tok.Count(text)
	}
	a.b.line = appendLineMeta(a.b.line[:0], id, text, r.source, tokens, r.meta)
	return a.w.write(a.b.line, id, r.source, text, tokens)
}

// streamCutter ends shards on the fly when documents are written in input
// order (no mix): it makes the decisions of planCuts one document at a
// time, so nothing is spilled. Unlike planCuts it cannot know the total,
// so a small remainder becomes a small last shard.
type streamCutter struct {
	shardTokens int64
	budget      int64
	start       int64 // tokens before the next document
	k           int64 // index of the next ideal cut
	full        bool  // the budget is reached
	pos         int
}

// add writes one record, ending shards where the ideal cuts at multiples
// of shardTokens fall.
func (s *streamCutter) add(a *assembler, r *record) error {
	t := int64(r.tokens)
	if s.full || (s.budget > 0 && 2*(s.budget-s.start) <= t) {
		s.full = true
		return nil
	}
	if s.k == 0 {
		s.k = 1
	}
	tol := s.shardTokens / cutTolerance
	a.cuts, a.next = a.cuts[:0], 0
	for c := s.k * s.shardTokens; c < s.start+t; c = s.k * s.shardTokens {
		s.k++
		before, after := c-s.start, s.start+t-c
		switch {
		case before == 0 || (before <= after && before <= tol):
			if len(a.cuts) == 0 && a.w.cur != nil {
				if err := a.w.finish(); err != nil {
					return err
				}
			}
		case after <= tol:
			a.cuts = append(a.cuts, cut{pos: s.pos, offset: t})
		default:
			a.cuts = append(a.cuts, cut{pos: s.pos, offset: before})
		}
	}
	if err := a.add(s.pos, r); err != nil {
		return err
	}
	s.start += t
	s.pos++
	return nil
}
