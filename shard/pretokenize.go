package shard

import (
	"unicode"
	"unicode/utf8"
)

// This file is a hand-written pre-tokenizer: it splits text into the
// pieces that byte-pair encoding then merges, exactly as the split regular
// expressions of the tiktoken-style encodings do, without a backtracking
// regex engine. Three pattern families are implemented:
//
//	gpt2   (r50k_base, p50k_base, byte-level tokenizer.json):
//	  's|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+
//	cl100k (cl100k_base; with single digits also a common tokenizer.json):
//	  (?i:'s|'t|'re|'ve|'m|'ll|'d)|[^\r\n\p{L}\p{N}]?\p{L}+|\p{N}{1,3}|
//	  ?[^\s\p{L}\p{N}]+[\r\n]*|\s*[\r\n]+|\s+(?!\S)|\s+
//	o200k  (o200k_base): letter runs split at case changes, contractions
//	  attached, \p{N}{1,3}, punctuation runs followed by [\r\n/]*.
//
// Each alternative is decided by looking at the characters' classes
// (letter, number, space, and for o200k upper-ish / lower-ish letters)
// with the same leftmost-first, greedy-with-backtracking outcome as the
// regex. The reference library (github.com/tiktoken-go/tokenizer, built
// on a code-generated regexp2 matcher) has two behaviours a textbook regex
// engine does not, and counts must equal it, so the reference mode
// reproduces them:
//
//   - \s*[\r\n]+ ends after the first run of line breaks in a whitespace
//     run, not after the last one ("\n \n" is "\n", " \n");
//   - U+007F (DEL) is in none of the character sets, so it matches no
//     alternative and produces no token.
//
// The textbook mode (used for tokenizer.json files, whose reference
// implementation uses a backtracking engine without these effects) ends
// at the last line break and treats DEL as punctuation.
//
// Input must be valid UTF-8; callers replace invalid bytes first (see
// sanitizeUTF8), as the reference does by converting the text to runes.

// pattern selects a split-pattern family.
type pattern uint8

const (
	patGPT2 pattern = iota
	patCL100k
	patO200k
	// patWhole keeps each segment whole (a byte-level tokenizer.json
	// whose pre-tokenizer does no splitting).
	patWhole
)

// splitter is one configured pre-tokenizer.
type splitter struct {
	pat pattern
	// digits is the longest run of numbers one piece holds in the cl100k
	// and o200k families (3 for the tiktoken encodings, 1 for tokenizers
	// that split every digit).
	digits int
	// reference reproduces the reference library's matcher (see above).
	reference bool
}

// Character class bits.
const (
	cLetter = 1 << iota // \p{L}
	cNumber             // \p{N}
	cSpace              // \s (unicode.IsSpace)
	cUpper              // [\p{Lu}\p{Lt}\p{Lm}\p{Lo}\p{M}] (o200k)
	cLower              // [\p{Ll}\p{Lm}\p{Lo}\p{M}] (o200k)
	cBreak              // \r or \n
	cDel                // U+007F, in no set of the reference matcher
)

// bmpClass holds the class bits of every rune of the Basic Multilingual
// Plane, so the hot loop never searches Unicode range tables.
var bmpClass = func() *[0x10000]uint8 {
	var t [0x10000]uint8
	for r := rune(0); r < 0x10000; r++ {
		t[r] = classOfSlow(r)
	}
	return &t
}()

func classOfSlow(r rune) uint8 {
	var c uint8
	if unicode.IsLetter(r) {
		c |= cLetter
	}
	if unicode.IsNumber(r) {
		c |= cNumber
	}
	if unicode.IsSpace(r) {
		c |= cSpace
	}
	if unicode.In(r, unicode.Lu, unicode.Lt, unicode.Lm, unicode.Lo, unicode.M) {
		c |= cUpper
	}
	if unicode.In(r, unicode.Ll, unicode.Lm, unicode.Lo, unicode.M) {
		c |= cLower
	}
	if r == '\r' || r == '\n' {
		c |= cBreak
	}
	if r == 0x7f {
		c |= cDel
	}
	return c
}

// classAt decodes the rune at s[i] and returns its class and byte size.
func classAt(s string, i int) (uint8, int) {
	b := s[i]
	if b < utf8.RuneSelf {
		return bmpClass[b], 1
	}
	r, n := utf8.DecodeRuneInString(s[i:])
	if r < 0x10000 {
		return bmpClass[r], n
	}
	return classOfSlow(r), n
}

