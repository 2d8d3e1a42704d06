package dedup

// The reduce of near dedup: ranks, candidate pairs per band-key
// partition, and the greedy pass that decides what survives.
//
// Ranks. Every document gets a rank: its position in keep-priority order
// (priority, then input order), previous-run documents first. With equal
// priorities (keep: first) the rank is the dense index itself and no table
// is built; otherwise the (priority, index) pairs are sorted externally
// and two uint32 tables (rank → index, index → rank) are kept.
//
// Candidate pairs. A partition file holds the band keys whose band hash
// falls in one of KeyPartitions contiguous hash ranges. Its keys, rewritten
// as bandHash<<32 | rank, are sorted (a radix sort when the partition fits
// the memory budget, else an external sort), so each bucket of equal band
// hashes arrives in rank order. The first BucketCap members of a bucket
// are its heads; every member is compared with the heads ranked before it
// and each pair at or above the threshold is written to an external sort
// of pair records (later rank, earlier rank, similarity). Buckets never
// span partitions, and the pairs found are a set, so the decisions are the
// same for any partition count and any order of partitions.
//
// A pair of near copies shares most of its bands, so it meets in up to
// `bands` buckets. A direct-mapped table of verified pairs (8-16 bytes per
// document: a power of two entries; at most 1/16 of the memory budget) lets later meetings skip
// the two signature reads and the comparison; a pair lost from the table
// by a collision is only compared again. Partitions are walked in hash
// order, so the buckets come in the same global order for any partition
// count and even the comparison count does not depend on it.
//
// Greedy pass. The pair records sorted by (later, earlier) are walked
// once: when the walk reaches the pairs of document d, every document
// ranked before d is already decided, and d is removed "of" the first
// (best-ranked) earlier partner that was kept. One bit per document
// remembers who was removed. A pair found in several bands appears several
// times; only the first counts.

import (
	"cmp"
	"encoding/binary"
	"math"
	"slices"
)

// prioRec is a (priority, index) record for ranking.
type prioRec struct {
	prio uint64
	idx  uint32
}

var prioCodec = Codec[prioRec]{
	Size: 12,
	Put: func(b []byte, v prioRec) {
		binary.LittleEndian.PutUint64(b, v.prio)
		binary.LittleEndian.PutUint32(b[8:], v.idx)
	},
	Get: func(b []byte) prioRec {
		return prioRec{binary.LittleEndian.Uint64(b), binary.LittleEndian.Uint32(b[8:])}
	},
	Compare: func(a, b prioRec) int {
		if c := cmp.Compare(a.prio, b.prio); c != 0 {
			return c
		}
		return cmp.Compare(a.idx, b.idx)
	},
}

// pairRec is a verified pair: key = laterRank<<32 | earlierRank, and the
// similarity × 10000.
type pairRec struct {
	key uint64
	sim uint16
}

var pairCodec = Codec[pairRec]{
	Size: 10,
	Put: func(b []byte, v pairRec) {
		binary.LittleEndian.PutUint64(b, v.key)
		binary.LittleEndian.PutUint16(b[8:], v.sim)
	},
	Get: func(b []byte) pairRec {
		return pairRec{binary.LittleEndian.Uint64(b), binary.LittleEndian.Uint16(b[8:])}
	},
	Compare: func(a, b pairRec) int {
		if c := cmp.Compare(a.key, b.key); c != 0 {
			return c
		}
		return cmp.Compare(a.sim, b.sim)
	},
}

func quantizeSim(s float64) uint16 { return uint16(math.Round(s * 10000)) }

// rankDocs builds the rank tables when priorities differ.
func (x *NearIndex) rankDocs() error {
	if !x.prioDiff {
		return nil
	}
	total := x.prevN + x.n
	s := NewSorter(prioCodec, x.dir, x.budget())
	defer s.Close()
	idx := x.prevN
	err := x.prios.each(0, func(p uint64) error {
		err := s.Add(prioRec{p, idx})
		idx++
		return err
	})
	if err != nil {
		return err
	}
	x.stats.Runs += s.Runs()
	it, err := s.Iterate()
	if err != nil {
		return err
	}
	defer it.Close()
	x.stats.SpilledBytes += s.SpilledBytes()
	x.perm, x.rank = make([]uint32, total), make([]uint32, total)
	for j := uint32(0); j < x.prevN; j++ {
		x.perm[j], x.rank[j] = j, j
	}
	r := x.prevN
	for {
		v, ok := it.Next()
		if !ok {
			break
		}
		x.perm[r], x.rank[v.idx] = v.idx, r
		r++
	}
	return it.Err()
}

