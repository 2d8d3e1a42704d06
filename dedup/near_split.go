package dedup

// Near dedup reduced in parts by separate processes (a split run).
//
// The parts are the band-key partitions. Buckets never span partitions,
// so the verified pairs of all partitions, found by different tasks, are
// the pairs Reduce finds; only the greedy pass needs them all. A task
// adds every document (signatures, priorities and ids go to its temp
// files as in Reduce, since the heads of its buckets may be any document
// and ranks need every priority) but keeps band keys of its partitions
// only (RestrictPartitions). ReduceSplit ranks the documents, walks each
// of its partitions with a fresh table of verified pairs (so a partition's
// result depends on nothing else) and returns per partition:
//
//	"WNP1", uvarint partition, uvarint documents of this run (n), uvarint documents of the
//	previous run (P); uvarint number of documents in the pairs, per
//	document in index order: uvarint index (the first as is, the others
//	as the gap to the previous minus 1), uvarint order key (for a
//	previous-run document its position in that run's key file), uvarint
//	keep priority, uvarint len(id), id; uvarint number of pairs, per pair
//	in rank order (later, earlier): uvarint position of the later and of
//	the earlier document in the list above, uint16 LE similarity × 10000.
//
// LoadSplit merges the pairs, orders them by rank (previous-run documents
// first, then by priority and input order: the order Reduce ranks by),
// makes the same greedy pass, and writes PREFIX.sigs.zst from the
// caller's input-order walk over the documents' keys, byte-identical to
// Reduce's.

import (
	"cmp"
	"encoding/binary"
	"errors"
	"fmt"
	"slices"
)

const nearPartMagic = "WNP1"

// Partitions returns the number of band-key partitions (the parts of a
// split reduce).
func (x *NearIndex) Partitions() int { return x.opt.Partitions }

// RestrictPartitions makes the index keep only the band keys of the
// partitions ps (ascending, in 0..Partitions()-1). It is called before the
// first Add; ReduceSplit then replaces Reduce.
func (x *NearIndex) RestrictPartitions(ps []int) error {
	if x.started || x.reduced {
		return errors.New("dedup: NearIndex.RestrictPartitions after Add")
	}
	only := make([]bool, x.opt.Partitions)
	for i, p := range ps {
		if p < 0 || p >= x.opt.Partitions || (i > 0 && p <= ps[i-1]) {
			return fmt.Errorf("dedup: partitions %v: want ascending numbers in 0..%d", ps, x.opt.Partitions-1)
		}
		only[p] = true
	}
	x.only, x.onlyList = only, slices.Clone(ps)
	return nil
}

// nearDoc is a document named by a partition result.
type nearDoc struct {
	idx   uint32
	order uint64
	prio  uint64
	id    string
}

// nearPair is a verified pair of a partition result (positions in its
// document list).
type nearPair struct {
	later, earlier uint32
	sim            uint16
}

// nearPart is one partition's reduce result.
type nearPart struct {
	part     uint32
	n, prevN uint32
	docs     []nearDoc
	pairs    []nearPair
}