// next returns the next piece at or after position i: s[start:end]. When
// the text is exhausted start == end == len(s).
func (sp *splitter) next(s string, i int) (start, end int) {
	for i < len(s) {
		var e int
		switch sp.pat {
		case patCL100k:
			e = sp.nextCL100k(s, i)
		case patO200k:
			e = sp.nextO200k(s, i)
		case patWhole:
			e = len(s)
		default:
			e = sp.nextGPT2(s, i)
		}
		if e > i {
			return i, e
		}
		// No alternative matches here (DEL in reference mode): the
		// matcher moves on by one character.
		_, n := classAt(s, i)
		i += n
	}
	return len(s), len(s)
}

// isPrefix reports whether class c is in [^\r\n\p{L}\p{N}].
func (sp *splitter) isPrefix(c uint8) bool {
	if c&(cLetter|cNumber|cBreak) != 0 {
		return false
	}
	return !(sp.reference && c&cDel != 0)
}

// isPunct reports whether class c is in [^\s\p{L}\p{N}].
func (sp *splitter) isPunct(c uint8) bool {
	if c&(cLetter|cNumber|cSpace) != 0 {
		return false
	}
	return !(sp.reference && c&cDel != 0)
}

// contraction returns the length of (?i:'s|'t|'re|'ve|'m|'ll|'d) at s[i]
// (which must be the apostrophe), or 0. The case-insensitive match
// accepts U+017F LATIN SMALL LETTER LONG S for s, as Unicode case folding
// does. With caseless false only lower-case letters match (gpt2).
func contraction(s string, i int, caseless bool) int {
	if i+1 >= len(s) || s[i] != '\'' {
		return 0
	}
	c := s[i+1]
	if caseless {
		if c == 0xC5 && i+2 < len(s) && s[i+2] == 0xBF { // ſ
			return 3
		}
		if c >= 'A' && c <= 'Z' {
			c += 'a' - 'A'
		}
	}
	switch c {
	case 's', 't', 'm', 'd':
		return 2
	case 'r', 'v', 'l':
		if i+2 >= len(s) {
			return 0
		}
		d := s[i+2]
		if caseless && d >= 'A' && d <= 'Z' {
			d += 'a' - 'A'
		}
		if (c == 'l' && d == 'l') || (c != 'l' && d == 'e') {
			return 3
		}
	}
	return 0
}

// scan returns the end of the run of characters from i whose class has
// one of the bits in mask.
func scan(s string, i int, mask uint8) int {
	for i < len(s) {
		b := s[i]
		if b < utf8.RuneSelf {
			if bmpClass[b]&mask == 0 {
				return i
			}
			i++
			continue
		}
		c, n := classAt(s, i)
		if c&mask == 0 {
			return i
		}
		i += n
	}
	return i
}

// scanPunct returns the end of the run of [^\s\p{L}\p{N}] from i.
func (sp *splitter) scanPunct(s string, i int) int {
	for i < len(s) {
		c, n := classAt(s, i)
		if !sp.isPunct(c) {
			return i
		}
		i += n
	}
	return i
}

// scanNumbers returns the end of at most max \p{N} characters from i.
func scanNumbers(s string, i, max int) int {
	for k := 0; k < max && i < len(s); k++ {
		c, n := classAt(s, i)
		if c&cNumber == 0 {
			break
		}
		i += n
	}
	return i
}

// whitespace handles the alternatives \s*[\r\n]+ | \s+(?!\S) | \s+ at i,
// where s[i] is a space character; the gpt2 family has no line-break
// alternative (breaks false).
func (sp *splitter) whitespace(s string, i int, breaks bool) int {
	e, last, lastSize, runes := i, -1, 0, 0
	for e < len(s) {
		c, n := classAt(s, e)
		if c&cSpace == 0 {
			break
		}
		if c&cBreak != 0 {
			if breaks && sp.reference {
				// The reference ends after the run of line breaks that
				// starts at the first one; stopping here also keeps long
				// runs of alternating breaks and spaces linear.
				for e < len(s) && (s[e] == '\r' || s[e] == '\n') {
					e++
				}
				return e
			}
			last = e
		}
		lastSize = n
		e += n
		runes++
	}
	if breaks && last >= 0 {
		return last + 1
	}
	if e == len(s) || runes < 2 {
		return e
	}
	return e - lastSize
}

func (sp *splitter) nextGPT2(s string, i int) int {
	if s[i] == '\'' {
		if n := contraction(s, i, false); n > 0 {
			return i + n
		}
	}
	c, _ := classAt(s, i)
	j, cj := i, c
	if s[i] == ' ' && i+1 < len(s) {
		j = i + 1
		cj, _ = classAt(s, j)
	}
	switch {
	case cj&cLetter != 0:
		return scan(s, j, cLetter)
	case cj&cNumber != 0:
		return scan(s, j, cNumber)
	case sp.isPunct(cj) && (j > i || sp.isPunct(c)):
		return sp.scanPunct(s, j)
	}
	if c&cSpace != 0 {
		return sp.whitespace(s, i, false)
	}
	return i
}

