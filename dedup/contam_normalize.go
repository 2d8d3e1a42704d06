package dedup

// Word normalization for contamination checks.
//
// Eval text and corpus text go through the same tokenizer, so that an eval
// item re-cased, re-punctuated or re-encoded (full-width letters,
// ligatures, non-breaking spaces) in a web page still produces the same
// word sequence:
//
//   - Unicode NFKC (compatibility composition), then full case folding
//     as CaseFolding.txt defines it (x/text's, with Cherokee corrected:
//     see foldCherokee);
//   - a word is a maximal run of letters, marks and numbers (Unicode
//     categories L, M, N);
//   - an apostrophe (U+0027 or U+2019) between two word characters is
//     deleted, so "don't", "don’t" and "dont" are one word;
//   - every other character (punctuation, symbols, whitespace) separates
//     words, so "hull-mounted" and "hull mounted" are the same two words
//     and whitespace runs of any length collapse.
//
// ASCII text takes a table-driven fast path with no allocation. A segment
// containing non-ASCII characters is normalized as a whole (NFKC then
// fold) and split again, because composition and folding can merge or
// split characters (e.g. "ﬁ" becomes "fi", "ß" becomes "ss", "Ｈｕｌｌ"
// becomes "hull"). Segments are cut at ASCII separators, which NFKC never
// composes with what follows, so normalizing segment by segment equals
// normalizing the whole text. A non-ASCII character that is not a letter,
// mark or number but has an NFKC decomposition (e.g. "™", "㎏") is kept in
// its segment so that its expansion is seen.
//
// Every word remembers its byte span in the original text (for cutting
// matched spans out of a document) and its span in a normalized buffer
// where the document's words are stored separated by single spaces (for
// excerpts and exact comparison). Words that come out of one non-ASCII
// segment share the segment's original span.
//
// Not implemented: word segmentation of scripts written without spaces
// (Chinese, Japanese, Thai): a run of such text is one "word", so
// contamination in those languages is found only when long identical
// runs repeat between spaces or punctuation.

import (
	"unicode"
	"unicode/utf8"

	"github.com/zeebo/xxh3"
	"golang.org/x/text/cases"
	"golang.org/x/text/transform"
	"golang.org/x/text/unicode/norm"
)

// contamWord is one normalized word of a text.
type contamWord struct {
	start, end   int32 // byte span in the original text
	nstart, nend int32 // byte span in the normalized buffer
}

// contamTokenizer splits texts into normalized words, reusing its buffers.
// It is not safe for concurrent use; each scanner owns one.
type contamTokenizer struct {
	words  []contamWord
	hashes []uint64 // xxh3 of each normalized word
	norm   []byte   // normalized words, each followed by one space
	seg    []byte   // scratch: NFKC of a non-ASCII segment
	folded []byte   // scratch: case fold of seg
	fold   cases.Caser
}

func newContamTokenizer() *contamTokenizer {
	return &contamTokenizer{fold: cases.Fold()}
}

// contamWordRune reports whether a non-ASCII rune at the start of s belongs to
// a word segment (before normalization).
func contamWordRune(r rune, s string) bool {
	if unicode.IsLetter(r) || unicode.IsMark(r) || unicode.IsNumber(r) {
		return true
	}
	if unicode.IsSpace(r) || r == '\u2019' {
		return false
	}
	return len(norm.NFKC.PropertiesString(s).Decomposition()) > 0
}

// contamNormWordRune reports whether a rune of normalized text is a word
// character.
func contamNormWordRune(r rune) bool {
	if r < utf8.RuneSelf {
		return wordByte[r] != 0
	}
	return unicode.IsLetter(r) || unicode.IsMark(r) || unicode.IsNumber(r)
}

// contamWordAt reports whether a word character starts at s[i:].
func contamWordAt(s string, i int) bool {
	if i >= len(s) {
		return false
	}
	if c := s[i]; c < utf8.RuneSelf {
		return wordByte[c] != 0
	}
	r, _ := utf8.DecodeRuneInString(s[i:])
	return contamWordRune(r, s[i:])
}

// contamApostrophe returns the byte length of an apostrophe at s[i:] (0 when
// there is none).
func contamApostrophe(s string, i int) int {
	if i < len(s) && s[i] == '\'' {
		return 1
	}
	if i+2 < len(s) && s[i] == 0xE2 && s[i+1] == 0x80 && s[i+2] == 0x99 { // U+2019
		return 3
	}
	return 0
}