// ReduceSplit finds and verifies the pairs of the partitions given to
// RestrictPartitions and returns one result per partition, in order. It
// is called once, after the last Add, instead of Reduce; it writes no key
// files and decides nothing.
func (x *NearIndex) ReduceSplit() ([][]byte, error) {
	if x.only == nil {
		return nil, errors.New("dedup: NearIndex.ReduceSplit without RestrictPartitions")
	}
	if x.reduced {
		return nil, errors.New("dedup: NearIndex reduced twice")
	}
	x.reduced = true
	if err := x.cur.flush(); err != nil {
		return nil, err
	}
	if err := x.prios.flush(); err != nil {
		return nil, err
	}
	if x.prevN > 0 {
		if err := x.loadPrev(); err != nil {
			return nil, err
		}
	}
	if err := x.bands.flush(); err != nil {
		return nil, err
	}
	if err := x.rankDocs(); err != nil {
		return nil, err
	}
	// Verified pairs per partition, (later, earlier) in rank order, as
	// dense indices.
	type idxPair struct {
		later, earlier uint32
		sim            uint16
	}
	found := make([][]idxPair, len(x.onlyList))
	need := map[uint32]*nearDoc{}
	w := newBucketWalker(x, nil)
	for i, p := range x.onlyList {
		pairs := NewSorter(pairCodec, x.dir, max(x.budget()/4, 1))
		w.pairs = pairs
		clear(w.seen)
		err := x.walkPartition(p, w)
		var it *Iterator[pairRec]
		if err == nil {
			it, err = pairs.Iterate()
		}
		if err == nil {
			var last uint64
			for {
				v, ok := it.Next()
				if !ok {
					break
				}
				if len(found[i]) > 0 && v.key == last {
					continue // met in another bucket of the partition
				}
				last = v.key
				pr := idxPair{later: x.indexOf(uint32(v.key >> 32)), earlier: x.indexOf(uint32(v.key)), sim: v.sim}
				found[i] = append(found[i], pr)
				for _, d := range []uint32{pr.later, pr.earlier} {
					if need[d] == nil {
						need[d] = &nearDoc{idx: d}
					}
				}
			}
			err = it.Err()
			it.Close()
		}
		pairs.Close()
		if err != nil {
			return nil, err
		}
	}
	if err := x.describeDocs(need); err != nil {
		return nil, err
	}
	out := make([][]byte, len(x.onlyList))
	for i, prs := range found {
		part := nearPart{part: uint32(x.onlyList[i]), n: x.n, prevN: x.prevN}
		pos := map[uint32]uint32{}
		for _, pr := range prs {
			for _, d := range []uint32{pr.later, pr.earlier} {
				if _, ok := pos[d]; !ok {
					pos[d] = 0
					part.docs = append(part.docs, *need[d])
				}
			}
		}
		slices.SortFunc(part.docs, func(a, b nearDoc) int { return cmp.Compare(a.idx, b.idx) })
		for j, d := range part.docs {
			pos[d.idx] = uint32(j)
		}
		for _, pr := range prs {
			part.pairs = append(part.pairs, nearPair{later: pos[pr.later], earlier: pos[pr.earlier], sim: pr.sim})
		}
		out[i] = appendNearPart(nil, &part)
	}
	return out, nil
}

// describeDocs fills the order key, priority and id of the documents in
// need: this run's from the priority and id logs, the previous run's from
// its key file.
func (x *NearIndex) describeDocs(need map[uint32]*nearDoc) error {
	if len(need) == 0 {
		return nil
	}
	idx := x.prevN
	err := x.prios.each(0, func(p uint64) error {
		if d := need[idx]; d != nil {
			d.prio = p
		}
		idx++
		return nil
	})
	if err != nil {
		return err
	}
	rd, err := x.ids.reader()
	if err != nil {
		return err
	}
	for seq := uint32(0); seq < x.n; seq++ {
		order, id, err := rd.next()
		if err != nil {
			return fmt.Errorf("dedup: id log: %w", err)
		}
		if d := need[x.prevN+seq]; d != nil {
			d.order, d.id = order, string(id)
		}
	}
	if x.prevN == 0 {
		return nil
	}
	in, h, err := openNearKeys(x.opt.Against + ".sigs.zst")
	if err != nil {
		return err
	}
	defer in.close()
	for j := uint32(0); j < x.prevN; j++ {
		_, _, _, id, err := in.nearRecord(h, nil, nil)
		if err != nil {
			return err
		}
		if d := need[j]; d != nil {
			d.order, d.id = uint64(j), string(id)
		}
	}
	return nil
}

func appendNearPart(b []byte, p *nearPart) []byte {
	b = append(b, nearPartMagic...)
	b = binary.AppendUvarint(b, uint64(p.part))
	b = binary.AppendUvarint(b, uint64(p.n))
	b = binary.AppendUvarint(b, uint64(p.prevN))
	b = binary.AppendUvarint(b, uint64(len(p.docs)))
	for i, d := range p.docs {
		if i == 0 {
			b = binary.AppendUvarint(b, uint64(d.idx))
		} else {
			b = binary.AppendUvarint(b, uint64(d.idx-p.docs[i-1].idx-1))
		}
		b = binary.AppendUvarint(b, d.order)
		b = binary.AppendUvarint(b, d.prio)
		b = binary.AppendUvarint(b, uint64(len(d.id)))
		b = append(b, d.id...)
	}
	b = binary.AppendUvarint(b, uint64(len(p.pairs)))
	for _, pr := range p.pairs {
		b = binary.AppendUvarint(b, uint64(pr.later))
		b = binary.AppendUvarint(b, uint64(pr.earlier))
		b = binary.LittleEndian.AppendUint16(b, pr.sim)
	}
	return b
}