func (sp *splitter) nextCL100k(s string, i int) int {
	if s[i] == '\'' {
		if n := contraction(s, i, true); n > 0 {
			return i + n
		}
	}
	c, n := classAt(s, i)
	if c&cLetter != 0 {
		return scan(s, i, cLetter)
	}
	if sp.isPrefix(c) && i+n < len(s) {
		if c2, _ := classAt(s, i+n); c2&cLetter != 0 {
			return scan(s, i+n, cLetter)
		}
	}
	if c&cNumber != 0 {
		return scanNumbers(s, i, sp.digits)
	}
	if e := sp.punctRun(s, i, c, "\r\n"); e > i {
		return e
	}
	if c&cSpace != 0 {
		return sp.whitespace(s, i, true)
	}
	return i
}

// punctRun matches " ?[^\s\p{L}\p{N}]+[tail]*" at i (c is the class of
// s[i]) and returns its end, or i.
func (sp *splitter) punctRun(s string, i int, c uint8, tail string) int {
	j := i
	if s[i] == ' ' {
		j = i + 1
		if j >= len(s) {
			return i
		}
		c, _ = classAt(s, j)
	}
	if !sp.isPunct(c) {
		return i
	}
	e := sp.scanPunct(s, j)
	for e < len(s) && indexByte(tail, s[e]) {
		e++
	}
	return e
}

func indexByte(set string, b byte) bool {
	for i := 0; i < len(set); i++ {
		if set[i] == b {
			return true
		}
	}
	return false
}

func (sp *splitter) nextO200k(s string, i int) int {
	c, n := classAt(s, i)
	prefix := sp.isPrefix(c)
	if prefix {
		if e := o200kA(s, i+n); e > 0 {
			return e
		}
	}
	if c&(cUpper|cLower) != 0 {
		if e := o200kA(s, i); e > 0 {
			return e
		}
	}
	if prefix {
		if e := o200kB(s, i+n); e > 0 {
			return e
		}
	}
	if c&cUpper != 0 {
		if e := o200kB(s, i); e > 0 {
			return e
		}
	}
	if c&cNumber != 0 {
		return scanNumbers(s, i, sp.digits)
	}
	if e := sp.punctRun(s, i, c, "\r\n/"); e > i {
		return e
	}
	if c&cSpace != 0 {
		return sp.whitespace(s, i, true)
	}
	return i
}

// o200kA matches U*W+C? at j, where U is [\p{Lu}\p{Lt}\p{Lm}\p{Lo}\p{M}],
// W is [\p{Ll}\p{Lm}\p{Lo}\p{M}] and C an optional contraction, returning
// the end or -1. U* is greedy and gives back characters until W+ can
// start: either right after the U run (a lower-case letter follows it) or
// at the last character of the run that is also in W.
func o200kA(s string, j int) int {
	if j >= len(s) {
		return -1
	}
	k, lastBoth, lastBothEnd := j, -1, 0
	for k < len(s) {
		c, n := classAt(s, k)
		if c&cUpper == 0 {
			break
		}
		if c&cLower != 0 {
			lastBoth, lastBothEnd = k, k+n
		}
		k += n
	}
	var e int
	if k < len(s) {
		if c, _ := classAt(s, k); c&cLower != 0 {
			e = scan(s, k, cLower)
			return e + contraction(s, e, true)
		}
	}
	if lastBoth < 0 {
		return -1
	}
	e = lastBothEnd
	return e + contraction(s, e, true)
}

// o200kB matches U+W*C? at j, returning the end or -1.
func o200kB(s string, j int) int {
	if j >= len(s) {
		return -1
	}
	if c, _ := classAt(s, j); c&cUpper == 0 {
		return -1
	}
	e := scan(s, j, cUpper)
	e = scan(s, e, cLower)
	return e + contraction(s, e, true)
}

// sanitizeUTF8 replaces every byte that is not part of a valid UTF-8
// sequence with U+FFFD, one replacement per byte, which is what
// converting the text to runes does in the reference library.
func sanitizeUTF8(s string) string {
	if utf8.ValidString(s) {
		return s
	}
	b := make([]byte, 0, len(s)+16)
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && n == 1 {
			b = append(b, "\uFFFD"...)
		} else {
			b = append(b, s[i:i+n]...)
		}
		i += n
	}
	return string(b)
}
