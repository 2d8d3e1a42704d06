// Package dedup decides which documents duplicate others: exact copies
// (xxh3-128 of normalized text), repeated paragraphs, and near copies
// (MinHash signatures over word n-gram shingles, LSH banding, union-find
// clusters). It never parses JSON and never reads documents itself: the
// stage wrappers in package stages hand it text, order keys and ids.
//
// Every index here keeps compact fixed-width records (hashes packed with
// order keys), sorts them in memory and spills sorted runs to temp files
// when a memory budget is exceeded, then merges the runs with a heap. See
// spill.go.
//
// This file holds the text normalizers shared by the exact, paragraph and
// near-duplicate code:
//
//   - Normalization.Append folds a text for exact comparison: simple
//     Unicode case folding (to lower case), every run of whitespace
//     collapsed to one space, leading and trailing whitespace dropped,
//     and optionally punctuation/symbols deleted and digits mapped to '0'.
//   - AppendWords splits a text into lower-cased words (maximal runs of
//     letters, digits and combining marks) joined by single spaces, the
//     unit MinHash shingles are built from.
//
// Not implemented: full Unicode case folding (ß stays ß; only the simple
// one-rune lower-case mapping is applied) and Unicode normalization forms
// (NFC/NFKC); run a normalize stage before dedup if inputs mix forms.
package dedup

import (
	"slices"
	"unicode"
	"unicode/utf8"
)

// Normalization says how text is folded before exact hashing.
type Normalization struct {
	// FoldPunct deletes punctuation and symbol characters, so "Hello,
	// world!" and "hello world" compare equal.
	FoldPunct bool
	// FoldDigits maps every decimal digit to '0', so texts differing only
	// in numbers (dates, prices, counters) compare equal.
	FoldDigits bool
}

// ASCII byte classes for the fast paths of the normalizers.
const (
	clsOther = iota // letters and anything else kept as is
	clsSpace        // whitespace: collapsed
	clsPunct        // ASCII punctuation and symbols: deleted under FoldPunct, word separator
	clsDigit        // 0-9: mapped to '0' under FoldDigits, part of words
	clsUpper        // A-Z: lower-cased
	clsLower        // a-z
	clsCtrl         // other control characters: treated as whitespace
)

// wordByte maps ASCII letters and digits to their lower-case form and
// every other byte (separators, and all bytes >= 0x80) to 0. It is the
// ASCII fast path of both AppendWords and the contamination tokenizer
// (contam_normalize.go).
var wordByte = func() (t [256]byte) {
	for c := '0'; c <= '9'; c++ {
		t[c] = byte(c)
	}
	for c := 'a'; c <= 'z'; c++ {
		t[c] = byte(c)
		t[c-'a'+'A'] = byte(c)
	}
	return t
}()

var asciiClass = func() (t [128]uint8) {
	for c := 0; c < 128; c++ {
		switch {
		case c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f':
			t[c] = clsSpace
		case c < 32 || c == 127:
			t[c] = clsCtrl
		case c >= '0' && c <= '9':
			t[c] = clsDigit
		case c >= 'A' && c <= 'Z':
			t[c] = clsUpper
		case c >= 'a' && c <= 'z':
			t[c] = clsLower
		default:
			t[c] = clsPunct
		}
	}
	return t
}()

// Append appends the normalized form of s to dst and returns it. An empty
// result means the text has nothing to compare (only whitespace, or only
// punctuation under FoldPunct).
func (n Normalization) Append(dst []byte, s string) []byte {
	start := len(dst)
	pending := false // a whitespace run was seen since the last kept rune
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			i++
			switch asciiClass[c] {
			case clsSpace, clsCtrl:
				pending = true
				continue
			case clsPunct:
				if n.FoldPunct {
					continue
				}
			case clsDigit:
				if n.FoldDigits {
					c = '0'
				}
			case clsUpper:
				c += 'a' - 'A'
			}
			if pending && len(dst) > start {
				dst = append(dst, ' ')
			}
			pending = false
			dst = append(dst, c)
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		i += size
		switch {
		case unicode.IsSpace(r):
			pending = true
			continue
		case n.FoldPunct && (unicode.IsPunct(r) || unicode.IsSymbol(r)):
			continue
		case n.FoldDigits && unicode.IsDigit(r):
			r = '0'
		case unicode.IsControl(r) || r == '\u200b' || r == '\ufeff':
			// Zero-width and control characters are invisible; drop them
			// without breaking the surrounding word.
			continue
		default:
			r = unicode.ToLower(r)
		}
		if pending && len(dst) > start {
			dst = append(dst, ' ')
		}
		pending = false
		dst = utf8.AppendRune(dst, r)
	}
	return dst
}

// AppendWords appends the words of s to buf, lower-cased and separated by
// single spaces, and appends each word's end offset in buf to ends. A word
// is a maximal run of letters, digits and combining marks; everything else
// separates words. Word i spans buf[start:ends[i]] where start is 0 for
// the first word and ends[i-1]+1 otherwise (offsets are relative to the
// buf passed in, which should be empty for that to hold).
func AppendWords(buf []byte, ends []int32, s string) ([]byte, []int32) {
	// ASCII output never outgrows the input plus one separator, so the fast
	// path writes by index into spare capacity; the non-ASCII path appends
	// (lower-casing may lengthen a rune) and re-establishes the capacity.
	buf = slices.Grow(buf, len(s)+1)
	out := buf[:cap(buf)]
	n := len(buf)
	inWord := false
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			i++
			l := wordByte[c]
			if l == 0 {
				if inWord {
					ends = append(ends, int32(n))
					inWord = false
				}
				continue
			}
			if !inWord {
				if n > 0 {
					out[n] = ' '
					n++
				}
				inWord = true
			}
			out[n] = l
			n++
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		i += size
		if r == '\u200b' || r == '\ufeff' || r == '\u00ad' {
			continue // invisible: does not split a word
		}
		if !(unicode.IsLetter(r) || unicode.IsDigit(r) || unicode.IsMark(r)) {
			if inWord {
				ends = append(ends, int32(n))
				inWord = false
			}
			continue
		}
		buf = out[:n]
		if !inWord {
			if n > 0 {
				buf = append(buf, ' ')
			}
			inWord = true
		}
		buf = utf8.AppendRune(buf, unicode.ToLower(r))
		buf = slices.Grow(buf, len(s)-i+1)
		out = buf[:cap(buf)]
		n = len(buf)
	}
	if inWord {
		ends = append(ends, int32(n))
	}
	return out[:n], ends
}
