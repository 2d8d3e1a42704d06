package shard

import (
	"hash/maphash"
	"sync/atomic"
)

// This file holds the byte-pair encoder shared by the tiktoken encodings
// and byte-level tokenizer.json files, and the cache of encoded pieces.
//
// A piece starts as one token per byte. Each step merges the adjacent pair
// of tokens with the lowest rank, the leftmost one among equal ranks, until
// no adjacent pair has a rank. For tiktoken encodings the rank of a pair
// (a, b) is the id of the token whose bytes are a's then b's; for
// tokenizer.json it is the pair's line in the merges list. Both reduce to
// one table from a pair of token ids to (rank, merged id), keyed by a
// packed uint64 so a lookup hashes eight bytes instead of a string.

// noRank marks a pair that cannot merge.
const noRank = ^uint32(0)

// scanLimit is the piece length, in tokens, up to which merges are found
// by a linear scan (O(n²) but cache-friendly); longer pieces (CJK runs,
// long symbol runs) use a heap, O(n log n).
const scanLimit = 64

// bpe is an immutable byte-pair encoder.
type bpe struct {
	byteTok [256]uint32       // token of each single byte
	pairs   map[uint64]uint64 // a<<32|b -> rank<<32|merged
	// whole maps a token's bytes to its id; when wholeFirst is set a
	// piece that is itself a token is emitted as that token without
	// merging (what the tiktoken reference does, and tokenizer.json's
	// ignore_merges).
	whole      map[string]uint32
	wholeFirst bool
}

func (e *bpe) pair(a, b uint32) (rank, merged uint32) {
	v, ok := e.pairs[uint64(a)<<32|uint64(b)]
	if !ok {
		return noRank, 0
	}
	return uint32(v >> 32), uint32(v)
}

// encode appends the tokens of one piece to dst.
func (e *bpe) encode(piece string, dst []uint32) []uint32 {
	if len(piece) == 1 {
		return append(dst, e.byteTok[piece[0]])
	}
	if e.wholeFirst {
		if id, ok := e.whole[piece]; ok {
			return append(dst, id)
		}
	}
	if len(piece) <= scanLimit {
		return e.mergeScan(piece, dst)
	}
	return e.mergeHeap(piece, dst)
}

// mergeScan merges with a linear search for the best pair; the work
// arrays live on the stack.
func (e *bpe) mergeScan(piece string, dst []uint32) []uint32 {
	var idsBuf, ranksBuf, mergedBuf [scanLimit]uint32
	n := len(piece)
	ids, ranks, merged := idsBuf[:n], ranksBuf[:n], mergedBuf[:n]
	for i := 0; i < n; i++ {
		ids[i] = e.byteTok[piece[i]]
	}
	for i := 0; i+1 < n; i++ {
		ranks[i], merged[i] = e.pair(ids[i], ids[i+1])
	}
	ranks[n-1] = noRank
	for n > 1 {
		best, bi := noRank, -1
		for i := 0; i+1 < n; i++ {
			if ranks[i] < best {
				best, bi = ranks[i], i
			}
		}
		if bi < 0 {
			break
		}
		ids[bi] = merged[bi]
		copy(ids[bi+1:n-1], ids[bi+2:n])
		copy(ranks[bi+1:n-1], ranks[bi+2:n])
		copy(merged[bi+1:n-1], merged[bi+2:n])
		n--
		if bi+1 < n {
			ranks[bi], merged[bi] = e.pair(ids[bi], ids[bi+1])
		} else {
			ranks[bi] = noRank
		}
		if bi > 0 {
			ranks[bi-1], merged[bi-1] = e.pair(ids[bi-1], ids[bi])
		}
	}
	return append(dst, ids[:n]...)
}

// heapNode is one token of a piece in mergeHeap's linked list.
type heapNode struct {
	id         uint32
	prev, next int32
	rank       uint32 // rank of merging with next
	merged     uint32
}

type heapItem struct {
	rank uint32
	pos  int32
}

