package shard

// Writing an output with a tokenizer (a mix, a shuffle, or input order)
// in ranges, by several processes. The documents arrive in parts
// (consecutive runs of input order): a Builder per part (Options.Parts)
// takes them with Add and keeps them with SavePart instead of Close.
// WriteRanges then plans the whole output from every part's table (the
// same plan a single Builder makes: positions and shard cuts come from
// token counts and id hashes only), cuts the output
// positions into n ranges of whole shards, and writes the ranges asked
// for; AssembleRanges numbers the ranges' shards into one directory and
// returns the Report a single Builder's Close would have returned. The
// shards' bytes are the same as one Builder's.

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"

	"winnow/stages/fsio"
)

// Files of a saved part.
const (
	partRecords = "records.s2"
	partUnits   = "units.bin"
	partInfo    = "part.json"
	unitBytes   = 16 // hash, tokens, source, piece
)

type partMeta struct {
	Sources []string `json:"sources"`
	Splits  []Split  `json:"splits"`
	Raw     int64    `json:"raw"`
	Units   int      `json:"units"`
}

// Planned reports whether the builder spills its documents (a mix, a
// shuffle, or Options.Parts): then they can be saved as a part and
// written in ranges.
func (b *Builder) Planned() bool { return b.spill != nil }

// SavePart ends a planned builder that took one part of the documents
// and keeps in dir (created) its records, its table (hash, tokens,
// source, piece per record: 16 bytes per document or piece) and the
// documents it split before mixing. No shard is written.
func (b *Builder) SavePart(dir string) error {
	if !b.Planned() {
		return errors.New("output: SavePart needs a builder made with Options.Parts")
	}
	if b.closed {
		return errors.New("output: SavePart after Close")
	}
	b.closed = true
	if err := b.spill.close(); err != nil {
		b.spill.remove()
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		b.spill.remove()
		return err
	}
	if err := os.Rename(b.spill.f.Name(), filepath.Join(dir, partRecords)); err != nil {
		b.spill.remove()
		return err
	}
	if err := os.WriteFile(filepath.Join(dir, partUnits), appendUnits(nil, b.units), 0o644); err != nil {
		return err
	}
	meta, err := json.Marshal(partMeta{Sources: b.srcNames, Splits: b.splits, Raw: b.spill.raw, Units: len(b.units)})
	if err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(dir, partInfo), meta, 0o644)
}

// appendUnits appends a part's table: per record its id hash, tokens,
// source and piece, little-endian (unitBytes each).
func appendUnits(buf []byte, us []unit) []byte {
	for _, u := range us {
		buf = binary.LittleEndian.AppendUint64(buf, u.hash)
		buf = binary.LittleEndian.AppendUint32(buf, u.tokens)
		buf = binary.LittleEndian.AppendUint16(buf, u.src)
		buf = binary.LittleEndian.AppendUint16(buf, u.piece)
	}
	return buf
}

// RangeResult is what one range of a planned output wrote into its
// directory.
type RangeResult struct {
	// Files are the range's shards in order; paths are file names inside
	// the range's directory until AssembleRanges moves them.
	Files []File `json:"files"`
	// Splits are the documents cut at a shard boundary inside the range.
	Splits    []Split `json:"splits"`
	TextBytes int64   `json:"text_bytes"`
}

// Whole is what the writer of range 0 reports about the whole output.
type Whole struct {
	Mix *MixReport `json:"mix,omitempty"`
	// Splits are the documents split before mixing, in input order.
	Splits []Split `json:"splits"`
	// DocsWritten counts the documents of which a piece was written.
	DocsWritten int64 `json:"docs_written"`
	// BudgetLeftOut counts the documents an output in input order left
	// out once budget_tokens was reached.
	BudgetLeftOut int64 `json:"budget_left_out"`
}