// indexOf returns the dense index of the document of a rank.
func (x *NearIndex) indexOf(rank uint32) uint32 {
	if x.perm == nil {
		return rank
	}
	return x.perm[rank]
}

// rankKey rewrites a band key's index as the document's rank.
func (x *NearIndex) rankKey(k uint64) uint64 {
	if x.rank == nil {
		return k
	}
	h, idx := splitBandKey(k)
	return bandKey(h, x.rank[idx])
}

// walkPartition sorts partition p's keys by (band hash, rank) and feeds
// them to w.
func (x *NearIndex) walkPartition(p int, w *bucketWalker) error {
	n := x.bands.count(p)
	if x.prevBd != nil {
		n += x.prevBd.count(p)
	}
	x.stats.Records += n
	w.reset()
	// Resident besides this partition's keys: rank tables, the pair
	// table and the pair sort's buffer.
	tables := 8*int64(len(x.rank)) + 8*int64(len(w.seen)) + w.pairs.ResidentBytes()
	budget := max(x.budget()-x.budget()/4, 1)
	if 16*n <= budget {
		keys := w.keys[:0]
		add := func(k uint64) error { keys = append(keys, x.rankKey(k)); return nil }
		if x.prevBd != nil {
			if err := x.prevBd.each(p, add); err != nil {
				return err
			}
		}
		if err := x.bands.each(p, add); err != nil {
			return err
		}
		if cap(w.tmp) < len(keys) {
			w.tmp = make([]uint64, len(keys))
		}
		sortBandKeys(keys, w.tmp[:len(keys)], x.rank != nil)
		x.stats.ResidentBytes = max(x.stats.ResidentBytes, 8*int64(cap(keys)+cap(w.tmp))+tables)
		for _, k := range keys {
			if err := w.add(k); err != nil {
				return err
			}
		}
		w.keys = keys
		return nil
	}
	// Larger than the budget: release the in-memory buffers and sort
	// externally.
	w.keys, w.tmp = nil, nil
	s := NewSorter(Uint64Codec, x.dir, budget)
	defer s.Close()
	add := func(k uint64) error { return s.Add(x.rankKey(k)) }
	if x.prevBd != nil {
		if err := x.prevBd.each(p, add); err != nil {
			return err
		}
	}
	if err := x.bands.each(p, add); err != nil {
		return err
	}
	x.stats.Runs += s.Runs()
	x.stats.ResidentBytes = max(x.stats.ResidentBytes, s.ResidentBytes()+tables)
	it, err := s.Iterate()
	if err != nil {
		return err
	}
	defer it.Close()
	x.stats.SpilledBytes += s.SpilledBytes()
	for {
		k, ok := it.Next()
		if !ok {
			break
		}
		if err := w.add(k); err != nil {
			return err
		}
	}
	return it.Err()
}

// bucketWalker compares the members of each bucket with its heads (the
// first BucketCap members in rank order; their buffers are reused from
// bucket to bucket) and records the verified pairs.
type bucketWalker struct {
	x         *NearIndex
	pairs     *Sorter[pairRec]
	seen      []uint64 // verified pairs (later<<32 | earlier), direct-mapped; 0 = empty
	seenMask  uint64
	heads     []loaded
	nh        int
	member    loaded
	hash      uint32
	last      uint32
	started   bool
	keys, tmp []uint64 // partition buffers, reused
}

func newBucketWalker(x *NearIndex, pairs *Sorter[pairRec]) *bucketWalker {
	w := &bucketWalker{x: x, pairs: pairs, heads: make([]loaded, 1, min(x.opt.BucketCap, 64))}
	size := uint64(1 << 10)
	for size < uint64(x.prevN+x.n) && 8*2*size <= uint64(x.budget())/16 {
		size *= 2
	}
	w.seen, w.seenMask = make([]uint64, size), size-1
	return w
}

// slot returns the table position of a pair key (a multiply-shift hash).
func (w *bucketWalker) slot(key uint64) uint64 {
	return (key * 0x9e3779b97f4a7c15 >> 20) & w.seenMask
}

func (w *bucketWalker) reset() { w.nh, w.started = 0, false }

