package filters

import (
	"embed"
	"fmt"
	"slices"
	"sort"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"
	"unsafe"
)

// The stop-word lists are those of the open dataset stopwords-iso (npm
// package "stopwords-iso" 1.1.0, MIT licence, stopwords/LICENSE), one file
// per language with one entry per line, copied unchanged from the
// dataset's JSON file (testdata/stopwords-iso/stopwords-iso.json holds the
// whole file; a test checks the two agree).
//
//go:embed stopwords/*.txt stopwords/LICENSE
var stopwordFS embed.FS

// StopwordLicense returns the licence text of the embedded stop-word
// dataset, for tools that redistribute the lists.
func StopwordLicense() string {
	b, _ := stopwordFS.ReadFile("stopwords/LICENSE")
	return string(b)
}

// maxNormBytes bounds a normalized token (or joined multi-word entry) that
// can be a stop word; the longest entry of the supported lists is 31 bytes,
// so longer tokens are never stop words and skip the lookup.
const maxNormBytes = 96

// gopherStopwords are the eight English words of the stop-word rule of Rae
// et al. 2021 (MassiveWeb quality filter; from memory): a document must
// contain at least two of them.
var gopherStopwords = [...]string{"the", "be", "to", "of", "and", "that", "have", "with"}

// gopherSet holds the hashes of gopherStopwords.
var gopherSet = func() cuckooSet {
	var keys []uint64
	for _, w := range gopherStopwords {
		keys = append(keys, WordHash(w))
	}
	flags := make([]bool, len(keys))
	for i := range flags {
		flags[i] = true
	}
	return newCuckooSet(keys, flags)
}()

// segmentedLangs are written without spaces between words (scriptio
// continua); inside runs of their scripts stop words are found by greedy
// longest match instead of whole-token lookup.
var segmentedLangs = map[string]bool{"zh": true, "ja": true, "th": true}

// Stopwords is the stop-word list of one language, normalized with
// NormalizeWord and indexed for allocation-free lookup.
type Stopwords struct {
	// Lang is the ISO 639-1 code of the list.
	Lang string
	// Segmented is true for languages written without spaces (zh, ja,
	// th): runs of their scripts are matched greedily, longest entry first.
	Segmented bool

	words     []string  // normalized entries, sorted, unique
	set       cuckooSet // xxh3 hashes of the entries
	firsts    cuckooSet // hashes of the first token of multi-word entries
	maxBytes  int       // longest normalized entry in bytes
	maxRunes  int       // longest entry in characters (segmented matching)
	maxTokens int       // most space-separated tokens in one entry
}

// stopwordList is one language's list, loaded on first use. The map of
// them is filled in init and only read afterwards, so concurrent callers
// asking for different languages never write a shared map.
type stopwordList struct {
	once sync.Once
	set  *Stopwords
	err  error
}

var (
	stopwordLists = map[string]*stopwordList{}
	stopwordLang  []string
)

func init() {
	entries, err := stopwordFS.ReadDir("stopwords")
	if err != nil {
		panic(err) // the embedded directory is part of the binary
	}
	for _, e := range entries {
		if name, ok := strings.CutSuffix(e.Name(), ".txt"); ok {
			stopwordLang = append(stopwordLang, name)
			stopwordLists[name] = &stopwordList{}
		}
	}
	sort.Strings(stopwordLang)
}

// StopwordLanguages returns the ISO 639-1 codes of the supported stop-word
// languages, sorted: one per list.
func StopwordLanguages() []string {
	return append([]string(nil), stopwordLang...)
}

// stopwordAliases are codes that use another code's list: Norwegian
// Bokmål (nb) and Nynorsk (nn), which language identification tells
// apart, share the dataset's one Norwegian list (no).
var stopwordAliases = map[string]string{"nb": "no", "nn": "no"}

// StopwordCodes returns every code StopwordsFor accepts, sorted: the
// StopwordLanguages and the codes that share one of their lists (nb, nn).
func StopwordCodes() []string {
	codes := StopwordLanguages()
	for a := range stopwordAliases {
		codes = append(codes, a)
	}
	sort.Strings(codes)
	return codes
}

// RawStopwords returns the embedded list of lang exactly as the dataset
// has it (one entry per line, dataset order).
func RawStopwords(lang string) ([]string, error) {
	b, err := stopwordFS.ReadFile("stopwords/" + lang + ".txt")
	if err != nil {
		return nil, fmt.Errorf("stop words: no list for language %q", lang)
	}
	s := strings.TrimSuffix(string(b), "\n")
	if s == "" {
		return nil, nil
	}
	return strings.Split(s, "\n"), nil
}

