package synth

import (
	"unicode"
	"unicode/utf8"

	"github.com/zeebo/xxh3"
)

// Near copies. A near copy is its original's text with word edits
// (substitutions, insertions, deletions of plain lower-case words, so
// punctuation, casing and line structure stay as they were). To hit a
// target word 5-gram Jaccard similarity the generator plans one edit per
// editable word, ranks the edits by a random permutation, and searches
// (estimate, doubling, bisection) how many of the lowest-ranked edits to
// apply, measuring each candidate's similarity on 64-bit shingle hashes. The similarity recorded in the truth file is then recomputed
// exactly on the shingle strings by ShingleJaccard.
//
// Words, here and in ShingleJaccard, are maximal runs of Unicode letters
// and digits, lower-cased; a shingle is n consecutive words; a text with
// fewer than n words has one shingle of all its words.

// ShingleN is the shingle length of the recorded Jaccard similarities.
const ShingleN = 5

// Words returns the lower-cased words of text: maximal runs of Unicode
// letters and digits.
func Words(text string) []string {
	norm, ends := normalizeWords(text)
	out := make([]string, len(ends))
	start := 0
	for i, e := range ends {
		out[i] = norm[start:e]
		start = e + 1
	}
	return out
}

func isWordRune(r rune) bool {
	if r < utf8.RuneSelf {
		c := byte(r)
		return c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9'
	}
	return unicode.IsLetter(r) || unicode.IsDigit(r)
}

// normalizeWords returns the words of text lower-cased and joined by single
// spaces, and the end offset of each word in that string.
func normalizeWords(text string) (string, []int) {
	b := make([]byte, 0, len(text))
	var ends []int
	in := false
	for _, r := range text {
		if isWordRune(r) {
			if !in && len(b) > 0 {
				b = append(b, ' ')
			}
			in = true
			if r < utf8.RuneSelf {
				c := byte(r)
				if c >= 'A' && c <= 'Z' {
					c += 32
				}
				b = append(b, c)
			} else {
				b = utf8.AppendRune(b, unicode.ToLower(r))
			}
			continue
		}
		if in {
			ends = append(ends, len(b))
			in = false
		}
	}
	if in {
		ends = append(ends, len(b))
	}
	return string(b), ends
}

// Shingles returns the set of word n-gram shingles of text, each the n
// words joined by single spaces; a text with fewer than n words has one
// shingle of all its words.
func Shingles(text string, n int) map[string]struct{} {
	set := make(map[string]struct{})
	forShingles(text, n, func(s string) { set[s] = struct{}{} })
	return set
}

// forShingles calls fn with every shingle of text, in text order
// (duplicates included).
func forShingles(text string, n int, fn func(string)) {
	norm, ends := normalizeWords(text)
	if len(ends) == 0 {
		return
	}
	if len(ends) < n {
		fn(norm)
		return
	}
	start := 0 // where word i begins: after the space following word i-1
	for i := 0; i+n <= len(ends); i++ {
		fn(norm[start:ends[i+n-1]])
		start = ends[i] + 1
	}
}

// ShingleJaccard returns the exact Jaccard similarity |A∩B| / |A∪B| of the
// word n-gram shingle sets of a and b (1 when both are empty). Shingles
// are compared as strings, so the value has no hash collisions.
func ShingleJaccard(a, b string, n int) float64 {
	return shingleJaccard(make(map[string]uint8), a, b, n)
}

// shingleJaccard is ShingleJaccard with a caller's (cleared) map: one
// entry per distinct shingle, a bit per side.
func shingleJaccard(seen map[string]uint8, a, b string, n int) float64 {
	clear(seen)
	forShingles(a, n, func(s string) { seen[s] = 1 })
	forShingles(b, n, func(s string) { seen[s] |= 2 })
	if len(seen) == 0 {
		return 1
	}
	inter := 0
	for _, v := range seen { // counting only: order does not matter
		if v == 3 {
			inter++
		}
	}
	return float64(inter) / float64(len(seen))
}