func (w *bucketWalker) add(key uint64) error {
	x := w.x
	h, r := splitBandKey(key)
	if !w.started || h != w.hash {
		w.started, w.hash, w.nh = true, h, 0
	} else if r == w.last {
		return nil // two bands of one document with the same hash
	}
	w.last = r
	if w.nh == 0 {
		w.heads[0].rank, w.heads[0].ok = r, false // loaded only if a second member comes
		w.nh = 1
		return nil
	}
	m := &w.member
	m.rank, m.ok = r, false
	for i := 0; i < w.nh; i++ {
		hd := &w.heads[i]
		if r < x.prevN && hd.rank < x.prevN {
			continue // both from the previous run: never compared
		}
		key := uint64(r)<<32 | uint64(hd.rank)
		sl := w.slot(key)
		if w.seen[sl] == key {
			continue // verified in an earlier bucket
		}
		if !hd.ok {
			if err := x.load(hd, x.indexOf(hd.rank)); err != nil {
				return err
			}
		}
		if !m.ok {
			if err := x.load(m, x.indexOf(r)); err != nil {
				return err
			}
		}
		x.stats.Candidates++
		if sim := x.similarity(hd, m); sim >= x.opt.Threshold {
			x.stats.Verified++
			w.seen[sl] = key
			if err := w.pairs.Add(pairRec{key: key, sim: quantizeSim(sim)}); err != nil {
				return err
			}
		}
	}
	if w.nh < x.opt.BucketCap {
		if w.nh == len(w.heads) {
			w.heads = append(w.heads, loaded{})
		}
		w.heads[w.nh], w.member = w.member, w.heads[w.nh]
		w.nh++
	}
	return nil
}

// rmRank is one removal decided by the greedy pass (ranks until Reduce
// maps them back to indices).
type rmRank struct {
	doc, kept uint32
	sim       uint16
}

// greedy walks the verified pairs in (later, earlier) rank order and
// removes each document that has a kept earlier partner.
func (x *NearIndex) greedy(pairs *Sorter[pairRec]) ([]rmRank, error) {
	x.stats.Runs += pairs.Runs()
	it, err := pairs.Iterate()
	if err != nil {
		return nil, err
	}
	defer it.Close()
	x.stats.SpilledBytes += pairs.SpilledBytes()
	total := x.prevN + x.n
	x.stats.ResidentBytes = max(x.stats.ResidentBytes, pairs.ResidentBytes()+8*int64(len(x.rank))+int64(total)/8)
	removed := make([]uint64, (uint64(total)+63)/64)
	var out []rmRank
	var cur uint32
	have, done := false, false
	for {
		p, ok := it.Next()
		if !ok {
			break
		}
		later, earlier := uint32(p.key>>32), uint32(p.key)
		if !have || later != cur {
			cur, have, done = later, true, false
		}
		if done || removed[earlier/64]>>(earlier%64)&1 != 0 {
			continue
		}
		removed[later/64] |= 1 << (later % 64)
		out = append(out, rmRank{doc: later, kept: earlier, sim: p.sim})
		done = true
	}
	return out, it.Err()
}

// sortBandKeys sorts one partition's keys by (hash, rank). Without rank
// tables the keys arrive in rank (= index) order, so a stable sort by the
// high 32 bits alone is enough: two 16-bit LSD radix passes through tmp
// (len(tmp) == len(keys)); with rank tables all four 16-bit digits are
// sorted. Small slices use a comparison sort (same result: keys are
// distinct).
func sortBandKeys(keys, tmp []uint64, full bool) {
	if len(keys) < 1<<14 {
		slices.Sort(keys)
		return
	}
	var count [1 << 16]int
	if full {
		radixPass(keys, tmp, 0, &count)
		radixPass(tmp, keys, 16, &count)
	}
	radixPass(keys, tmp, 32, &count)
	radixPass(tmp, keys, 48, &count)
}

func radixPass(src, dst []uint64, shift uint, count *[1 << 16]int) {
	clear(count[:])
	for _, k := range src {
		count[(k>>shift)&0xffff]++
	}
	pos := 0
	for i, c := range count {
		count[i] = pos
		pos += c
	}
	dst = dst[:len(src)]
	for _, k := range src {
		d := (k >> shift) & 0xffff
		dst[count[d]] = k
		count[d]++
	}
}