// StopwordsFor returns the stop-word list of lang (loaded once, shared,
// safe for concurrent use; nb and nn get the Norwegian list), or an error
// naming the language when it is not supported.
func StopwordsFor(lang string) (*Stopwords, error) {
	if to, ok := stopwordAliases[lang]; ok {
		lang = to
	}
	l, ok := stopwordLists[lang]
	if !ok {
		return nil, fmt.Errorf("stop words: language %q is not supported (supported: %s)", lang, strings.Join(stopwordLang, " "))
	}
	l.once.Do(func() {
		raw, err := RawStopwords(lang)
		if err != nil {
			l.err = err
			return
		}
		l.set = newStopwords(lang, raw)
	})
	if l.err != nil {
		return nil, l.err
	}
	return l.set, nil
}

// NormalizeEntry is how a dataset entry becomes a lookup key: each
// space-separated part is normalized with NormalizeWord, empty parts are
// dropped and the rest joined by one space. An entry made only of
// punctuation or symbols normalizes to "" and is not a stop word.
func NormalizeEntry(e string) string {
	var parts []string
	for _, f := range strings.Fields(e) {
		if n := string(NormalizeWord(nil, f)); n != "" {
			parts = append(parts, n)
		}
	}
	return strings.Join(parts, " ")
}

func newStopwords(lang string, raw []string) *Stopwords {
	sw := &Stopwords{Lang: lang, Segmented: segmentedLangs[lang]}
	seen := map[string]bool{}
	for _, e := range raw {
		n := NormalizeEntry(e)
		if n == "" || seen[n] || len(n) > maxNormBytes {
			continue
		}
		seen[n] = true
		sw.words = append(sw.words, n)
	}
	sort.Strings(sw.words)
	var keys, firsts []uint64
	var flags []bool
	for _, w := range sw.words {
		keys = append(keys, WordHash(w))
		flags = append(flags, lang == "en" && slices.Contains(gopherStopwords[:], w))
		sw.maxBytes = max(sw.maxBytes, len(w))
		sw.maxRunes = max(sw.maxRunes, utf8.RuneCountInString(w))
		k := strings.Count(w, " ") + 1
		sw.maxTokens = max(sw.maxTokens, k)
		if k > 1 {
			first, _, _ := strings.Cut(w, " ")
			firsts = append(firsts, WordHash(first))
		}
	}
	sw.set = newCuckooSet(keys, flags)
	sw.firsts = newCuckooSet(firsts, nil)
	return sw
}

// Words returns the normalized entries of the list, sorted.
func (sw *Stopwords) Words() []string { return append([]string(nil), sw.words...) }

// Len returns the number of normalized entries.
func (sw *Stopwords) Len() int { return len(sw.words) }

// lookup reports whether the normalized key b is an entry.
func (sw *Stopwords) lookup(b []byte) bool {
	return len(b) > 0 && len(b) <= sw.maxBytes && sw.set.has(WordHash(unsafe.String(&b[0], len(b))))
}

// lookupString reports whether the normalized key k is an entry.
func (sw *Stopwords) lookupString(k string) bool {
	return len(k) > 0 && len(k) <= sw.maxBytes && sw.set.has(WordHash(k))
}

// Contains reports whether word, normalized with NormalizeWord, is an
// entry of the list (a multi-word entry is matched by its spaced form).
func (sw *Stopwords) Contains(word string) bool {
	return sw.lookupString(NormalizeEntry(word))
}

// StopCount is what a stop-word scan of a text found.
type StopCount struct {
	// Matches is the number of stop-word occurrences (a multi-word entry
	// counts once).
	Matches int
	// Covered is the number of tokens inside those occurrences.
	Covered int
	// Tokens is the number of tokens scanned: words, or for segmented
	// languages the segments of the greedy match (stop words plus single
	// characters) and the words in other scripts.
	Tokens int
	// Gopher counts occurrences of the eight English words of Rae et al.
	// 2021 (the, be, to, of, and, that, have, with); it is counted with
	// the English list or without a list (sw nil), and 0 with another.
	Gopher int
}

// Density returns Covered/Tokens, the share of tokens that are stop words
// (NaN when there is no token).
func (c StopCount) Density() float64 {
	if c.Tokens == 0 {
		return nan
	}
	return float64(c.Covered) / float64(c.Tokens)
}