// tokenize fills t.words, t.hashes and t.norm from text.
func (t *contamTokenizer) tokenize(text string) {
	t.words = t.words[:0]
	t.hashes = t.hashes[:0]
	t.norm = t.norm[:0]
	i := 0
	for i < len(text) {
		c := text[i]
		if c < utf8.RuneSelf {
			if wordByte[c] == 0 {
				i++
				continue
			}
			// ASCII fast path; falls back to the segment path at the
			// first non-ASCII byte inside the word.
			start, nstart := i, len(t.norm)
			ascii := true
		word:
			for {
				j := i
				for j < len(text) && wordByte[text[j]] != 0 {
					j++
				}
				n := len(t.norm)
				t.norm = append(t.norm, text[i:j]...)
				for k := n; k < len(t.norm); k++ {
					t.norm[k] = wordByte[t.norm[k]]
				}
				i = j
				if i >= len(text) {
					break
				}
				a := contamApostrophe(text, i)
				if a == 0 {
					if text[i] >= utf8.RuneSelf {
						// A non-ASCII word character continues the word
						// (e.g. "café"); anything else ends it.
						if r, _ := utf8.DecodeRuneInString(text[i:]); r != utf8.RuneError && contamWordRune(r, text[i:]) {
							ascii = false
						}
					}
					break word
				}
				if !contamWordAt(text, i+a) {
					break word
				}
				if text[i+a] >= utf8.RuneSelf {
					ascii = false
					break word
				}
				i += a
			}
			if ascii {
				t.emit(start, i, nstart)
				continue
			}
			t.norm = t.norm[:nstart]
			i = t.segment(text, start)
			continue
		}
		r, size := utf8.DecodeRuneInString(text[i:])
		if r == utf8.RuneError && size == 1 {
			i++
			continue
		}
		if contamWordRune(r, text[i:]) {
			i = t.segment(text, i)
			continue
		}
		i += size
	}
}

// emit records the word whose normalized bytes are t.norm[nstart:] and
// whose original span is text[start:end].
func (t *contamTokenizer) emit(start, end, nstart int) {
	nend := len(t.norm)
	t.hashes = append(t.hashes, xxh3.Hash(t.norm[nstart:nend]))
	t.words = append(t.words, contamWord{start: int32(start), end: int32(end), nstart: int32(nstart), nend: int32(nend)})
	t.norm = append(t.norm, ' ')
}

// segment normalizes the word segment starting at text[start:] (which
// contains or is followed by non-ASCII word characters), emits its words
// and returns the index after it.
func (t *contamTokenizer) segment(text string, start int) int {
	i := start
	for i < len(text) {
		c := text[i]
		if c < utf8.RuneSelf {
			if wordByte[c] != 0 {
				i++
				continue
			}
			if a := contamApostrophe(text, i); a > 0 && i > start && contamWordAt(text, i+a) {
				i += a
				continue
			}
			break
		}
		r, size := utf8.DecodeRuneInString(text[i:])
		if r == utf8.RuneError && size == 1 {
			break
		}
		if contamWordRune(r, text[i:]) {
			i += size
			continue
		}
		if a := contamApostrophe(text, i); a > 0 && i > start && contamWordAt(text, i+a) {
			i += a
			continue
		}
		break
	}
	end := i
	t.seg = norm.NFKC.AppendString(t.seg[:0], text[start:end])
	t.fold.Reset()
	folded, _, err := transform.Append(t.fold, t.folded[:0], t.seg)
	if err != nil { // cannot happen for valid UTF-8; keep the unfolded text
		folded = append(t.folded[:0], t.seg...)
	}
	foldCherokee(folded)
	t.folded = folded
	// Split the normalized segment into words.
	s := t.folded
	j := 0
	nstart := -1
	for j < len(s) {
		r, size := utf8.DecodeRune(s[j:])
		if contamNormWordRune(r) {
			if nstart < 0 {
				nstart = len(t.norm)
			}
			t.norm = append(t.norm, s[j:j+size]...)
			j += size
			continue
		}
		if nstart >= 0 && (r == '\'' || r == '\u2019') && j+size < len(s) {
			if r2, _ := utf8.DecodeRune(s[j+size:]); contamNormWordRune(r2) {
				j += size
				continue
			}
		}
		if nstart >= 0 {
			t.emit(start, end, nstart)
			nstart = -1
		}
		j += size
	}
	if nstart >= 0 {
		t.emit(start, end, nstart)
	}
	if end == start { // defensive: always make progress
		_, size := utf8.DecodeRuneInString(text[start:])
		end = start + size
	}
	return end
}

// foldCherokee rewrites Cherokee small letters in b as the capital
// letters, in place. CaseFolding.txt folds Cherokee to the capitals
// (U+AB70..U+ABBF to U+13A0..U+13EF, U+13F8..U+13FD to U+13F0..U+13F5:
// the capitals are the older letters, and case folding is stable across
// Unicode versions), but golang.org/x/text's cases.Fold maps the capitals
// to the small letters, so the two cases swapped instead of meeting and
// folding folded text changed it again. Both ranges and their images are
// three bytes long in UTF-8, and 0xE1 and 0xEA are lead bytes only.
func foldCherokee(b []byte) {
	for i := 0; i+2 < len(b); i++ {
		switch b[i] {
		case 0xE1, 0xEA:
			r, size := utf8.DecodeRune(b[i:])
			switch {
			case r >= 0xAB70 && r <= 0xABBF:
				utf8.EncodeRune(b[i:], r-0xAB70+0x13A0)
			case r >= 0x13F8 && r <= 0x13FD:
				utf8.EncodeRune(b[i:], r-8)
			}
			i += size - 1
		}
	}
}

// NormalizeWords returns the words of text after contamination
// normalization (NFKC, case folding, punctuation removed), joined by
// single spaces. It is the form excerpts in contamination reports use.
func NormalizeWords(text string) string {
	t := newContamTokenizer()
	t.tokenize(text)
	if len(t.norm) == 0 {
		return ""
	}
	return string(t.norm[:len(t.norm)-1])
}