// loadParts builds a planner from saved parts, in input order: one table
// with sources numbered by first appearance, as one Builder's.
func loadParts(opt Options, parts []string) (*Builder, []string, error) {
	opt, err := withDefaults(opt)
	if err != nil {
		return nil, nil, err
	}
	if opt.Tokenizer == nil {
		return nil, nil, errors.New("output: ranges need a tokenizer")
	}
	if opt.TempDir == "" {
		opt.TempDir = filepath.Join(filepath.Dir(opt.Dir), ".work")
	}
	b := &Builder{opt: opt, tok: opt.Tokenizer, srcIdx: map[string]uint16{}, closed: true}
	files := make([]string, len(parts))
	for i, dir := range parts {
		mb, err := os.ReadFile(filepath.Join(dir, partInfo))
		if err != nil {
			return nil, nil, fmt.Errorf("output part: %w", err)
		}
		var m partMeta
		if err := json.Unmarshal(mb, &m); err != nil {
			return nil, nil, fmt.Errorf("output part %s: %w", dir, err)
		}
		ub, err := os.ReadFile(filepath.Join(dir, partUnits))
		if err != nil {
			return nil, nil, fmt.Errorf("output part: %w", err)
		}
		if m.Units < 0 || len(ub)%unitBytes != 0 || len(ub)/unitBytes != m.Units {
			return nil, nil, fmt.Errorf("output part %s: %d table bytes for %d records", dir, len(ub), m.Units)
		}
		if m.Raw < 0 {
			return nil, nil, fmt.Errorf("output part %s: %d raw bytes", dir, m.Raw)
		}
		for _, sp := range m.Splits {
			// A part's splits are long documents cut before mixing; At is
			// the position of the last piece in the part.
			if sp.At < 0 || sp.At >= m.Units {
				return nil, nil, fmt.Errorf("output part %s: split of %q at record %d of %d", dir, sp.Doc, sp.At, m.Units)
			}
		}
		remap := make([]uint16, len(m.Sources))
		for j, name := range m.Sources {
			si, ok := b.srcIdx[name]
			if !ok {
				if len(b.srcNames) >= 1<<16-1 {
					return nil, nil, fmt.Errorf("output: more than %d sources", 1<<16-1)
				}
				si = uint16(len(b.srcNames))
				b.srcIdx[name] = si
				b.srcNames = append(b.srcNames, name)
			}
			remap[j] = si
		}
		for k := 0; k < m.Units; k++ {
			e := ub[k*unitBytes:]
			src := binary.LittleEndian.Uint16(e[12:])
			if int(src) >= len(remap) {
				return nil, nil, fmt.Errorf("output part %s: record %d names source %d of %d", dir, k, src, len(remap))
			}
			b.units = append(b.units, unit{hash: binary.LittleEndian.Uint64(e), tokens: binary.LittleEndian.Uint32(e[8:]),
				src: remap[src], piece: binary.LittleEndian.Uint16(e[14:])})
		}
		for _, sp := range m.Splits {
			sp.At += len(b.units) - m.Units // input positions of the whole output
			b.splits = append(b.splits, sp)
		}
		b.partEnd = append(b.partEnd, len(b.units))
		b.raw += m.Raw
		files[i] = filepath.Join(dir, partRecords)
	}
	return b, files, nil
}

// rangesOf cuts the output positions into n windows of whole shards. Range
// i starts at the first cut between two records (not inside one) at or
// after cut i·len(cuts)/n, so no record is written by two ranges; a range
// with no such cut of its own is empty.
func rangesOf(tokens []int64, cuts []cut, n int) []window {
	bounds := make([]int, n+1) // cut index ending the previous range; -1 = start
	bounds[0] = -1
	bounds[n] = len(cuts)
	for i := 1; i < n; i++ {
		k := max(i*len(cuts)/n, bounds[i-1]+1)
		for k < len(cuts) && cuts[k].offset < tokens[cuts[k].pos] {
			k++
		}
		bounds[i] = min(k, len(cuts))
	}
	at := func(b int) int { // first position after the cut
		switch {
		case b < 0:
			return 0
		case b >= len(cuts):
			return len(tokens)
		}
		return cuts[b].pos + 1
	}
	wins := make([]window, n)
	for i := range wins {
		lo, hi := at(bounds[i]), at(bounds[i+1])
		if bounds[i] >= len(cuts) {
			lo = len(tokens)
		}
		wins[i] = window{lo: lo, hi: max(lo, hi)}
		if lo < hi {
			wins[i].cuts = cuts[bounds[i]+1 : bounds[i+1]]
		}
	}
	return wins
}

// WriteRanges plans the output of the saved parts (directories, in input
// order), cuts it into n ranges and writes the ranges in mine (ascending):
// range i's shards go to dir(i) (created), and done(i, result) is called
// when range i is complete. Range 0's writer also reads every record to
// report, in input order, each document the plan leaves out (leftOut, may
// be nil) and returns the Whole; the others skip the records they do not
// write and return nil.
func WriteRanges(opt Options, parts []string, n int, mine []int, dir func(i int) string,
	done func(i int, r *RangeResult) error, leftOut func(LeftOut) error) (*Whole, error) {
	if n < 1 || !slices.IsSorted(mine) || (len(mine) > 0 && (mine[0] < 0 || mine[len(mine)-1] >= n)) {
		return nil, fmt.Errorf("output: ranges %v of %d", mine, n)
	}
	b, files, err := loadParts(opt, parts)
	if err != nil {
		return nil, err
	}
	b.leftOut = leftOut
	full := slices.Contains(mine, 0)
	var whole *Whole
	var order []slot
	var wins []window
	if len(b.units) == 0 {
		wins = make([]window, n)
		if full {
			whole = &Whole{Mix: b.emptyMix(), Splits: b.splits}
		}
	} else {
		var mix *MixReport
		order, mix, err = b.plan()
		if err != nil {
			return nil, err
		}
		tokens := slotTokens(b.units, order)
		cuts := planCuts(tokens, b.opt.ShardTokens)
		if b.opt.Mix == nil && !b.opt.Shuffle {
			cuts = streamCuts(tokens, b.opt.ShardTokens)
		}
		wins = rangesOf(tokens, cuts, n)
		if full {
			whole = &Whole{Mix: mix}
		}
	}
	var my []window
	for _, i := range mine {
		my = append(my, wins[i])
	}
	a := &assembler{b: b, tol: int(b.opt.ShardTokens / cutTolerance)}
	var splits []Split
	ro := reorder{order: order, wins: my, files: files, full: full && len(b.units) > 0,
		start: func(k int) error {
			d := dir(mine[k])
			if err := os.MkdirAll(d, 0o755); err != nil {
				return err
			}
			a.w = newShardWriter(d, b.opt.Name, b.tok, b.opt.TokenFiles)
			a.w.runDir = d
			splits = nil
			a.splits = &splits
			return nil
		},
		end: func(k int) error {
			if err := a.w.finish(); err != nil {
				a.w.abort()
				return err
			}
			return done(mine[k], &RangeResult{Files: a.w.files, Splits: splits, TextBytes: a.w.textBytes})
		}}
	if len(b.units) == 0 {
		return whole, b.emptyWindows(ro)
	}
	if err := b.writeReordered(a, ro); err != nil {
		if a.w != nil {
			a.w.abort()
		}
		return nil, err
	}
	if whole != nil {
		whole.Splits = b.splits
		whole.DocsWritten = b.docsOut
		whole.BudgetLeftOut = b.budgetLeft
	}
	return whole, nil
}