// CountStopwords scans the words of text (as split by s.Split(text)) for
// entries of sw; sw may be nil, then only the English eight are counted.
// It allocates nothing once s has grown to the text's size. Entries are
// matched by their 64-bit WordHash, so a token is taken for a stop word
// wrongly only on a hash collision (about 2^-54 per token for the longest
// list).
func CountStopwords(s *Scratch, text string, sw *Stopwords) StopCount {
	var c StopCount
	var buf, join [maxNormBytes]byte
	words := s.Words
	hashes := s.WordHashes(text)
	multi := sw != nil && sw.maxTokens > 1
	segmented := sw != nil && sw.Segmented
	for i := 0; i < len(words); i++ {
		w := words[i]
		h := hashes[i] // a plain word is its own normalized form
		var n string
		if !w.Plain {
			if segmented && w.Unspaced {
				// the run of adjacent one-character words, matched
				// greedily against the list's (multi-character) entries
				j := i + 1
				for j < len(words) && words[j].Unspaced && words[j].Start == words[j-1].End {
					j++
				}
				sw.countSegmented(s, text[w.Start:words[j-1].End], &c)
				i = j - 1
				continue
			}
			raw := text[w.Start:w.End]
			b := NormalizeWord(buf[:0], raw)
			if len(b) == 0 {
				c.Tokens++ // a token of punctuation or symbols only is no stop word
				continue
			}
			n = unsafe.String(&b[0], len(b)) // buf outlives every use of n
			h = wordHashAt(unsafe.String(&buf[0], len(buf)), 0, len(b))
		}
		c.Tokens++
		if sw == nil {
			c.Gopher += b2i(gopherSet.lookup(h) == 0)
			continue
		}
		if multi && sw.firsts.has(h) && i+1 < len(words) {
			if n == "" {
				n = text[w.Start:w.End]
			}
			if k := sw.matchMulti(text, words[i:], n, join[:0]); k > 1 {
				c.Matches++
				c.Covered += k
				c.Tokens += k - 1
				i += k - 1
				continue
			}
		}
		m := sw.set.lookup(h) // 0: an entry of the English eight, 1: another entry
		c.Gopher += b2i(m == 0)
		hit := b2i(m <= 1)
		c.Matches += hit
		c.Covered += hit
	}
	return c
}

// b2i is 1 for true and 0 for false (compiled without a branch).
func b2i(b bool) int {
	var i int
	if b {
		i = 1
	}
	return i
}

// matchMulti returns the number of tokens of the longest multi-word entry
// starting at words[0] (whose normalized form is first), or 0.
func (sw *Stopwords) matchMulti(text string, words []Word, first string, join []byte) int {
	var buf [maxNormBytes]byte
	join = append(join, first...)
	best := 0
	limit := min(sw.maxTokens, len(words))
	for k := 2; k <= limit; k++ {
		n := NormalizeWord(buf[:0], text[words[k-1].Start:words[k-1].End])
		if len(n) == 0 || len(join)+1+len(n) > sw.maxBytes {
			break
		}
		join = append(join, ' ')
		join = append(join, n...)
		if sw.lookup(join) {
			best = k
		}
	}
	return best
}

// countSegmented scans a run of words of a segmented language: runs of
// characters of scripts without spaces by greedy longest match, other
// runs (the punctuation that belongs to those words) as ordinary tokens.
func (sw *Stopwords) countSegmented(s *Scratch, w string, c *StopCount) {
	var buf [maxNormBytes]byte
	for len(w) > 0 {
		// split off the next run of same-kind characters
		r0, _ := utf8.DecodeRuneInString(w)
		cont := isUnspaced(r0)
		end := len(w)
		for j, r := range w {
			if isUnspaced(r) != cont {
				end = j
				break
			}
		}
		run := w[:end]
		w = w[end:]
		if !cont {
			n := NormalizeWord(buf[:0], run)
			if len(n) == 0 {
				continue
			}
			c.Tokens++
			if m := sw.set.lookup(WordHash(string(n))); m <= 1 {
				c.Matches++
				c.Covered++
				c.Gopher += b2i(m == 0)
			}
			continue
		}
		b := s.bounds[:0]
		for j := range run {
			b = append(b, j)
		}
		b = append(b, len(run))
		s.bounds = b
		nr := len(b) - 1
		for p := 0; p < nr; {
			matched := 0
			for l := min(sw.maxRunes, nr-p); l >= 1; l-- {
				if sw.lookupString(run[b[p]:b[p+l]]) {
					matched = l
					break
				}
			}
			c.Tokens++
			if matched > 0 {
				c.Matches++
				c.Covered++
				p += matched
			} else {
				p++
			}
		}
	}
}

// asciiAlnum marks ASCII letters and digits, the characters NormalizeWord
// keeps at a token's ends.
var asciiAlnum = func() (t [128]bool) {
	for c := '0'; c <= '9'; c++ {
		t[c] = true
	}
	for c := 'a'; c <= 'z'; c++ {
		t[c], t[c-'a'+'A'] = true, true
	}
	return t
}()

func isWordRune(r rune) bool {
	if r < utf8.RuneSelf {
		return asciiAlnum[r]
	}
	return unicode.IsLetter(r) || unicode.IsDigit(r) || unicode.IsMark(r)
}

