package dedup

// Contamination index: which eval items share word n-grams with a document.
//
// Following the test-set contamination analysis of Brown et al. 2020
// ("Language Models are Few-Shot Learners", appendix on contamination), an
// eval item counts as present in a training document when the document
// contains one of the item's word 13-grams (ngram is configurable). Items
// shorter than n words are indexed as one n-gram of all their words and
// must appear in the document as that exact word sequence.
//
// Building. Every eval item is normalized (see contam_normalize.go),
// each word is hashed with xxh3-64 and each n-gram's hash is a polynomial
// over its word hashes modulo 2^64, finalized by a 64-bit mixer and salted
// with the n-gram's length. The (hash, item) pairs of all items of all
// eval sets are sorted once into one table per n-gram length: a sorted
// array of distinct hashes, a parallel posting array (the item, or an
// offset into a shared overflow list when several items share the n-gram)
// and a directory indexed by the hash's top bits that points at the first
// key of each bucket, so a lookup reads one directory entry and usually
// one or two keys. The table lives in memory; it is as large as the eval
// sets, not the corpus:
//
//	bytes per distinct n-gram = 8 (hash) + 4 (posting) + 4 × buckets/keys
//	(directory, between 2 and 4) ≈ 14–16 bytes, plus 4 bytes per extra
//	(n-gram, item) pair when n-grams are shared between items.
//
// BenchmarkContamLookup compares layouts on the 6M n-grams of 20 sets of
// 10k items, probed as a scan probes (99% misses): this layout took 46–63
// ns per lookup, an open-addressing hash set with linear probing at load
// <= 0.5 took 41–76 ns (the same within this shared machine's noise) for
// 24–48 bytes per n-gram, and plain binary search took 530–630 ns. The
// scan also loads the directory entries of 32 windows before comparing
// any key, so the CPU overlaps their cache misses.
//
// Scanning. A document is tokenized once and a prefix array of the
// polynomial hashes gives any window's hash in O(1), so the document is
// scanned once whatever the number of eval sets: one lookup per word for
// the n-gram table plus one per distinct short-item length present.
// Scanning allocates nothing per n-gram: the scanner reuses its buffers
// (memory per scanner is bounded by the longest document). Short-item
// hits are verified against the item's normalized text, so they are exact;
// n-gram hits trust the 64-bit hash (the chance of a false hit is about
// 2^-64 per lookup).
//
// Document frequency. Every key has a number (KeyCount keys in all), so a
// caller can count in how many corpus documents each matched key occurs
// with a []uint32 of that length (4 bytes per n-gram) and pass the keys to
// ignore as a bitset to Scan, as Brown et al. ignored n-grams frequent in
// the training data.
//
// Cutting. CutSpans implements the same paper's removal: the matched span
// plus a margin of characters either side is removed, the document is
// split there, pieces shorter than a minimum are dropped, and a document
// split into too many pieces is reported so the caller can drop it.
//
// Not implemented: spilling the index to disk (eval sets are small next
// to memory: 20 sets of 10k items are about 8M n-grams, ~120 MB); fuzzy
// matching below the n-gram level (a paraphrase is found only through the
// n-grams it keeps verbatim).

import (
	"fmt"
	"math/bits"
	"slices"
	"strings"
	"unicode"
	"unicode/utf8"
	"unsafe"
)

// Tuning constants.
const (
	// contamMul is the odd multiplier of the polynomial n-gram hash (the
	// 64-bit golden ratio: odd, with well-spread bits).
	contamMul = 0x9E3779B97F4A7C15
	// contamLenSalt separates n-grams of different lengths.
	contamLenSalt = 0xC2B2AE3D27D4EB4F
	// postMulti marks a posting that points into the overflow list.
	postMulti = 1 << 31
	// maxContamItems is the largest number of items one index holds
	// (postings are 31-bit item numbers).
	maxContamItems = postMulti - 1
	// contamBatch is the number of windows whose directory entries are
	// loaded before any key is compared (enough to overlap memory
	// latency, small enough to stay in registers and L1).
	contamBatch = 32
)

// contamMix is the finalizer of MurmurHash3 (public domain): it spreads every
// input bit over the output, so the top bits index the directory evenly.
func contamMix(h uint64) uint64 {
	h ^= h >> 33
	h *= 0xff51afd7ed558ccd
	h ^= h >> 33
	h *= 0xc4ceb9fe1a85ec53
	h ^= h >> 33
	return h
}

