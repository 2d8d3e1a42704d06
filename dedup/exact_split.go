package dedup

// Exact dedup reduced in parts by separate processes (a split run).
//
// The parts are the ExactPartitions hash partitions: a group of copies
// shares its hash, so it lies in one partition, and sorting each partition
// and concatenating them in partition order sorts everything. A task
// restricts its index to its partitions (RestrictPartitions: the records
// of the others are skipped while adding, their ids never logged), reduces
// them with the same walk as Reduce, and returns per partition
// (ReduceSplit):
//
//	"WXP1", uvarint number of kept records, that many 24-byte key-file
//	records (hash.Hi, hash.Lo, order key, little-endian, sorted by hash);
//	uvarint number of groups with removals, per group: uvarint order key
//	of the kept document, one byte 1 when it belongs to the previous run
//	(--against) else 0, uvarint len(id), its id, uvarint number of removed
//	documents, their order keys as uvarints (ascending).
//
// LoadSplit reads every partition's result into the table Lookup reads and
// writes PREFIX.hashes (the kept records in partition order) and
// PREFIX.ids.zst (the kept documents' ids, from the caller's input-order
// walk over every indexed document), byte-identical to Reduce's.

import (
	"encoding/binary"
	"errors"
	"fmt"
	"slices"
)

// ExactPartitions is the number of parts exact dedup's reduce is cut into.
const ExactPartitions = exactPartitions

const exactPartMagic = "WXP1"

// RestrictPartitions makes the index hold and reduce only the records of
// the hash partitions ps (ascending, in 0..ExactPartitions-1). It is
// called before the first Add; ReduceSplit then replaces Reduce.
func (x *ExactIndex) RestrictPartitions(ps []int) error {
	if x.started || x.reduced {
		return errors.New("dedup: ExactIndex.RestrictPartitions after Add")
	}
	only := make([]bool, exactPartitions)
	for i, p := range ps {
		if p < 0 || p >= exactPartitions || (i > 0 && p <= ps[i-1]) {
			return fmt.Errorf("dedup: partitions %v: want ascending numbers in 0..%d", ps, exactPartitions-1)
		}
		only[p] = true
	}
	x.only, x.onlyList = only, slices.Clone(ps)
	return nil
}

// exactGroup is one group of copies in a partition result.
type exactGroup struct {
	order   uint64 // the kept document
	against bool
	id      string
	removed []uint64 // ascending
}

// exactPart is one partition's reduce result.
type exactPart struct {
	kept   []exactRec // key-file records (no priority)
	groups []exactGroup
}

// ReduceSplit reduces the partitions given to RestrictPartitions and
// returns one result per partition, in order. It is called once, after the
// last Add, instead of Reduce; it writes no key files.
func (x *ExactIndex) ReduceSplit() ([][]byte, error) {
	if x.only == nil {
		return nil, errors.New("dedup: ExactIndex.ReduceSplit without RestrictPartitions")
	}
	if x.reduced {
		return nil, errors.New("dedup: ExactIndex reduced twice")
	}
	x.reduced = true
	parts := make([]exactPart, exactPartitions)
	err := x.walk(func(r exactRec) error {
		p := &parts[r.hi>>(64-exactPartitionBits)]
		p.kept = append(p.kept, exactRec{hi: r.hi, lo: r.lo, order: r.order})
		return nil
	})
	if err != nil {
		return nil, err
	}
	if err := x.resolveIDs(nil); err != nil {
		return nil, err
	}
	// Groups in the order the walk made them (hash order), each with its
	// removed documents in input order.
	members := make([][]uint64, len(x.rm.reps))
	for _, e := range x.rm.list {
		members[e.rep] = append(members[e.rep], e.order)
	}
	for i, rp := range x.rm.reps {
		parts[rp.part].groups = append(parts[rp.part].groups, exactGroup{order: rp.order, against: rp.against, id: rp.id, removed: members[i]})
	}
	out := make([][]byte, len(x.onlyList))
	for i, p := range x.onlyList {
		out[i] = appendExactPart(nil, &parts[p])
	}
	return out, nil
}

func appendExactPart(b []byte, p *exactPart) []byte {
	b = append(b, exactPartMagic...)
	b = binary.AppendUvarint(b, uint64(len(p.kept)))
	var rec [exactKeyLen]byte
	for _, r := range p.kept {
		putExactKey(rec[:], r)
		b = append(b, rec[:]...)
	}
	b = binary.AppendUvarint(b, uint64(len(p.groups)))
	for _, g := range p.groups {
		b = binary.AppendUvarint(b, g.order)
		if g.against {
			b = append(b, 1)
		} else {
			b = append(b, 0)
		}
		b = binary.AppendUvarint(b, uint64(len(g.id)))
		b = append(b, g.id...)
		b = binary.AppendUvarint(b, uint64(len(g.removed)))
		for _, o := range g.removed {
			b = binary.AppendUvarint(b, o)
		}
	}
	return b
}

// partReader decodes a reduce result; the first error sticks.
type partReader struct {
	b   []byte
	err error
}

func (r *partReader) fail(format string, a ...any) {
	if r.err == nil {
		r.err = fmt.Errorf(format, a...)
	}
}

func (r *partReader) uvarint() uint64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Uvarint(r.b)
	if n <= 0 {
		r.fail("truncated or overlong number")
		return 0
	}
	r.b = r.b[n:]
	return v
}