// NormalizeWord appends to dst the lookup form of the token w: leading and
// trailing characters that are not letters, digits or combining marks are
// trimmed and the rest is lower-cased. It returns dst unchanged (empty)
// when nothing is left, and a truncated result never: when the result
// would not fit in dst's capacity (for a fixed buffer) it returns dst
// with length 0 so the caller treats it as no stop word. A nil dst grows
// as needed.
func NormalizeWord(dst []byte, w string) []byte {
	// trim the ends
	for len(w) > 0 {
		if c := w[0]; c < utf8.RuneSelf {
			if asciiAlnum[c] {
				break
			}
			w = w[1:]
			continue
		}
		r, size := utf8.DecodeRuneInString(w)
		if isWordRune(r) {
			break
		}
		w = w[size:]
	}
	for len(w) > 0 {
		if c := w[len(w)-1]; c < utf8.RuneSelf {
			if asciiAlnum[c] {
				break
			}
			w = w[:len(w)-1]
			continue
		}
		r, size := utf8.DecodeLastRuneInString(w)
		if isWordRune(r) {
			break
		}
		w = w[:len(w)-size]
	}
	start := len(dst)
	bounded := dst != nil
	for i := 0; i < len(w); {
		c := w[i]
		if c < utf8.RuneSelf {
			if bounded && len(dst) == cap(dst) {
				return dst[:start]
			}
			if 'A' <= c && c <= 'Z' {
				c += 'a' - 'A'
			}
			dst = append(dst, c)
			i++
			continue
		}
		r, size := utf8.DecodeRuneInString(w[i:])
		if bounded && len(dst)+utf8.UTFMax > cap(dst) {
			return dst[:start]
		}
		if r == utf8.RuneError && size == 1 {
			dst = append(dst, c) // keep invalid bytes as they are
		} else {
			dst = utf8.AppendRune(dst, unicode.ToLower(r))
		}
		i += size
	}
	return dst
}

// cuckooSet is a set of 64-bit hashes in which every key sits in one of
// two slots given by its bits (cuckoo hashing), so a lookup reads two
// slots and compares, without a loop or a data-dependent branch. Each key
// carries one flag bit (the English eight among the English list): a key
// is stored as its canonical form with the lowest bit set for a flagged
// key and clear otherwise, so keys are compared on their top 63 bits.
type cuckooSet struct {
	slots []uint64
	shift uint
}

// cuckooMul derives a key's second slot from its low bits.
const cuckooMul = 0xBF58476D1CE4E5B9

// canon returns the lookup form of hash h: lowest bit set, never 1 (a
// stored unflagged key, canon^1, must not look like an empty slot).
func canon(h uint64) uint64 {
	c := h | 1
	if c == 1 {
		c = 3
	}
	return c
}

func (c *cuckooSet) slotsOf(k uint64) (uint64, uint64) {
	return k >> c.shift, (k * cuckooMul) >> c.shift
}

// lookup returns 0 when hash h is in the set with its flag, 1 when it is
// in the set without, and more otherwise.
func (c *cuckooSet) lookup(h uint64) uint64 {
	k := canon(h)
	a, b := c.slotsOf(k)
	return min(c.slots[a]^k, c.slots[b]^k)
}

// has reports whether hash h is in the set.
func (c *cuckooSet) has(h uint64) bool { return c.lookup(h) <= 1 }

// newCuckooSet builds a set of keys (flagged where flags[i] is true; flags
// may be nil) at a load factor of at most 1/4, doubling the table until
// every key finds a place.
func newCuckooSet(keys []uint64, flags []bool) cuckooSet {
	size, lg := 16, uint(4)
	for size < 4*len(keys) {
		size *= 2
		lg++
	}
	for {
		c := cuckooSet{slots: make([]uint64, size), shift: 64 - lg}
		if c.fill(keys, flags) {
			return c
		}
		size *= 2
		lg++
	}
}

func (c *cuckooSet) fill(keys []uint64, flags []bool) bool {
	for i, h := range keys {
		k := canon(h)
		if c.has(h) {
			continue
		}
		v := k ^ 1 // stored form: flag in the lowest bit
		if flags != nil && flags[i] {
			v = k
		}
		a, _ := c.slotsOf(k)
		for kick := 0; ; kick++ {
			if kick > 64 {
				return false
			}
			if c.slots[a] == 0 {
				c.slots[a] = v
				break
			}
			v, c.slots[a] = c.slots[a], v
			// move the evicted key to its other slot
			x, y := c.slotsOf(v | 1)
			if x == a {
				a = y
			} else {
				a = x
			}
		}
	}
	return true
}