// contamWindowHash finalizes the raw polynomial hash of a window of length words.
func contamWindowHash(raw uint64, length int) uint64 {
	return contamMix(raw ^ uint64(length)*contamLenSalt)
}

// contamTable maps n-gram hashes of one length to postings.
type contamTable struct {
	length int      // words per key
	keys   []uint64 // sorted distinct hashes
	vals   []uint32 // per key: item number, or postMulti|offset into multi
	dir    []uint32 // dir[b] = index of the first key whose top bits are >= b
	shift  uint     // 64 - directory bits
	base   uint32   // number of keys[0] in the index-wide key numbering
	texts  []string // short tables only: normalized words of each key
}

// find returns the position of h in t.keys, or -1.
func (t *contamTable) find(h uint64) int {
	b := h >> t.shift
	lo, hi := t.dir[b], t.dir[b+1]
	for k := lo; k < hi; k++ {
		if t.keys[k] == h {
			return int(k)
		}
	}
	return -1
}

// bytes returns the table's resident size.
func (t *contamTable) bytes() int64 {
	n := int64(len(t.keys))*8 + int64(len(t.vals))*4 + int64(len(t.dir))*4
	for _, s := range t.texts {
		n += int64(len(s)) + 16
	}
	return n
}

// contamItem is what the index keeps about one item.
type contamItem struct {
	words  int32 // normalized words
	ngrams int32 // distinct keys (1 for a short item, 0 for an empty one)
}

type contamPair struct {
	h    uint64
	item uint32
}

// ContamBuilder collects eval items and builds a ContamIndex.
type ContamBuilder struct {
	n     int
	tok   *contamTokenizer
	pre   []uint64
	pow   []uint64
	pairs []contamPair
	short map[int][]contamPair // by length < n
	texts map[uint64]string    // short-item hash -> normalized words
	items []contamItem
}

// NewContamBuilder starts an index of word n-grams of length n (n >= 1).
func NewContamBuilder(n int) *ContamBuilder {
	if n < 1 {
		n = 1
	}
	return &ContamBuilder{n: n, tok: newContamTokenizer(), pow: contamPowers(n),
		short: map[int][]contamPair{}, texts: map[uint64]string{}}
}

// powers returns contamMul^k for k = 0..n.
func contamPowers(n int) []uint64 {
	p := make([]uint64, n+1)
	p[0] = 1
	for k := 1; k <= n; k++ {
		p[k] = p[k-1] * contamMul
	}
	return p
}

// contamPrefix fills pre with the polynomial prefix hashes of hashes:
// pre[k+1] = pre[k]·M + hashes[k], so the window [i, i+L) hashes to
// pre[i+L] − pre[i]·M^L.
func contamPrefix(pre []uint64, hashes []uint64) []uint64 {
	pre = append(pre[:0], 0)
	var h uint64
	for _, w := range hashes {
		h = h*contamMul + w
		pre = append(pre, h)
	}
	return pre
}

// Add indexes one eval item and returns its item number (numbers count
// from 0 in Add order) and its number of normalized words. An item with
// no words is numbered but can never match; callers should report it.
func (b *ContamBuilder) Add(text string) (item int, words int, err error) {
	item, words, _, err = b.AddParts([]string{text}, 1)
	return item, words, err
}

// AddParts indexes one eval item made of several texts (a question and
// each of its answer choices, say). Each part is indexed on its own, so no
// n-gram spans two parts, and its match unit is decided by its length in
// normalized words: a part of n words or more contributes its n-grams, a
// part of minWords to n-1 words must occur whole (one key of all its
// words), and a shorter part is not indexed at all (too short to tell a
// quotation from a common phrase). words is the length of the longest
// indexed part (0: nothing of the item is indexed, so it can never match)
// and keys the number of n-grams and whole parts added (before keys
// shared with other items are merged).
func (b *ContamBuilder) AddParts(parts []string, minWords int) (item, words, keys int, err error) {
	if len(b.items) >= maxContamItems {
		return 0, 0, 0, fmt.Errorf("contamination index: more than %d items", maxContamItems)
	}
	if minWords < 1 {
		minWords = 1
	}
	item = len(b.items)
	for _, text := range parts {
		w, k, err := b.addPart(item, text, minWords)
		if err != nil {
			return 0, 0, 0, err
		}
		words, keys = max(words, w), keys+k
	}
	b.items = append(b.items, contamItem{words: int32(words)})
	return item, words, keys, nil
}

