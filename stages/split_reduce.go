package stages

import (
	"encoding/binary"
	"errors"
	"fmt"
	"sort"

	"winnow/dedup"
)

// SplitReducer implementations of the global stages: the reduce is cut
// into the index's fixed key partitions (see dedup/exact_split.go,
// dedup/paragraph_split.go, dedup/near_split.go and, below,
// decontaminate's frequency count).

// ReduceParts is the number of hash partitions of exact dedup (of the
// document hash, or at paragraph scope of the paragraph hash).
func (s *exactDedupStage) ReduceParts() int {
	if s.paragraph {
		return dedup.ParagraphPartitions
	}
	return dedup.ExactPartitions
}

// ReduceSome feeds every document but keeps only the records of the hash
// partitions ps, and reduces them.
func (s *exactDedupStage) ReduceSome(ps []int, feed Feed) ([][]byte, error) {
	var err error
	if s.paragraph {
		err = s.para.RestrictPartitions(ps)
	} else {
		err = s.idx.RestrictPartitions(ps)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	if err := feed(s.Collect); err != nil {
		return nil, err
	}
	var out [][]byte
	if s.paragraph {
		out, err = s.para.ReduceSplit()
	} else {
		out, err = s.idx.ReduceSplit()
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	return out, nil
}

// LoadReduced reads every partition's result and writes the key files
// (the kept ids come from feed, in input order).
func (s *exactDedupStage) LoadReduced(results [][]byte, feed Feed) error {
	if s.paragraph {
		// No key files at paragraph scope (counts are not carried
		// between runs), so feed is not needed.
		if err := s.para.LoadSplit(results); err != nil {
			return fmt.Errorf("%s: %w", s.name, err)
		}
		return nil
	}
	err := s.idx.LoadSplit(results, func(emit func(uint64, string) error) error {
		return feed(func(order OrderKey, id string, keys any) error {
			if keys == nil {
				return nil // not indexed (empty normalized text)
			}
			return emit(uint64(order), id)
		})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", s.name, err)
	}
	return nil
}

// decontamParts is the number of parts decontaminate's frequency count is
// cut into: part p counts the index keys [lo(p), lo(p+1)) with
// lo(p) = p·KeyCount/decontamParts. The count is 4 bytes per key, so a
// task holds about 1/16 of it per part.
const decontamParts = 16

const decontamPartMagic = "WDF1"

// partLo is the first key of part p.
func (d *Decontaminate) partLo(p int) int {
	return int(int64(p) * int64(d.idx.KeyCount()) / decontamParts)
}

// ReduceParts is the number of key ranges of the frequency count.
func (d *Decontaminate) ReduceParts() int { return decontamParts }

// ReduceSome counts, for the keys of the parts ps only, the documents
// each occurs in, and returns per part the keys found in more than
// max_doc_frequency documents.
func (d *Decontaminate) ReduceSome(ps []int, feed Feed) ([][]byte, error) {
	for i, p := range ps {
		if p < 0 || p >= decontamParts || (i > 0 && p <= ps[i-1]) {
			return nil, fmt.Errorf("%s: parts %v: want ascending numbers in 0..%d", d.name, ps, decontamParts-1)
		}
	}
	out := make([][]byte, len(ps))
	if d.cfg.MaxDocFrequency == 0 {
		for i := range out {
			out[i] = encodeDecontamPart(nil, ps[i], 0, nil)
		}
		return out, nil
	}
	// counts[i] counts the keys of part ps[i]; part[p] is i+1 for a part
	// of ps, 0 for the others.
	counts := make([][]uint32, len(ps))
	var part [decontamParts]int
	for i, p := range ps {
		counts[i] = make([]uint32, d.partLo(p+1)-d.partLo(p))
		part[p] = i + 1
	}
	nkeys := d.idx.KeyCount()
	err := feed(func(order OrderKey, id string, keys any) error {
		ks, _ := keys.([]uint32)
		for _, k := range ks {
			if int(k) >= nkeys {
				return fmt.Errorf("decontaminate: key %d out of range for document %s", k, id)
			}
			p := sort.Search(decontamParts, func(p int) bool { return d.partLo(p+1) > int(k) })
			if i := part[p] - 1; i >= 0 {
				c := &counts[i][int(k)-d.partLo(p)]
				if *c < ^uint32(0) {
					*c++
				}
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	for i := range ps {
		out[i] = appendDecontamPart(nil, ps[i], counts[i], d.cfg.MaxDocFrequency)
	}
	return out, nil
}

// appendDecontamPart encodes part p's frequent keys: the magic, uvarint
// p, uvarint number of keys of the part, uvarint number of frequent keys,
// then each frequent key's offset in the part as a uvarint gap from the
// previous one minus 1 (the first as is).
func appendDecontamPart(b []byte, p int, counts []uint32, maxDF int) []byte {
	var frequent []int
	for k, n := range counts {
		if int(n) > maxDF {
			frequent = append(frequent, k)
		}
	}
	return encodeDecontamPart(b, p, len(counts), frequent)
}

func encodeDecontamPart(b []byte, p, n int, frequent []int) []byte {
	b = append(b, decontamPartMagic...)
	b = binary.AppendUvarint(b, uint64(p))
	b = binary.AppendUvarint(b, uint64(n))
	b = binary.AppendUvarint(b, uint64(len(frequent)))
	last := 0
	for i, k := range frequent {
		if i == 0 {
			b = binary.AppendUvarint(b, uint64(k))
		} else {
			b = binary.AppendUvarint(b, uint64(k-last-1))
		}
		last = k
	}
	return b
}

// decodeDecontamPart decodes the result of part p of n keys: the offsets
// of its frequent keys, ascending, each below n.
func decodeDecontamPart(b []byte, p, n int) ([]int, error) {
	if len(b) < len(decontamPartMagic) || string(b[:len(decontamPartMagic)]) != decontamPartMagic {
		return nil, errors.New("not a decontaminate reduce result")
	}
	b = b[len(decontamPartMagic):]
	var hdr [2]uint64 // part, keys
	for i := range hdr {
		v, m := binary.Uvarint(b)
		if m <= 0 {
			return nil, errors.New("truncated")
		}
		hdr[i], b = v, b[m:]
	}
	if hdr[0] != uint64(p) || hdr[1] != uint64(n) {
		return nil, fmt.Errorf("the result of part %d of %d keys, want part %d of %d keys (another part, or other eval sets)", hdr[0], hdr[1], p, n)
	}
	cnt, m := binary.Uvarint(b)
	if m <= 0 {
		return nil, errors.New("truncated")
	}
	b = b[m:]
	if cnt > uint64(len(b)) || cnt > uint64(n) {
		return nil, fmt.Errorf("%d frequent keys in a part of %d keys and %d bytes", cnt, n, len(b))
	}
	out := make([]int, 0, cnt)
	next := uint64(0)
	for i := uint64(0); i < cnt; i++ {
		gap, m := binary.Uvarint(b)
		if m <= 0 {
			return nil, errors.New("truncated")
		}
		b = b[m:]
		if gap >= uint64(n)-next {
			return nil, fmt.Errorf("key offset beyond the part's %d keys", n)
		}
		k := next + gap
		out = append(out, int(k))
		next = k + 1
	}
	if len(b) > 0 {
		return nil, fmt.Errorf("%d trailing bytes", len(b))
	}
	return out, nil
}

// LoadReduced marks the frequent keys of every part, as Reduce does.
func (d *Decontaminate) LoadReduced(results [][]byte, feed Feed) error {
	if len(results) != decontamParts {
		return fmt.Errorf("%s: %d reduce results, want %d", d.name, len(results), decontamParts)
	}
	if d.cfg.MaxDocFrequency == 0 {
		for p, b := range results {
			if ks, err := decodeDecontamPart(b, p, 0); err != nil || len(ks) > 0 {
				return fmt.Errorf("%s: reduce result of part %d: not empty without max_doc_frequency (%v)", d.name, p, err)
			}
		}
		return nil
	}
	ignore := make([]uint64, (d.idx.KeyCount()+63)/64)
	ignored := 0
	for p, b := range results {
		lo := d.partLo(p)
		ks, err := decodeDecontamPart(b, p, d.partLo(p+1)-lo)
		if err != nil {
			return fmt.Errorf("%s: reduce result of part %d: %w", d.name, p, err)
		}
		for _, k := range ks {
			k += lo
			ignore[k>>6] |= 1 << (k & 63)
		}
		ignored += len(ks)
	}
	d.ignore, d.ignored, d.ignoredKnown = ignore, ignored, true
	d.df = nil
	return nil
}

// ReduceParts is the number of band-key partitions of near dedup.
func (s *nearDedupStage) ReduceParts() int { return dedup.KeyPartitions }

// ReduceSome feeds every document (signatures and priorities are needed
// to verify and rank the candidates) but keeps band keys of the
// partitions ps only, and returns their verified pairs.
func (s *nearDedupStage) ReduceSome(ps []int, feed Feed) ([][]byte, error) {
	if err := s.idx.RestrictPartitions(ps); err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	if err := feed(s.Collect); err != nil {
		return nil, err
	}
	out, err := s.idx.ReduceSplit()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	return out, nil
}

// LoadReduced makes the greedy pass over every partition's pairs and
// writes the key file (signatures and ids from feed, in input order).
func (s *nearDedupStage) LoadReduced(results [][]byte, feed Feed) error {
	err := s.idx.LoadSplit(results, func(emit func(uint64, string, *dedup.NearKey) error) error {
		return feed(func(order OrderKey, id string, keys any) error {
			k, ok := keys.(*dedup.NearKey)
			if keys != nil && !ok {
				return fmt.Errorf("%s: unexpected scan key %T", s.name, keys)
			}
			return emit(uint64(order), id, k)
		})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", s.name, err)
	}
	return nil
}
