package langid

import (
	"sync"
	"unicode"
	"unicode/utf8"
)

// script is a Unicode script the detector tells apart. scriptNone covers
// letters of every other script and combining marks of no script.
type script uint8

const (
	scriptNone script = iota
	scriptLatin
	scriptCyrillic
	scriptGreek
	scriptArabic
	scriptHebrew
	scriptHan
	scriptHiragana
	scriptKatakana
	scriptHangul
	scriptThai
	scriptDevanagari
	scriptArmenian
	scriptGeorgian
	scriptBengali
	scriptGujarati
	scriptGurmukhi
	scriptTamil
	scriptTelugu
	numScripts
)

var scriptNames = [numScripts]string{
	"none", "Latin", "Cyrillic", "Greek", "Arabic", "Hebrew", "Han", "Hiragana",
	"Katakana", "Hangul", "Thai", "Devanagari", "Armenian", "Georgian",
	"Bengali", "Gujarati", "Gurmukhi", "Tamil", "Telugu",
}

// scriptTables lists the range tables in classification order; index i is
// script(i+1).
var scriptTables = [numScripts - 1]*unicode.RangeTable{
	unicode.Latin, unicode.Cyrillic, unicode.Greek, unicode.Arabic, unicode.Hebrew,
	unicode.Han, unicode.Hiragana, unicode.Katakana, unicode.Hangul, unicode.Thai,
	unicode.Devanagari, unicode.Armenian, unicode.Georgian, unicode.Bengali,
	unicode.Gujarati, unicode.Gurmukhi, unicode.Tamil, unicode.Telugu,
}

// A rune's class packs its script (low 5 bits) with three flags.
const (
	classScript = 0x1f // mask of the script bits
	classLetter = 0x20 // a letter or combining mark: counts toward "letters"
	classWord   = 0x40 // \p{L}: part of a word for the n-gram models
	classSpace  = 0x80 // white space
)

// bmpClass caches the class of every code point of the Basic Multilingual
// Plane: one byte each (64 KiB), built once on first use, so the scan is a
// table load per rune instead of a walk over a dozen range tables.
var (
	bmpOnce  sync.Once
	bmpClass *[0x10000]uint8
)

func classTable() *[0x10000]uint8 {
	bmpOnce.Do(func() {
		t := new([0x10000]uint8)
		for r := rune(0); r < 0x10000; r++ {
			t[r] = classifyRune(r)
		}
		bmpClass = t
	})
	return bmpClass
}

// classifyRune computes a rune's class from the Unicode tables.
func classifyRune(r rune) uint8 {
	if unicode.IsSpace(r) {
		return classSpace
	}
	isL := unicode.IsLetter(r)
	if !isL && !unicode.IsMark(r) {
		return 0
	}
	c := uint8(classLetter)
	if isL {
		c |= classWord
	}
	for i, t := range scriptTables {
		if unicode.Is(t, r) {
			return c | uint8(i+1)
		}
	}
	return c
}

// runeClass returns the class of r, from the cached table for the BMP.
func runeClass(t *[0x10000]uint8, r rune) uint8 {
	if r < 0x10000 {
		return t[r]
	}
	if r == utf8.RuneError || r > unicode.MaxRune {
		return 0
	}
	return classifyRune(r)
}

// Markup is skipped rather than read as words: an HTML/XML tag ("<" then a
// letter, "/", "!" or "?", up to the next ">") and a character entity
// ("&amp;", "&#8217;"). Its runes count as non-letters.
const (
	maxTagBytes    = 512 // a "<" without ">" this close is a less-than sign, not a tag
	maxEntityBytes = 12  // longest entity name worth recognising, e.g. "&thetasym;"
)

// markupLen returns the length of the tag or entity starting at s[0]
// ('<' or '&'), or 0 when none starts there.
func markupLen(s string) int {
	if len(s) < 3 {
		return 0
	}
	switch s[0] {
	case '<':
		c := s[1]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '/' || c == '!' || c == '?') {
			return 0
		}
		lim := min(len(s), maxTagBytes)
		for i := 2; i < lim; i++ {
			if s[i] == '>' {
				return i + 1
			}
			if s[i] == '<' {
				return 0
			}
		}
	case '&':
		lim := min(len(s), maxEntityBytes)
		for i := 1; i < lim; i++ {
			c := s[i]
			if c == ';' {
				if i == 1 {
					return 0
				}
				return i + 1
			}
			if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '#') {
				return 0
			}
		}
	}
	return 0
}

// Kinds of ASCII bytes for the scan's fast path.
const (
	asciiSpace uint8 = iota
	asciiLetter
	asciiMarkup // '<' or '&': maybe the start of a tag or entity
	asciiOther
)

var asciiKind = func() (t [utf8.RuneSelf]uint8) {
	for b := range t {
		switch {
		case b >= 'a' && b <= 'z' || b >= 'A' && b <= 'Z':
			t[b] = asciiLetter
		case b == ' ' || b == '\n' || b == '\t' || b == '\r' || b == '\v' || b == '\f':
			t[b] = asciiSpace
		case b == '<' || b == '&':
			t[b] = asciiMarkup
		default:
			t[b] = asciiOther
		}
	}
	return
}()

// textStats is what one pass over the whole document measures.
type textStats struct {
	runes    int // all runes, markup and space included
	nonSpace int // runes that are not white space (markup included)
	letters  int // letters and combining marks outside markup
	marks    int // combining marks of no script of their own (decomposed accents)
	scripts  [numScripts]int
}

// scanText classifies every rune of s once. A combining mark counts as a
// letter only after a letter (a variation selector after an emoji does
// not). It does not allocate.
func scanText(s string) textStats {
	t := classTable()
	var st textStats
	afterLetter := false
	for i := 0; i < len(s); {
		b := s[i]
		if b < utf8.RuneSelf {
			st.runes++
			i++
			switch asciiKind[b] {
			case asciiLetter:
				st.letters++
				st.scripts[scriptLatin]++
				st.nonSpace++
				afterLetter = true
				continue
			case asciiMarkup:
				if n := markupLen(s[i-1:]); n > 0 {
					st.runes += n - 1 // markup is ASCII or counted per byte: an upper bound is fine
					st.nonSpace += n
					i += n - 1
					afterLetter = false
					continue
				}
				st.nonSpace++
			case asciiOther:
				st.nonSpace++
			}
			afterLetter = false
			continue
		}
		r, n := decodeRune(s, i)
		i += n
		st.runes++
		c := runeClass(t, r)
		if c&classSpace != 0 {
			afterLetter = false
			continue
		}
		st.nonSpace++
		switch {
		case c&classWord != 0:
			afterLetter = true
		case c&classLetter != 0 && afterLetter: // a mark on a letter
			if c&classScript == 0 {
				st.marks++
			}
		default:
			afterLetter = false
			continue
		}
		st.letters++
		st.scripts[c&classScript]++
	}
	return st
}

// decodeRune is utf8.DecodeRuneInString(s[i:]) with the two-byte sequences
// of Latin accents, Greek, Cyrillic, Hebrew and Arabic decoded inline: a
// lead byte 0xC2-0xDF followed by a continuation byte is always a valid
// sequence (RFC 3629, section 4).
func decodeRune(s string, i int) (rune, int) {
	if b := s[i]; b >= 0xc2 && b < 0xe0 && i+1 < len(s) {
		if c := s[i+1]; c&0xc0 == 0x80 {
			return rune(b&0x1f)<<6 | rune(c&0x3f), 2
		}
	}
	return utf8.DecodeRuneInString(s[i:])
}