// addPart indexes one part of item; it returns the part's words and keys
// (0, 0 when the part is shorter than minWords).
func (b *ContamBuilder) addPart(item int, text string, minWords int) (words, keys int, err error) {
	b.tok.tokenize(text)
	w := len(b.tok.words)
	if w < minWords {
		return 0, 0, nil
	}
	b.pre = contamPrefix(b.pre, b.tok.hashes)
	if w < b.n {
		h := contamWindowHash(b.pre[w], w)
		b.short[w] = append(b.short[w], contamPair{h, uint32(item)})
		norm := string(b.tok.norm[:len(b.tok.norm)-1])
		if old, ok := b.texts[h]; ok && old != norm {
			return 0, 0, fmt.Errorf("contamination index: 64-bit hash collision between %q and %q", old, norm)
		}
		b.texts[h] = norm
		return w, 1, nil
	}
	pn := b.pow[b.n]
	for i := 0; i+b.n <= w; i++ {
		h := contamWindowHash(b.pre[i+b.n]-b.pre[i]*pn, b.n)
		b.pairs = append(b.pairs, contamPair{h, uint32(item)})
	}
	return w, w - b.n + 1, nil
}

// Build sorts the collected n-grams into an index. The builder must not
// be used afterwards.
func (b *ContamBuilder) Build() *ContamIndex {
	x := &ContamIndex{n: b.n, items: b.items}
	x.main = x.buildTable(b.n, b.pairs, nil)
	b.pairs = nil
	lengths := make([]int, 0, len(b.short))
	for l := range b.short {
		lengths = append(lengths, l)
	}
	slices.Sort(lengths)
	base := uint32(len(x.main.keys))
	for _, l := range lengths {
		t := x.buildTable(l, b.short[l], b.texts)
		t.base = base
		base += uint32(len(t.keys))
		x.short = append(x.short, t)
	}
	x.keyCount = int(base)
	b.short, b.texts, b.items = nil, nil, nil
	return x
}

// buildTable sorts pairs (destroying them) into a table of n-grams of
// length words and counts each item's distinct keys.
func (x *ContamIndex) buildTable(length int, pairs []contamPair, texts map[uint64]string) *contamTable {
	slices.SortFunc(pairs, func(a, b contamPair) int {
		if a.h != b.h {
			if a.h < b.h {
				return -1
			}
			return 1
		}
		return int(a.item) - int(b.item)
	})
	t := &contamTable{length: length}
	var items []uint32
	flush := func(h uint64) {
		t.keys = append(t.keys, h)
		if len(items) == 1 {
			t.vals = append(t.vals, items[0])
		} else {
			t.vals = append(t.vals, postMulti|uint32(len(x.multi)))
			x.multi = append(x.multi, uint32(len(items)))
			x.multi = append(x.multi, items...)
		}
		for _, it := range items {
			x.items[it].ngrams++
		}
		if texts != nil {
			t.texts = append(t.texts, texts[h])
		}
	}
	for i, p := range pairs {
		if i > 0 && p.h != pairs[i-1].h {
			flush(pairs[i-1].h)
			items = items[:0]
		}
		if len(items) == 0 || items[len(items)-1] != p.item {
			items = append(items, p.item)
		}
	}
	if len(pairs) > 0 {
		flush(pairs[len(pairs)-1].h)
	}
	// Directory over the top dirBits bits: between one and two keys per
	// bucket on average.
	dirBits := 0
	if len(t.keys) > 1 {
		dirBits = bits.Len(uint(len(t.keys))) - 1
	}
	t.shift = uint(64 - dirBits)
	t.dir = make([]uint32, (1<<dirBits)+1)
	k := 0
	for bkt := 0; bkt < 1<<dirBits; bkt++ {
		for k < len(t.keys) && int(t.keys[k]>>t.shift) < bkt {
			k++
		}
		t.dir[bkt] = uint32(k)
	}
	t.dir[1<<dirBits] = uint32(len(t.keys))
	return t
}