// mergeHeap gives the same result as mergeScan for long pieces: a min-heap
// of candidate pairs ordered by rank then position (leftmost first), with
// stale entries skipped when popped.
func (e *bpe) mergeHeap(piece string, dst []uint32) []uint32 {
	n := int32(len(piece))
	nodes := make([]heapNode, n)
	for i := int32(0); i < n; i++ {
		nodes[i] = heapNode{id: e.byteTok[piece[i]], prev: i - 1, next: i + 1, rank: noRank}
	}
	nodes[n-1].next = -1
	h := make([]heapItem, 0, n)
	for i := int32(0); i+1 < n; i++ {
		r, m := e.pair(nodes[i].id, nodes[i+1].id)
		nodes[i].rank, nodes[i].merged = r, m
		if r != noRank {
			h = append(h, heapItem{r, i})
		}
	}
	less := func(a, b heapItem) bool {
		if a.rank != b.rank {
			return a.rank < b.rank
		}
		return a.pos < b.pos
	}
	down := func(i int) {
		for {
			c := 2*i + 1
			if c >= len(h) {
				return
			}
			if c+1 < len(h) && less(h[c+1], h[c]) {
				c++
			}
			if !less(h[c], h[i]) {
				return
			}
			h[i], h[c] = h[c], h[i]
			i = c
		}
	}
	up := func(i int) {
		for i > 0 {
			p := (i - 1) / 2
			if !less(h[i], h[p]) {
				return
			}
			h[i], h[p] = h[p], h[i]
			i = p
		}
	}
	for i := len(h)/2 - 1; i >= 0; i-- {
		down(i)
	}
	for len(h) > 0 {
		top := h[0]
		last := len(h) - 1
		h[0] = h[last]
		h = h[:last]
		down(0)
		i := top.pos
		nd := &nodes[i]
		if nd.rank != top.rank || nd.next < 0 || nd.id == noRank {
			continue // stale
		}
		j := nd.next
		nd.id = nd.merged
		nd.next = nodes[j].next
		if nd.next >= 0 {
			nodes[nd.next].prev = i
		}
		nodes[j].id, nodes[j].rank = noRank, noRank
		for _, b := range [2]int32{i, nd.prev} {
			if b < 0 {
				continue
			}
			bn := &nodes[b]
			if bn.next < 0 {
				bn.rank = noRank
				continue
			}
			bn.rank, bn.merged = e.pair(bn.id, nodes[bn.next].id)
			if bn.rank != noRank {
				h = append(h, heapItem{bn.rank, b})
				up(len(h) - 1)
			}
		}
	}
	for i := int32(0); i >= 0; i = nodes[i].next {
		dst = append(dst, nodes[i].id)
	}
	return dst
}

// Tuning of the piece cache.
const (
	// cacheSlots is the number of cached pieces (a power of two). Web
	// text's frequent pieces (a few tens of thousands of words) fit; the
	// slot array costs 8 bytes per slot plus the entries held.
	cacheSlots = 1 << 17
	// cacheMaxPiece is the longest piece cached: longer pieces are rare
	// and would only evict useful entries.
	cacheMaxPiece = 32
)

// cacheEntry is immutable once published.
type cacheEntry struct {
	key string
	ids []uint32
}

// pieceCache is a bounded, lock-free, 2-way set-associative cache from a
// piece to its tokens. Readers load the set's slots atomically and compare
// keys; a miss computes the tokens and publishes a new entry, evicting the
// older of the set's two. Entries are immutable, so concurrent readers and writers need
// no lock, and since a piece's tokens are a pure function of the piece the
// cache changes only speed, never results.
type pieceCache struct {
	seed  maphash.Seed
	slots []atomic.Pointer[cacheEntry]
}

func newPieceCache() *pieceCache {
	return &pieceCache{seed: maphash.MakeSeed(), slots: make([]atomic.Pointer[cacheEntry], cacheSlots)}
}

// set returns the two slots a piece may live in (2-way set associative,
// so two frequent pieces that hash alike do not evict each other).
func (c *pieceCache) set(piece string) (*atomic.Pointer[cacheEntry], *atomic.Pointer[cacheEntry]) {
	i := maphash.String(c.seed, piece) & (cacheSlots - 1) &^ 1
	return &c.slots[i], &c.slots[i+1]
}

// get returns the cached tokens of piece, or nil.
func (c *pieceCache) get(piece string) []uint32 {
	a, b := c.set(piece)
	if ent := a.Load(); ent != nil && ent.key == piece {
		return ent.ids
	}
	if ent := b.Load(); ent != nil && ent.key == piece {
		return ent.ids
	}
	return nil
}

// put publishes the tokens of piece (copying both) in the first slot of
// its set, moving the previous occupant to the second.
func (c *pieceCache) put(piece string, ids []uint32) {
	ent := &cacheEntry{key: string([]byte(piece)), ids: append([]uint32(nil), ids...)}
	a, b := c.set(piece)
	if old := a.Load(); old != nil {
		b.Store(old)
	}
	a.Store(ent)
}