// Edit kinds.
const (
	editSub = iota
	editIns
	editDel
)

// token is a whitespace-delimited run of the original text and the
// whitespace after it.
type token struct {
	s, sep string
}

// nearEditor holds the scratch state of near-copy planting; it is reused
// for every near copy so planting does not allocate per document.
//
// Each editable word (two or more lower-case ASCII letters) gets one
// planned edit and a rank from a random permutation; "the first k edits"
// are those of rank < k, so the edit sets for growing k are nested and the
// similarity falls (almost) monotonically with k.
type nearEditor struct {
	toks     []token
	lead     string
	tokWH    []uint64 // word hashes of the original, flattened
	tokOff   []int32  // tokWH[tokOff[j]:tokOff[j+1]] belong to token j
	editable []int32  // token indexes with a planned edit, ascending
	kind     []uint8  // per editable
	word     []string // per editable: the substituted or inserted word
	wordH    []uint64 // per editable: hash of word
	rank     []int32  // per editable: a permutation of 0..len-1
	out      []token
	wh       []uint64 // word hashes of a candidate
	low      []byte
	orig     u64set
	cand     u64set
	origN    int
	exact    map[string]uint8 // reused by shingleJaccard
}

var editWordHash = func() map[string]uint64 {
	m := make(map[string]uint64, len(bankEdit))
	for _, w := range bankEdit {
		m[w] = xxh3.HashString(w)
	}
	return m
}()

// isPlainWord reports whether s is two or more lower-case ASCII letters.
func isPlainWord(s string) bool {
	if len(s) < 2 {
		return false
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 'a' || s[i] > 'z' {
			return false
		}
	}
	return true
}

func isSpace(c byte) bool { return c == ' ' || c == '\n' || c == '\t' || c == '\r' }

// tokenize splits text into tokens with their trailing whitespace and
// hashes the words of every token.
func (e *nearEditor) tokenize(text string) {
	e.toks = e.toks[:0]
	e.editable = e.editable[:0]
	e.tokWH = e.tokWH[:0]
	e.tokOff = e.tokOff[:0]
	i := 0
	for i < len(text) && isSpace(text[i]) {
		i++
	}
	e.lead = text[:i]
	for i < len(text) {
		s := i
		for i < len(text) && !isSpace(text[i]) {
			i++
		}
		w := i
		for i < len(text) && isSpace(text[i]) {
			i++
		}
		if isPlainWord(text[s:w]) {
			e.editable = append(e.editable, int32(len(e.toks)))
		}
		e.tokOff = append(e.tokOff, int32(len(e.tokWH)))
		e.tokWH = e.appendWordHashes(e.tokWH, text[s:w])
		e.toks = append(e.toks, token{s: text[s:w], sep: text[w:i]})
	}
	e.tokOff = append(e.tokOff, int32(len(e.tokWH)))
}

// appendWordHashes appends the hashes of the words (as in Words) of s.
func (e *nearEditor) appendWordHashes(dst []uint64, s string) []uint64 {
	start := -1
	for i, r := range s {
		if isWordRune(r) {
			if start < 0 {
				start = i
			}
			continue
		}
		if start >= 0 {
			e.low = appendLower(e.low[:0], s[start:i])
			dst = append(dst, xxh3.Hash(e.low))
			start = -1
		}
	}
	if start >= 0 {
		e.low = appendLower(e.low[:0], s[start:])
		dst = append(dst, xxh3.Hash(e.low))
	}
	return dst
}

func appendLower(b []byte, s string) []byte {
	for _, r := range s {
		if r < utf8.RuneSelf {
			c := byte(r)
			if c >= 'A' && c <= 'Z' {
				c += 32
			}
			b = append(b, c)
			continue
		}
		b = utf8.AppendRune(b, unicode.ToLower(r))
	}
	return b
}

