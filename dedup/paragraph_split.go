package dedup

// Paragraph dedup reduced in parts by separate processes (a split run).
//
// The parts are ParagraphPartitions ranges of the paragraph hash (its top
// 6 bits): a paragraph's count lies in one part, so each task counts only
// the hashes of its parts (RestrictPartitions) and returns per part the
// frequent hashes it found:
//
//	"WPP1", uvarint count, count × uint64 LE hashes, ascending.
//
// The frequent hashes of the parts in part order are all of them in
// ascending order: the list Reduce builds.

import (
	"encoding/binary"
	"errors"
	"fmt"
	"slices"
)

const (
	paragraphPartitionBits = 6
	// ParagraphPartitions is the number of parts paragraph dedup's reduce
	// is cut into.
	ParagraphPartitions = 1 << paragraphPartitionBits
	paragraphPartMagic  = "WPP1"
)

// RestrictPartitions makes the index count only the paragraph hashes of
// the partitions ps (ascending, in 0..ParagraphPartitions-1). It is called
// before the first Add; ReduceSplit then replaces Reduce.
func (p *ParagraphIndex) RestrictPartitions(ps []int) error {
	if p.stats.Docs > 0 || p.reduced {
		return errors.New("dedup: ParagraphIndex.RestrictPartitions after Add")
	}
	only := make([]bool, ParagraphPartitions)
	for i, q := range ps {
		if q < 0 || q >= ParagraphPartitions || (i > 0 && q <= ps[i-1]) {
			return fmt.Errorf("dedup: partitions %v: want ascending numbers in 0..%d", ps, ParagraphPartitions-1)
		}
		only[q] = true
	}
	p.only, p.onlyList = only, slices.Clone(ps)
	return nil
}

// ReduceSplit counts the partitions given to RestrictPartitions and
// returns one result per partition, in order, instead of Reduce.
func (p *ParagraphIndex) ReduceSplit() ([][]byte, error) {
	if p.only == nil {
		return nil, errors.New("dedup: ParagraphIndex.ReduceSplit without RestrictPartitions")
	}
	if err := p.Reduce(); err != nil {
		return nil, err
	}
	parts := make([][]uint64, ParagraphPartitions)
	for _, h := range p.frequent {
		q := h >> (64 - paragraphPartitionBits)
		parts[q] = append(parts[q], h)
	}
	out := make([][]byte, len(p.onlyList))
	for i, q := range p.onlyList {
		out[i] = appendParagraphPart(nil, parts[q])
	}
	return out, nil
}

func appendParagraphPart(b []byte, hs []uint64) []byte {
	b = append(b, paragraphPartMagic...)
	b = binary.AppendUvarint(b, uint64(len(hs)))
	for _, h := range hs {
		b = binary.LittleEndian.AppendUint64(b, h)
	}
	return b
}

// decodeParagraphPart decodes partition q's result: hashes ascending, all
// in partition q.
func decodeParagraphPart(b []byte, q int) ([]uint64, error) {
	r := &partReader{b: b}
	r.magic(paragraphPartMagic)
	n := r.count(8)
	var hs []uint64
	for i := 0; i < n && r.err == nil; i++ {
		h := binary.LittleEndian.Uint64(r.take(8))
		if int(h>>(64-paragraphPartitionBits)) != q {
			r.fail("hash %016x is not in partition %d", h, q)
		} else if i > 0 && h <= hs[i-1] {
			r.fail("hashes not in ascending order")
		}
		hs = append(hs, h)
	}
	r.end()
	if r.err != nil {
		return nil, fmt.Errorf("paragraph dedup reduce result of partition %d: %w", q, r.err)
	}
	return hs, nil
}

// LoadSplit takes every partition's ReduceSplit result, in partition
// order, and makes Strip answer exactly as after Reduce.
func (p *ParagraphIndex) LoadSplit(results [][]byte) error {
	if p.reduced || p.stats.Docs > 0 {
		return errors.New("dedup: ParagraphIndex.LoadSplit after Add or Reduce")
	}
	if len(results) != ParagraphPartitions {
		return fmt.Errorf("dedup: %d paragraph dedup reduce results, want %d", len(results), ParagraphPartitions)
	}
	p.reduced = true
	var frequent []uint64
	for q, b := range results {
		hs, err := decodeParagraphPart(b, q)
		if err != nil {
			return err
		}
		frequent = append(frequent, hs...)
	}
	p.frequent = frequent
	return nil
}