// ContamIndex is an immutable index of eval items' word n-grams. It is
// safe for concurrent use; each goroutine scans with its own ContamScanner.
type ContamIndex struct {
	n        int
	main     *contamTable   // n-grams of length n
	short    []*contamTable // whole short items, one table per length < n
	multi    []uint32       // overflow postings: count, items...
	items    []contamItem
	keyCount int
}

// N returns the n-gram length in words.
func (x *ContamIndex) N() int { return x.n }

// Items returns the number of items added.
func (x *ContamIndex) Items() int { return len(x.items) }

// ItemWords returns the number of normalized words of item.
func (x *ContamIndex) ItemWords(item int) int { return int(x.items[item].words) }

// ItemNgrams returns the number of distinct keys of item (1 for an item
// shorter than n words, 0 for an empty one).
func (x *ContamIndex) ItemNgrams(item int) int { return int(x.items[item].ngrams) }

// KeyCount returns the number of distinct keys (n-grams and short items);
// keys are numbered 0..KeyCount-1 in ContamHit.Key.
func (x *ContamIndex) KeyCount() int { return x.keyCount }

// ShortLengths returns the distinct word lengths of short items, each of
// which costs one extra lookup per document word.
func (x *ContamIndex) ShortLengths() []int {
	out := make([]int, len(x.short))
	for i, t := range x.short {
		out[i] = t.length
	}
	return out
}

// Bytes returns the resident size of the index (keys, postings,
// directories, overflow postings and short-item texts).
func (x *ContamIndex) Bytes() int64 {
	n := x.main.bytes() + int64(len(x.multi))*4 + int64(len(x.items))*8
	for _, t := range x.short {
		n += t.bytes()
	}
	return n
}

// BytesPerNgram returns Bytes divided by KeyCount (0 for an empty index).
func (x *ContamIndex) BytesPerNgram() float64 {
	if x.keyCount == 0 {
		return 0
	}
	return float64(x.Bytes()) / float64(x.keyCount)
}

// ContamHit is one match of an eval item in a document: the document's
// words [Start, End) form one of the item's n-grams (or the whole short
// item). Key numbers the matched key for document-frequency counting.
type ContamHit struct {
	Item  uint32
	Key   uint32
	Start int32
	End   int32
}

// ContamScanner scans documents against an index. It reuses its buffers
// between calls and is not safe for concurrent use.
type ContamScanner struct {
	x    *ContamIndex
	tok  *contamTokenizer
	pre  []uint64
	pow  []uint64
	hits []ContamHit
}

// NewScanner returns a scanner over x.
func (x *ContamIndex) NewScanner() *ContamScanner {
	return &ContamScanner{x: x, tok: newContamTokenizer(), pow: contamPowers(x.n)}
}

// Scan tokenizes text and returns every (position, item) match, n-gram
// hits first in word order, then short-item hits by length and position.
// Keys whose bit is set in ignore (a bitset over key numbers; nil for
// none) are skipped. The returned slice is reused by the next call.
func (s *ContamScanner) Scan(text string, ignore []uint64) []ContamHit {
	s.hits = s.hits[:0]
	s.tok.tokenize(text)
	w := len(s.tok.words)
	if w == 0 {
		return s.hits
	}
	s.pre = contamPrefix(s.pre, s.tok.hashes)
	pre := s.pre
	if t := s.x.main; len(t.keys) > 0 && w >= s.x.n {
		n := s.x.n
		pn := s.pow[n]
		salt := uint64(n) * contamLenSalt
		keys, dir, shift := t.keys, t.dir, t.shift
		// Windows are looked up in batches: first every directory entry of
		// the batch is loaded (independent loads the CPU overlaps), then
		// the keys are compared. This halves the scan time on large
		// indexes, whose lookups are memory-latency bound.
		var hs [contamBatch]uint64
		var lo, hi [contamBatch]uint32
		last := w - n + 1
		for i0 := 0; i0 < last; i0 += contamBatch {
			m := min(contamBatch, last-i0)
			for j := 0; j < m; j++ {
				i := i0 + j
				h := contamMix((pre[i+n] - pre[i]*pn) ^ salt)
				b := h >> shift
				hs[j], lo[j], hi[j] = h, dir[b], dir[b+1]
			}
			for j := 0; j < m; j++ {
				for k := lo[j]; k < hi[j]; k++ {
					if keys[k] == hs[j] {
						s.add(t, int(k), i0+j, ignore)
						break
					}
				}
			}
		}
	}
	for _, t := range s.x.short {
		l := t.length
		if w < l {
			continue
		}
		pl := s.pow[l]
		for i := 0; i+l <= w; i++ {
			k := t.find(contamWindowHash(pre[i+l]-pre[i]*pl, l))
			if k < 0 || t.texts[k] != s.normText(int32(i), int32(i+l)) {
				continue
			}
			s.add(t, k, i, ignore)
		}
	}
	return s.hits
}