// candidateHashes fills e.wh with the word hashes of the text after the
// first k edits, without building the text.
func (e *nearEditor) candidateHashes(k int) {
	e.wh = e.wh[:0]
	ep := 0
	for j := range e.toks {
		if k > 0 && ep < len(e.editable) && int(e.editable[ep]) == j {
			x := ep
			ep++
			if int(e.rank[x]) < k {
				switch e.kind[x] {
				case editSub:
					e.wh = append(e.wh, e.wordH[x])
					continue
				case editDel:
					continue
				case editIns:
					e.wh = append(e.wh, e.wordH[x])
				}
			}
		}
		e.wh = append(e.wh, e.tokWH[e.tokOff[j]:e.tokOff[j+1]]...)
	}
}

// apply builds the tokens of the text after the first k edits into e.out.
func (e *nearEditor) apply(k int) {
	e.out = e.out[:0]
	ep := 0
	for j, t := range e.toks {
		if k > 0 && ep < len(e.editable) && int(e.editable[ep]) == j {
			x := ep
			ep++
			if int(e.rank[x]) < k {
				switch e.kind[x] {
				case editSub:
					t.s = e.word[x]
				case editIns:
					e.out = append(e.out, token{s: e.word[x], sep: " "})
				case editDel:
					// Keep line structure: a deleted word's line break
					// moves to the word before it.
					if n := len(e.out); n > 0 && hasNewline(t.sep) && !hasNewline(e.out[n-1].sep) {
						e.out[n-1].sep = t.sep
					}
					continue
				}
			}
		}
		e.out = append(e.out, t)
	}
}

func hasNewline(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] == '\n' {
			return true
		}
	}
	return false
}

// shingle combines n word hashes into one shingle hash.
func shingle(ws []uint64) uint64 {
	h := uint64(0x9e3779b97f4a7c15)
	for _, w := range ws {
		h = (h ^ w) * 0x100000001b3
		h ^= h >> 29
	}
	return h
}

// shingleCount is the number of shingles of e.wh.
func (e *nearEditor) shingleCount() int {
	n := min(ShingleN, len(e.wh))
	if n == 0 {
		return 0
	}
	return len(e.wh) - n + 1
}

// measure returns the Jaccard similarity, on shingle hashes, of the
// original and the text after the first k edits.
func (e *nearEditor) measure(k int) float64 {
	e.candidateHashes(k)
	cnt := e.shingleCount()
	e.cand.reset(cnt)
	n := min(ShingleN, len(e.wh))
	distinct, inter := 0, 0
	for i := 0; i < cnt; i++ {
		h := shingle(e.wh[i : i+n])
		if e.cand.add(h) {
			distinct++
			if e.orig.has(h) {
				inter++
			}
		}
	}
	u := e.origN + distinct - inter
	if u == 0 {
		return 1
	}
	return float64(inter) / float64(u)
}

// nearCopy edits orig towards target similarity and appends the result to
// dst. Targets of 0.8 and above are approached from above (the copy's
// similarity is at least the target where the text allows it), lower
// targets from below (at most the target), so that "pairs at J >= 0.9"
// and "pairs at J <= 0.5" are both well populated. It returns false when
// orig has too few editable words.
func (g *gen) nearCopy(e *nearEditor, orig string, target float64, dst []byte) ([]byte, bool) {
	e.tokenize(orig)
	m := len(e.editable)
	if m < 20 {
		return dst, false
	}
	// Original shingle set.
	e.candidateHashes(0)
	cnt := e.shingleCount()
	n := min(ShingleN, len(e.wh))
	e.orig.reset(cnt)
	e.origN = 0
	for i := 0; i < cnt; i++ {
		if e.orig.add(shingle(e.wh[i : i+n])) {
			e.origN++
		}
	}

	// One planned edit per editable word, ranked by a random permutation.
	e.kind = e.kind[:0]
	e.word = e.word[:0]
	e.wordH = e.wordH[:0]
	e.rank = e.rank[:0]
	for x := 0; x < m; x++ {
		var kind uint8
		switch v := g.intn(10); {
		case v < 6:
			kind = editSub
		case v < 8:
			kind = editIns
		default:
			kind = editDel
		}
		w := g.pick(bankEdit)
		if kind == editSub && w == e.toks[e.editable[x]].s {
			w = bankEdit[(x+1)%len(bankEdit)]
			if w == e.toks[e.editable[x]].s {
				w = bankEdit[(x+2)%len(bankEdit)]
			}
		}
		e.kind = append(e.kind, kind)
		e.word = append(e.word, w)
		e.wordH = append(e.wordH, editWordHash[w])
		e.rank = append(e.rank, int32(x))
	}
	for i := m - 1; i > 0; i-- {
		j := g.intn(i + 1)
		e.rank[i], e.rank[j] = e.rank[j], e.rank[i]
	}

	k := e.search(target, m)
	e.apply(k)
	dst = append(dst, e.lead...)
	for _, t := range e.out {
		dst = append(dst, t.s...)
		dst = append(dst, t.sep...)
	}
	return dst, true
}