// AssembleRanges links the ranges' shards (dirs and results in range
// order) into opt.Dir, numbered as one Builder numbers them, and returns
// the Report a single Builder's Close would have returned. The ranges'
// files stay (a second attempt can assemble again).
func AssembleRanges(opt Options, whole *Whole, dirs []string, results []*RangeResult) (*Report, error) {
	opt, err := withDefaults(opt)
	if err != nil {
		return nil, err
	}
	if whole == nil || len(dirs) != len(results) {
		return nil, errors.New("output: ranges without the whole-output report")
	}
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("output: %w", err)
	}
	w := newShardWriter(opt.Dir, opt.Name, nil, false)
	rep := &Report{Files: []File{}, Splits: append([]Split(nil), whole.Splits...), DocsWritten: whole.DocsWritten,
		BudgetLeftOut: whole.BudgetLeftOut}
	if whole.Mix != nil {
		rep.Mix = whole.Mix
	}
	for i, res := range results {
		for _, f := range res.Files {
			base := fmt.Sprintf("%s-%05d", opt.Name, len(rep.Files))
			oldBase := strings.TrimSuffix(f.Path, ".jsonl.zst")
			dst := filepath.Join(opt.Dir, base+".jsonl.zst")
			if err := linkInto(filepath.Join(dirs[i], f.Path), dst); err != nil {
				return nil, err
			}
			f.Path = w.rel(dst)
			if tf := f.TokenFile; tf != nil {
				t := *tf
				bin := filepath.Join(opt.Dir, base+".tokens.bin")
				if err := linkInto(filepath.Join(dirs[i], oldBase+".tokens.bin"), bin); err != nil {
					return nil, err
				}
				ib, err := os.ReadFile(filepath.Join(dirs[i], oldBase+".tokens.json"))
				if err != nil {
					return nil, fmt.Errorf("output token index: %w", err)
				}
				var idx tokenIndex
				if err := json.Unmarshal(ib, &idx); err != nil {
					return nil, fmt.Errorf("output token index of range %d: %w", i, err)
				}
				idx.Bin = filepath.Base(bin)
				data, err := json.Marshal(idx)
				if err != nil {
					return nil, err
				}
				idxPath := filepath.Join(opt.Dir, base+".tokens.json")
				if err := fsio.WriteFileAtomic(idxPath, append(data, '\n')); err != nil {
					return nil, fmt.Errorf("output token index: %w", err)
				}
				t.Path, t.Index = w.rel(bin), w.rel(idxPath)
				f.TokenFile = &t
			}
			rep.Files = append(rep.Files, f)
			rep.Docs += f.Docs
			rep.Tokens += f.Tokens
		}
		rep.Splits = append(rep.Splits, res.Splits...)
		rep.TextBytes += res.TextBytes
	}
	if opt.Mix == nil && !opt.Shuffle {
		// In input order a Builder records each split as it happens: a
		// document's shard_boundary cuts, then its long_document split.
		sort.SliceStable(rep.Splits, func(i, j int) bool {
			a, b := rep.Splits[i], rep.Splits[j]
			if a.At != b.At {
				return a.At < b.At
			}
			return a.Reason == "shard_boundary" && b.Reason != "shard_boundary"
		})
	}
	return rep, nil
}

// linkInto makes dst a hard link of src (replacing dst), or a copy where
// links are not supported.
func linkInto(src, dst string) error {
	os.Remove(dst)
	if err := os.Link(src, dst); err == nil {
		return nil
	}
	b, err := os.ReadFile(src)
	if err != nil {
		return fmt.Errorf("output: %w", err)
	}
	return fsio.WriteFileAtomic(dst, b)
}