// add appends the hits of key k of table t at word i.
func (s *ContamScanner) add(t *contamTable, k, i int, ignore []uint64) {
	key := t.base + uint32(k)
	if ignore != nil && ignore[key>>6]&(1<<(key&63)) != 0 {
		return
	}
	start, end := int32(i), int32(i+t.length)
	v := t.vals[k]
	if v&postMulti == 0 {
		s.hits = append(s.hits, ContamHit{Item: v, Key: key, Start: start, End: end})
		return
	}
	off := v &^ postMulti
	cnt := s.x.multi[off]
	for _, it := range s.x.multi[off+1 : off+1+cnt] {
		s.hits = append(s.hits, ContamHit{Item: it, Key: key, Start: start, End: end})
	}
}

// Words returns the number of words of the last scanned text.
func (s *ContamScanner) Words() int { return len(s.tok.words) }

// normText returns the normalized words [start, end) of the last scanned
// text, joined by single spaces, without copying.
func (s *ContamScanner) normText(start, end int32) string {
	if start >= end {
		return ""
	}
	a, b := s.tok.words[start].nstart, s.tok.words[end-1].nend
	return contamString(s.tok.norm[a:b])
}

// Excerpt returns the normalized words [start, end) of the last scanned
// text joined by single spaces, cut at a word boundary to at most max
// bytes (followed by "…" when cut).
func (s *ContamScanner) Excerpt(start, end int32, max int) string {
	t := s.normText(start, end)
	if max > 0 && len(t) > max {
		cut := strings.LastIndexByte(t[:max], ' ')
		if cut <= 0 {
			cut = max
			for cut > 0 && !utf8.RuneStart(t[cut]) {
				cut--
			}
		}
		return t[:cut] + "…"
	}
	return strings.Clone(t)
}

// ByteSpan returns the byte span in the last scanned text covered by the
// words [start, end).
func (s *ContamScanner) ByteSpan(start, end int32) (int, int) {
	return int(s.tok.words[start].start), int(s.tok.words[end-1].end)
}

// ContamItemMatch summarizes one item's hits in a document.
type ContamItemMatch struct {
	Item uint32
	// Count is the number of matched n-gram positions.
	Count int
	// Distinct is the number of those positions not also matched by an
	// item listed before this one. An item with Distinct 0 shares only
	// n-grams that an earlier item explains (e.g. eval items written
	// from one template): the document is evidence for the earlier item,
	// not for this one.
	Distinct int
	// Start and End are the words of the item's first contiguous run of
	// matched n-grams.
	Start, End int32
}