// search returns the number of edits to apply: for high targets (>= 0.8)
// the largest k with J(k) >= target, for low targets the smallest k with
// J(k) <= target (1 <= k <= m). It starts from the estimate of k scattered
// substitutions on S shingles, J = (S-5k)/(S+5k), brackets the answer by
// doubling, and finishes by bisection.
func (e *nearEditor) search(target float64, m int) int {
	high := target >= 0.8
	ok := func(k int) bool { // k is on the "not yet past the target" side
		j := e.measure(k)
		if high {
			return j >= target
		}
		return j > target
	}
	guess := int(float64(e.origN) * (1 - target) / (float64(ShingleN) * (1 + target)))
	guess = min(max(guess, 1), m)
	// Find lo (ok) and hi (not ok) around the guess; k = 0 is always ok.
	lo, hi := 0, m+1
	if ok(guess) {
		lo = guess
		for step := max(guess/2, 1); ; step *= 2 {
			c := lo + step
			if c > m {
				break
			}
			if !ok(c) {
				hi = c
				break
			}
			lo = c
		}
	} else {
		hi = guess
		for step := max(guess/2, 1); ; step *= 2 {
			c := hi - step
			if c < 1 {
				break
			}
			if ok(c) {
				lo = c
				break
			}
			hi = c
		}
	}
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if ok(mid) {
			lo = mid
		} else {
			hi = mid
		}
	}
	// lo is the last ok k, hi the first past the target.
	if high {
		return min(max(lo, 1), m)
	}
	return min(hi, m)
}

// u64set is an open-addressing set of uint64 reused across documents:
// slots are valid only when stamped with the current generation, so reset
// is O(1) once the table is large enough.
type u64set struct {
	keys  []uint64
	stamp []uint32
	cur   uint32
	mask  uint64
}

func (s *u64set) reset(n int) {
	size := 16
	for size < 2*n {
		size <<= 1
	}
	if len(s.keys) < size {
		s.keys = make([]uint64, size)
		s.stamp = make([]uint32, size)
		s.cur = 0
	}
	s.cur++
	if s.cur == 0 {
		clear(s.stamp)
		s.cur = 1
	}
	s.mask = uint64(size - 1)
}

// add inserts k and reports whether it was new.
func (s *u64set) add(k uint64) bool {
	i := (k * 0x9e3779b97f4a7c15) >> 20 & s.mask
	for {
		if s.stamp[i] != s.cur {
			s.stamp[i] = s.cur
			s.keys[i] = k
			return true
		}
		if s.keys[i] == k {
			return false
		}
		i = (i + 1) & s.mask
	}
}

func (s *u64set) has(k uint64) bool {
	i := (k * 0x9e3779b97f4a7c15) >> 20 & s.mask
	for {
		if s.stamp[i] != s.cur {
			return false
		}
		if s.keys[i] == k {
			return true
		}
		i = (i + 1) & s.mask
	}
}