// count reads a count of items at least minSize bytes each.
func (r *partReader) count(minSize int) int {
	n := r.uvarint()
	if r.err == nil && n > uint64(len(r.b)/minSize) {
		r.fail("count %d exceeds the %d bytes left", n, len(r.b))
		return 0
	}
	return int(n)
}

func (r *partReader) take(n int) []byte {
	if r.err != nil {
		return nil
	}
	if n > len(r.b) {
		r.fail("truncated")
		return nil
	}
	v := r.b[:n]
	r.b = r.b[n:]
	return v
}

func (r *partReader) byte01() bool {
	b := r.take(1)
	if r.err == nil && b[0] > 1 {
		r.fail("flag byte %d", b[0])
	}
	return r.err == nil && b[0] == 1
}

func (r *partReader) magic(m string) {
	if string(r.take(len(m))) != m && r.err == nil {
		r.fail("not a reduce result of this kind")
	}
}

func (r *partReader) end() {
	if r.err == nil && len(r.b) > 0 {
		r.fail("%d trailing bytes", len(r.b))
	}
}

// decodeExactPart decodes partition p's result; its kept records must be
// in partition p, sorted by hash, and each group's removals ascending.
func decodeExactPart(b []byte, p int) (exactPart, error) {
	r := &partReader{b: b}
	var out exactPart
	r.magic(exactPartMagic)
	nk := r.count(exactKeyLen)
	for i := 0; i < nk && r.err == nil; i++ {
		k := getExactKey(r.take(exactKeyLen))
		if int(k.hi>>(64-exactPartitionBits)) != p {
			r.fail("kept hash %016x is not in partition %d", k.hi, p)
		} else if i > 0 && cmpExactHash(out.kept[i-1], k) >= 0 {
			r.fail("kept hashes not in ascending order")
		}
		out.kept = append(out.kept, k)
	}
	ng := r.count(4)
	for i := 0; i < ng && r.err == nil; i++ {
		var g exactGroup
		g.order = r.uvarint()
		g.against = r.byte01()
		g.id = string(r.take(r.count(1)))
		nr := r.count(1)
		for j := 0; j < nr && r.err == nil; j++ {
			o := r.uvarint()
			if j > 0 && o <= g.removed[j-1] {
				r.fail("removed order keys not ascending")
			}
			g.removed = append(g.removed, o)
		}
		if nr == 0 && r.err == nil {
			r.fail("a group without removed documents")
		}
		out.groups = append(out.groups, g)
	}
	r.end()
	if r.err != nil {
		return exactPart{}, fmt.Errorf("exact dedup reduce result of partition %d: %w", p, r.err)
	}
	return out, nil
}

// LoadSplit takes every partition's ReduceSplit result, in partition
// order, and makes Lookup answer exactly as after Reduce. When the index
// writes key files, kept must call emit with every document that was
// added (order key and id), in input order; it is not called otherwise.
func (x *ExactIndex) LoadSplit(results [][]byte, kept func(emit func(order uint64, id string) error) error) (err error) {
	if x.reduced || x.started {
		return errors.New("dedup: ExactIndex.LoadSplit after Add or Reduce")
	}
	x.reduced = true
	if len(results) != exactPartitions {
		return fmt.Errorf("dedup: %d exact dedup reduce results, want %d", len(results), exactPartitions)
	}
	out, err := x.createHashesOut()
	if err != nil {
		return err
	}
	if out != nil {
		defer func() {
			if err != nil {
				out.Abort()
			}
		}()
	}
	var rec [exactKeyLen]byte
	for p, b := range results {
		part, err := decodeExactPart(b, p)
		if err != nil {
			return err
		}
		for _, g := range part.groups {
			rep := x.rm.addRep(g.order, g.against)
			x.rm.reps[rep].id = g.id
			x.rm.reps[rep].part = uint8(p)
			for _, o := range g.removed {
				x.rm.add(o, rep, 1)
				if g.against {
					x.stats.RemovedPrev++
				}
			}
		}
		for _, k := range part.kept {
			if out == nil {
				break
			}
			putExactKey(rec[:], k)
			if _, err := out.Write(rec[:]); err != nil {
				return err
			}
		}
	}
	x.rm.sort()
	for i := 1; i < len(x.rm.list); i++ {
		if x.rm.list[i].order == x.rm.list[i-1].order {
			return fmt.Errorf("dedup: exact dedup reduce results remove order key %d twice", x.rm.list[i].order)
		}
	}
	x.stats.Removed = int64(len(x.rm.list))
	if out == nil {
		return nil
	}
	ids, err := createIDs(x.opt.KeysOut + ".ids.zst")
	if err != nil {
		return err
	}
	ri := 0
	err = kept(func(order uint64, id string) error {
		for ri < len(x.rm.list) && x.rm.list[ri].order < order {
			ri++
		}
		if ri < len(x.rm.list) && x.rm.list[ri].order == order {
			return nil
		}
		return ids.add(order, []byte(id))
	})
	if err != nil {
		ids.abort()
		return err
	}
	if err = out.Commit(); err != nil {
		ids.abort()
		return fmt.Errorf("dedup: keys: %w", err)
	}
	if err = ids.commit(); err != nil {
		return fmt.Errorf("dedup: keys: %w", err)
	}
	return nil
}