// decodeNearPart decodes partition p's result: document indices
// ascending and below n+P, pairs naming two different listed documents,
// similarities at most 1.
func decodeNearPart(b []byte, p int) (nearPart, error) {
	r := &partReader{b: b}
	var out nearPart
	r.magic(nearPartMagic)
	if q := r.uvarint(); r.err == nil && q != uint64(p) {
		r.fail("the result of partition %d", q)
	}
	out.part = uint32(p)
	n, prevN := r.uvarint(), r.uvarint()
	if r.err == nil && (n > maxDocs || prevN > maxDocs/2 || n+prevN >= maxDocs) {
		r.fail("%d + %d documents", n, prevN)
	}
	out.n, out.prevN = uint32(n), uint32(prevN)
	nd := r.count(4)
	next := uint64(0)
	for i := 0; i < nd && r.err == nil; i++ {
		gap := r.uvarint()
		if r.err == nil && gap >= n+prevN-next {
			r.fail("document index beyond the %d documents", n+prevN)
			break
		}
		d := nearDoc{idx: uint32(next + gap)}
		next = uint64(d.idx) + 1
		d.order, d.prio = r.uvarint(), r.uvarint()
		d.id = string(r.take(r.count(1)))
		out.docs = append(out.docs, d)
	}
	np := r.count(4)
	for i := 0; i < np && r.err == nil; i++ {
		l, e := r.uvarint(), r.uvarint()
		sb := r.take(2)
		if r.err != nil {
			break
		}
		pr := nearPair{later: uint32(l), earlier: uint32(e), sim: binary.LittleEndian.Uint16(sb)}
		if l >= uint64(len(out.docs)) || e >= uint64(len(out.docs)) || l == e {
			r.fail("pair (%d, %d) of %d documents", l, e, len(out.docs))
		} else if pr.sim > 10000 {
			r.fail("similarity %d/10000", pr.sim)
		}
		out.pairs = append(out.pairs, pr)
	}
	r.end()
	if r.err != nil {
		return nearPart{}, fmt.Errorf("near dedup reduce result: %w", r.err)
	}
	return out, nil
}