// SummarizeHits groups hits by item and orders the items for
// attribution: greedily, the item with the most matched positions first
// (ties: lower item number), each next item credited only with the
// positions no earlier credited item matched; items with no distinct
// position come last. It sorts hits in place.
func SummarizeHits(hits []ContamHit) []ContamItemMatch {
	if len(hits) == 0 {
		return nil
	}
	slices.SortFunc(hits, func(a, b ContamHit) int {
		if a.Item != b.Item {
			return int(a.Item) - int(b.Item)
		}
		if a.Start != b.Start {
			return int(a.Start) - int(b.Start)
		}
		return int(a.End) - int(b.End)
	})
	type group struct {
		m    ContamItemMatch
		from int // hits[from:to] are the item's
		to   int
	}
	var groups []group
	for i := 0; i < len(hits); {
		j := i
		m := ContamItemMatch{Item: hits[i].Item, Start: hits[i].Start, End: hits[i].End}
		inRun := true
		for j < len(hits) && hits[j].Item == m.Item {
			if inRun && hits[j].Start <= m.End {
				m.End = max(m.End, hits[j].End)
			} else {
				inRun = false
			}
			j++
		}
		m.Count = j - i
		groups = append(groups, group{m, i, j})
		i = j
	}
	slices.SortStableFunc(groups, func(a, b group) int { return b.m.Count - a.m.Count })
	out := make([]ContamItemMatch, 0, len(groups))
	if len(groups) == 1 {
		groups[0].m.Distinct = groups[0].m.Count
		return append(out, groups[0].m)
	}
	covered := map[uint64]bool{}
	window := func(h ContamHit) uint64 { return uint64(uint32(h.Start))<<32 | uint64(uint32(h.End)) }
	for gi := range groups {
		g := &groups[gi]
		for _, h := range hits[g.from:g.to] {
			if !covered[window(h)] {
				g.m.Distinct++
			}
		}
		if g.m.Distinct > 0 {
			for _, h := range hits[g.from:g.to] {
				covered[window(h)] = true
			}
		}
	}
	for _, g := range groups {
		if g.m.Distinct > 0 {
			out = append(out, g.m)
		}
	}
	for _, g := range groups {
		if g.m.Distinct == 0 {
			out = append(out, g.m)
		}
	}
	return out
}

// CutResult is the outcome of CutSpans.
type CutResult struct {
	// Pieces are the kept pieces in document order, trimmed of
	// surrounding whitespace.
	Pieces []string
	// Split is the number of non-empty pieces the document was split
	// into, before short pieces were dropped.
	Split int
	// Removed is the number of characters (runes) of the document not in
	// a kept piece.
	Removed int
	// TooMany reports Split > maxPieces (the document should be dropped).
	TooMany bool
}

// CutSpans removes each byte span [a, b) of text plus margin characters
// (runes) on either side, splits the text at the removed regions, drops
// pieces shorter than minPiece characters, and reports whether the text
// was split into more than maxPieces pieces (maxPieces <= 0: no limit).
// This is the removal of Brown et al. 2020 with margin 200, minPiece 200,
// maxPieces 10.
func CutSpans(text string, spans [][2]int, margin, minPiece, maxPieces int) CutResult {
	cuts := make([][2]int, 0, len(spans))
	for _, sp := range spans {
		a, b := max(0, min(sp[0], len(text))), max(0, min(sp[1], len(text)))
		if a > b {
			a, b = b, a
		}
		cuts = append(cuts, [2]int{contamBackRunes(text, a, margin), contamForwardRunes(text, b, margin)})
	}
	slices.SortFunc(cuts, func(x, y [2]int) int { return x[0] - y[0] })
	merged := cuts[:0]
	for _, c := range cuts {
		if n := len(merged); n > 0 && c[0] <= merged[n-1][1] {
			merged[n-1][1] = max(merged[n-1][1], c[1])
			continue
		}
		merged = append(merged, c)
	}
	var res CutResult
	kept := 0
	prev := 0
	piece := func(a, b int) {
		p := strings.TrimFunc(text[a:b], unicode.IsSpace)
		if p == "" {
			return
		}
		res.Split++
		if n := utf8.RuneCountInString(p); n >= minPiece {
			res.Pieces = append(res.Pieces, p)
			kept += n
		}
	}
	for _, c := range merged {
		piece(prev, c[0])
		prev = c[1]
	}
	piece(prev, len(text))
	res.Removed = utf8.RuneCountInString(text) - kept
	res.TooMany = maxPieces > 0 && res.Split > maxPieces
	return res
}

// contamBackRunes returns the byte index n runes before i in s (or 0).
func contamBackRunes(s string, i, n int) int {
	for ; n > 0 && i > 0; n-- {
		_, size := utf8.DecodeLastRuneInString(s[:i])
		i -= size
	}
	return i
}

// contamForwardRunes returns the byte index n runes after i in s (or len(s)).
func contamForwardRunes(s string, i, n int) int {
	for ; n > 0 && i < len(s); n-- {
		_, size := utf8.DecodeRuneInString(s[i:])
		i += size
	}
	return i
}

// contamString views b as a string without copying; b must not change
// while the string is in use.
func contamString(b []byte) string {
	if len(b) == 0 {
		return ""
	}
	return unsafe.String(&b[0], len(b))
}