// LoadSplit takes every partition's ReduceSplit result, in partition
// order, and makes Lookup answer exactly as after Reduce. When the index
// writes key files, keys must call emit with every document's order key,
// id and key (nil for a document without words), in input order; it is not
// called otherwise.
func (x *NearIndex) LoadSplit(results [][]byte, keys func(emit func(order uint64, id string, k *NearKey) error) error) (err error) {
	if x.reduced || x.started {
		return errors.New("dedup: NearIndex.LoadSplit after Add or Reduce")
	}
	x.reduced = true
	if len(results) != x.opt.Partitions {
		return fmt.Errorf("dedup: %d near dedup reduce results, want %d", len(results), x.opt.Partitions)
	}
	// Documents by index (dense: the comparator below runs n log n
	// times; map lookups there were most of this function's time).
	var docs []nearDoc
	var named []bool
	var n uint32
	type idxPair struct {
		later, earlier uint32
		sim            uint16
	}
	parts := make([]nearPart, len(results))
	total := 0
	for p, b := range results {
		part, err := decodeNearPart(b, p)
		if err != nil {
			return fmt.Errorf("dedup: partition %d: %w", p, err)
		}
		parts[p] = part
		total += len(part.pairs)
	}
	pairs := make([]idxPair, 0, total)
	for p, part := range parts {
		if part.prevN != x.prevN {
			return fmt.Errorf("dedup: partition %d was reduced against %d previous documents, this run has %d", p, part.prevN, x.prevN)
		}
		if p == 0 {
			n = part.n
			// Indices run over the previous run's documents, then this
			// run's.
			all := uint64(x.prevN) + uint64(n)
			if all >= 1<<32 {
				return fmt.Errorf("dedup: %d documents", all)
			}
			docs, named = make([]nearDoc, all), make([]bool, all)
		} else if part.n != n {
			return fmt.Errorf("dedup: partition %d was reduced over %d documents, partition 0 over %d", p, part.n, n)
		}
		for _, d := range part.docs {
			if int(d.idx) >= len(docs) {
				return fmt.Errorf("dedup: partition %d names document %d of %d", p, d.idx, len(docs))
			}
			if named[d.idx] && docs[d.idx] != d {
				return fmt.Errorf("dedup: partitions disagree about document %d", d.idx)
			}
			docs[d.idx], named[d.idx] = d, true
		}
		for _, pr := range part.pairs {
			pairs = append(pairs, idxPair{part.docs[pr.later].idx, part.docs[pr.earlier].idx, pr.sim})
		}
	}
	// Reduce's rank order: previous-run documents first, then by
	// priority, then by input order (index).
	before := func(a, b uint32) int {
		pa, pb := a < x.prevN, b < x.prevN
		switch {
		case pa != pb:
			if pa {
				return -1
			}
			return 1
		case !pa:
			if c := cmp.Compare(docs[a].prio, docs[b].prio); c != 0 {
				return c
			}
		}
		return cmp.Compare(a, b)
	}
	for _, pr := range pairs {
		if pr.later < x.prevN || before(pr.later, pr.earlier) <= 0 {
			return fmt.Errorf("dedup: near dedup reduce results: pair (%d, %d) out of rank order", pr.later, pr.earlier)
		}
	}
	slices.SortFunc(pairs, func(a, b idxPair) int {
		if c := before(a.later, b.later); c != 0 {
			return c
		}
		if c := before(a.earlier, b.earlier); c != 0 {
			return c
		}
		return cmp.Compare(a.sim, b.sim)
	})
	// The greedy pass of Reduce (near_pairs.go), over indices.
	removed := make([]bool, len(docs))
	var rms []rmRank
	var cur uint32
	have, done := false, false
	for _, p := range pairs {
		if !have || p.later != cur {
			cur, have, done = p.later, true, false
		}
		if done || removed[p.earlier] {
			continue
		}
		removed[p.later] = true
		rms = append(rms, rmRank{doc: p.later, kept: p.earlier, sim: p.sim})
		done = true
	}
	slices.SortFunc(rms, func(a, b rmRank) int { return cmp.Compare(a.doc, b.doc) })
	repOf := map[uint32]int32{}
	for _, r := range rms {
		rep, ok := repOf[r.kept]
		if !ok {
			k := docs[r.kept]
			rep = x.rm.addRep(k.order, r.kept < x.prevN)
			x.rm.reps[rep].id = k.id
			repOf[r.kept] = rep
		}
		x.rm.list = append(x.rm.list, removal{order: docs[r.doc].order, rep: rep, sim: r.sim})
		if r.kept < x.prevN {
			x.stats.RemovedPrev++
		}
	}
	x.rm.sort()
	x.stats.Removed = int64(len(x.rm.list))
	if x.opt.KeysOut == "" {
		return nil
	}
	out, err := createNearKeys(x.opt.KeysOut+".sigs.zst", x.opt.Permutations, x.opt.NGram, x.opt.Seed, x.opt.VerifyExact, uint64(n)-uint64(len(rms)))
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			out.abort()
		}
	}()
	seen, ri := uint32(0), 0
	err = keys(func(order uint64, id string, k *NearKey) error {
		if k == nil {
			return nil
		}
		if len(k.Sig) != x.opt.Permutations {
			return fmt.Errorf("dedup: key of %d values, want %d", len(k.Sig), x.opt.Permutations)
		}
		if seen++; seen > n {
			return fmt.Errorf("dedup: more documents than the %d reduced", n)
		}
		for ri < len(x.rm.list) && x.rm.list[ri].order < order {
			ri++
		}
		if ri < len(x.rm.list) && x.rm.list[ri].order == order {
			return nil
		}
		return out.add(k.Sig, k.Shingles, x.opt.VerifyExact, []byte(id))
	})
	if err != nil {
		return err
	}
	if seen != n {
		return fmt.Errorf("dedup: %d documents, %d reduced", seen, n)
	}
	if err = out.commit(); err != nil {
		return fmt.Errorf("dedup: keys: %w", err)
	}
	return nil
}
