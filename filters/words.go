// Package filters measures text: word, line and paragraph statistics, the
// quality and repetition metrics of Rae et al. 2021, the line cleaning of
// Raffel et al. 2020, stop-word counts per language and best-effort
// redaction of contact details. Every function here is a pure function of
// its input text and options; nothing reads files (the stop-word lists are
// embedded in the binary).
//
// The hot paths reuse a caller-provided Scratch so that measuring a
// document allocates nothing per word: the word, line and paragraph lists
// and the hash tables of the repetition metrics keep their capacity from
// one document to the next.
package filters

import (
	"encoding/binary"
	"math/bits"
	"unicode"
	"unicode/utf8"
	"unsafe"

	"github.com/zeebo/xxh3"
)

// Word is one word of a text (see Split for what a word is): the byte
// span text[Start:End], its length in characters (runes; each invalid
// UTF-8 byte counts as one) and whether it contains a letter. Offsets are
// int32 to keep the list compact; Split measures at most the first
// MaxSplitBytes of a text.
type Word struct {
	Start, End int32
	Runes      int32
	// Alpha is true when the word contains at least one Unicode letter.
	Alpha bool
	// Plain is true when the word is only lower-case ASCII letters and
	// digits, so that NormalizeWord would return it unchanged.
	Plain bool
	// Unspaced is true for a word of a script written without spaces
	// (one Han or kana character, or one Thai character cluster).
	Unspaced bool
}

// Line is one non-blank line of a text with surrounding whitespace
// trimmed: the byte span text[Start:End], the character offset of Start,
// its length in characters, and the range of its words in Scratch.Words.
type Line struct {
	Start, End int
	RuneStart  int
	Runes      int
	FirstWord  int
	NumWords   int
}

// Para is one paragraph: a maximal run of non-blank lines (paragraphs are
// separated by one or more blank lines). Start/End is the trimmed byte span
// from its first to its last line and Runes its length in characters,
// newlines and indentation between its lines included; FirstLine/NumLines
// index Scratch.Lines.
type Para struct {
	Start, End int
	Runes      int
	FirstLine  int
	NumLines   int
}

// MaxSplitBytes is the longest prefix of a text that Split looks at (the
// limit of Word's int32 offsets); longer texts are measured on this prefix.
const MaxSplitBytes = 1<<31 - 1

// Scratch holds the reusable buffers of one measuring goroutine. The zero
// value is ready to use; a Scratch must not be shared by goroutines running
// at the same time. After Split, Words, Lines and Paras describe the text
// and Runes is its length in characters.
type Scratch struct {
	Words []Word
	Lines []Line
	Paras []Para
	// Runes is the number of characters of the last split text (each
	// invalid UTF-8 byte counts as one).
	Runes int

	rep      repScratch // tables of the repetition metrics
	unspaced int        // words of scripts without spaces in the last split text
	bounds   []int      // rune boundaries of a segmented run (stop words)
	starts   []uint32   // first word of each line, paraBreak set after a blank line

	// The last split text, by length and xxh3 digest: splitting the same
	// text again (the quality and repetition stages one after the other)
	// reuses the lists and word hashes. Equal digests of equal-length
	// texts mean equal texts up to a 2^-64 chance.
	lastLen int
	lastSum uint64
	valid   bool
	hashes  []uint64 // WordHash of each word, when hashed is true
	hashed  bool
}

// WordHashes returns the WordHash of each word of the last split text
// (text must be that text), computing them once per split.
func (s *Scratch) WordHashes(text string) []uint64 {
	if !s.hashed {
		h := grow(s.hashes, len(s.Words))
		tb := unsafe.Slice(unsafe.StringData(text), len(text))
		var b [16]byte
		for i, w := range s.Words {
			start, l := int(w.Start), int(w.End-w.Start)
			if l > 16 || start+16 > len(tb) {
				h[i] = wordHashAt(text, start, start+l)
				continue
			}
			// wordHashAt's fast path, inlined
			v := tb[start : start+16 : start+16]
			m := &padMask[l]
			binary.LittleEndian.PutUint64(b[:8], binary.LittleEndian.Uint64(v[:8])&m[0])
			binary.LittleEndian.PutUint64(b[8:], binary.LittleEndian.Uint64(v[8:])&m[1])
			h[i] = xxh3.HashSeed(b[:], uint64(l))
		}
		s.hashes, s.hashed = h, true
	}
	return s.hashes
}

// WordHash is the 64-bit hash of a word (or stop-word key) used by every
// metric: xxh3 of the word, except that a word of at most 16 bytes is
// hashed as its bytes zero-padded to 16 with its length as the xxh3 seed,
// so that all short words take the same code path of the hash function
// (no branch on the length to mispredict).
func WordHash(w string) uint64 { return wordHashAt(w, 0, len(w)) }

// wordHashAt returns WordHash(text[start:end]), reading the 16 bytes at
// start directly when the text has them.
func wordHashAt(text string, start, end int) uint64 {
	l := end - start
	if l > 16 {
		return xxh3.HashString(text[start:end])
	}
	var b [16]byte
	if start+16 <= len(text) {
		v := unsafe.Slice(unsafe.StringData(text), len(text))[start : start+16 : start+16]
		m := &padMask[l]
		binary.LittleEndian.PutUint64(b[:8], binary.LittleEndian.Uint64(v[:8])&m[0])
		binary.LittleEndian.PutUint64(b[8:], binary.LittleEndian.Uint64(v[8:])&m[1])
	} else {
		copy(b[:], text[start:end])
	}
	return xxh3.HashSeed(b[:], uint64(l))
}

// padMask[l] keeps the first l of 16 little-endian bytes.
var padMask = func() (m [17][2]uint64) {
	for l := range m {
		for k := 0; k < l; k++ {
			m[l][k/8] |= 0xFF << (8 * (k % 8))
		}
	}
	return m
}()

// Byte classes used by the splitter.
const (
	clsSpace   = 1 << iota // ASCII whitespace as unicode.IsSpace sees it
	clsNewline             // '\n'
	clsLetter              // ASCII letter
	clsHigh                // a byte of a multi-byte (or invalid) UTF-8 sequence
	clsUpper               // ASCII upper-case letter
	clsOther               // ASCII byte that is no letter, digit or space
)

var byteClass = func() (t [256]uint8) {
	for c := 0; c < 0x80; c++ {
		t[c] = clsOther
	}
	for _, c := range "\t\n\v\f\r " {
		t[c] = clsSpace
	}
	t['\n'] |= clsNewline
	for c := '0'; c <= '9'; c++ {
		t[c] = 0
	}
	for c := 'a'; c <= 'z'; c++ {
		t[c] = clsLetter
		t[c-'a'+'A'] = clsLetter | clsUpper
	}
	for c := 0x80; c < 0x100; c++ {
		t[c] = clsHigh
	}
	return t
}()

// spaceLead marks the UTF-8 lead bytes of the non-ASCII code points that
// unicode.IsSpace reports as space (U+0085, U+00A0, U+1680, U+2000..U+200A,
// U+2028, U+2029, U+202F, U+205F, U+3000); other lead bytes skip the check.
var spaceLead = [256]bool{0xC2: true, 0xE1: true, 0xE2: true, 0xE3: true}

// Scripts written without spaces between words (scriptio continua): Han,
// Hiragana, Katakana and Thai. Whitespace does not delimit their words,
// so a whole sentence would count as one long word and every rule on
// words (count, length, stop words, phrases, words per line) would misfire
// on Chinese, Japanese and Thai pages. Instead each of their characters is
// a word of its own, the usual dictionary-free unit for these scripts
// (Chinese words average under two characters; common practice). Thai,
// whose vowel signs and tone marks are separate characters, is cut into
// character clusters, the inseparable units of Theeramunkong et al. 2000,
// "Character cluster based Thai information retrieval" (rules from
// memory, simplified): a leading vowel (U+0E40..U+0E44) takes the
// consonant after it, and combining vowel signs and tone marks and the
// following vowels sara a, sara aa, sara am, lakkhangyao and the
// repetition mark mai yamok (U+0E30, U+0E32, U+0E33, U+0E45, U+0E46) stay
// with the character before them. In every script, combining marks and
// punctuation right after such a word belong to it (so "。" is no word
// of its own, as "," is not in English).

// isUnspaced reports whether r belongs to a script written without spaces
// (Han, Hiragana, Katakana with its prolonged-sound mark, Thai).
func isUnspaced(r rune) bool {
	if r < 0x0E00 || (r > 0x0E7F && r < 0x2E80) {
		return false
	}
	if r <= 0x0E7F {
		return unicode.Is(unicode.Thai, r)
	}
	return r == 0x30FC || unicode.Is(unicode.Han, r) || unicode.Is(unicode.Hiragana, r) || unicode.Is(unicode.Katakana, r)
}

// unspacedEnd returns the end of the word that starts at text[i] with r
// (of size bytes), a character of a script written without spaces.
func unspacedEnd(text string, i int, r rune, size int) int {
	j := i + size
	thai := r <= 0x0E7F
	if 0x0E40 <= r && r <= 0x0E44 && j < len(text) { // Thai leading vowel
		if r2, s2 := utf8.DecodeRuneInString(text[j:]); 0x0E01 <= r2 && r2 <= 0x0E2E {
			j += s2
		}
	}
	for j < len(text) {
		r2, s2 := utf8.DecodeRuneInString(text[j:])
		switch {
		case r2 < utf8.RuneSelf:
			if byteClass[r2]&clsOther == 0 || !unicode.IsPunct(r2) {
				return j
			}
		case thai && (r2 == 0x0E30 || r2 == 0x0E32 || r2 == 0x0E33 || r2 == 0x0E45 || r2 == 0x0E46):
		case unicode.In(r2, unicode.Mn, unicode.Me, unicode.P):
		default:
			return j
		}
		j += s2
	}
	return j
}

// Split fills s.Words, s.Lines and s.Paras for text, reusing their
// capacity. Words are maximal runs of non-space characters, exactly as
// strings.Fields defines them (unicode.IsSpace), except in scripts written
// without spaces, where each character (Thai: character cluster) is a word
// with the punctuation that follows it (see isUnspaced); lines end at '\n' (a
// trailing '\r' is whitespace); a line without words is blank and blank
// lines separate paragraphs. Split allocates only when a list outgrows its
// capacity.
func (s *Scratch) Split(text string) {
	if len(text) > MaxSplitBytes {
		text = text[:MaxSplitBytes]
	}
	sum := xxh3.HashString(text)
	if s.valid && len(text) == s.lastLen && sum == s.lastSum {
		return
	}
	s.lastLen, s.lastSum, s.valid, s.hashed = len(text), sum, true, false
	var cont int
	s.Words, s.starts, cont, s.unspaced = splitWords(s.Words[:0], s.starts[:0], text)
	s.Runes = len(text) - cont
	s.Lines, s.Paras = splitLines(s.Lines[:0], s.Paras[:0], s.Words, s.starts, text, cont == 0)
}

// SWAR (SIMD within a register) helpers: eight bytes of text in a uint64,
// little-endian; a comparison leaves bit 7 of each byte set where true.
const (
	loBytes = 0x0101010101010101
	hiBits  = 0x8080808080808080
)

// byteIn marks the bytes of l (each < 0x80) in [lo, hi]: adding 0x80-lo
// sets bit 7 exactly when b >= lo, adding 0x7F-hi exactly when b > hi,
// and no sum carries into the next byte.
func byteIn(l uint64, lo, hi byte) uint64 {
	ge := (l + loBytes*uint64(0x80-lo)) & hiBits
	gt := (l + loBytes*uint64(0x7F-hi)) & hiBits
	return ge &^ gt
}

// loadTail returns the bytes of text from i to its end as a little-endian
// uint64 padded with spaces, so that the end of the text ends a word.
func loadTail(text string, i int) uint64 {
	x := uint64(0x2020202020202020)
	for k := 0; i+k < len(text) && k < 8; k++ {
		x = x&^(0xFF<<(8*k)) | uint64(text[i+k])<<(8*k)
	}
	return x
}

// paraBreak marks an entry of Scratch.starts whose line starts a new
// paragraph.
const paraBreak = 1 << 31

// wordSplitter holds splitWords' output in memory, so that its byte loop
// keeps only the text, the position and the word's flags in registers.
type wordSplitter struct {
	words  []Word
	starts []uint32
	cont   int
	// unspaced counts the words of scripts written without spaces
	unspaced int
}

// splitWords appends the words of text to words and the index of each
// line's first word to starts (with paraBreak set after a blank line). It
// returns them with the number of bytes of text that do not start a
// character (so that characters = bytes - cont) and the number of words of
// scripts written without spaces.
func splitWords(words []Word, starts []uint32, text string) ([]Word, []uint32, int, int) {
	ws := wordSplitter{words: words, starts: starts}
	ws.split(text)
	return ws.words, ws.starts, ws.cont, ws.unspaced
}

func (sp *wordSplitter) split(text string) {
	tb := unsafe.Slice(unsafe.StringData(text), len(text))
	newlines := 2 // '\n' seen since the last word, capped at 2 (the first word starts a paragraph)
	for i := 0; i < len(text); {
		c := text[i]
		t := byteClass[c]
		if t&clsSpace != 0 {
			if c == '\n' && newlines < 2 {
				newlines++
			}
			i++
			continue
		}
		if t&clsHigh != 0 {
			r, size := utf8.DecodeRuneInString(text[i:])
			if spaceLead[c] && unicode.IsSpace(r) {
				sp.cont += size - 1
				i += size
				continue
			}
			if c >= 0xE0 && isUnspaced(r) {
				end := unspacedEnd(text, i, r, size)
				if newlines > 0 {
					sp.lineStart(newlines)
					newlines = 0
				}
				sp.addUnspaced(text, i, end)
				i = end
				continue
			}
		}
		// a word starts at i: find its end eight bytes at a time (SWAR)
		start := i
		var lanes uint64 // per byte: bit 0 letter, bit 1 neither lower-case letter nor digit
		high := false
		for {
			var x uint64
			if i+8 <= len(tb) {
				x = binary.LittleEndian.Uint64(tb[i : i+8 : i+8])
			} else {
				x = loadTail(text, i)
			}
			hi := x & hiBits
			l := x &^ hiBits
			// stop at the first byte <= ' ' (whitespace or a control
			// character, sorted out below) or >= 0x80
			stop := ^(l+loBytes*(0x7F-' '))&hiBits | hi
			m := ((stop & -stop) - 1) & hiBits // bit 7 of the bytes before it
			lower := byteIn(l, 'a', 'z')
			letter := byteIn(l|loBytes*0x20, 'a', 'z')
			digit := byteIn(l, '0', '9')
			lanes |= (letter&m)>>7 | (^(lower|digit)&m)>>6
			i += bits.TrailingZeros64(stop) >> 3 // 8 when no byte stops the word
			if stop == 0 {
				continue
			}
			if i >= len(text) {
				break
			}
			c := text[i]
			if c < utf8.RuneSelf {
				if byteClass[c]&clsSpace != 0 {
					break
				}
				lanes |= 2 // a control character belongs to the word
				i++
				continue
			}
			r, size := utf8.DecodeRuneInString(text[i:])
			if spaceLead[c] && unicode.IsSpace(r) || c >= 0xE0 && isUnspaced(r) {
				break
			}
			high = true
			if unicode.IsLetter(r) {
				lanes |= 1
			}
			i += size
		}
		lanes |= lanes >> 32
		lanes |= lanes >> 16
		lanes |= lanes >> 8
		runes := i - start
		if high {
			runes = utf8.RuneCountInString(text[start:i])
			sp.cont += i - start - runes
		}
		if newlines > 0 {
			sp.lineStart(newlines)
			newlines = 0
		}
		sp.words = append(sp.words, Word{Start: int32(start), End: int32(i), Runes: int32(runes),
			Alpha: lanes&1 != 0, Plain: lanes&2 == 0 && !high})
	}
}

// addUnspaced appends the word text[start:end] of a script written without
// spaces.
func (sp *wordSplitter) addUnspaced(text string, start, end int) {
	w := text[start:end]
	runes := utf8.RuneCountInString(w)
	sp.cont += end - start - runes
	alpha := false
	for _, r := range w {
		if unicode.IsLetter(r) {
			alpha = true
			break
		}
	}
	sp.unspaced++
	sp.words = append(sp.words, Word{Start: int32(start), End: int32(end), Runes: int32(runes), Alpha: alpha, Unspaced: true})
}

// lineStart records that the next word starts a line (a paragraph after
// two or more newlines).
func (sp *wordSplitter) lineStart(newlines int) {
	st := uint32(len(sp.words))
	if newlines >= 2 {
		st |= paraBreak
	}
	sp.starts = append(sp.starts, st)
}

// splitLines appends the lines and paragraphs given by the line starts
// that splitWords found. ascii says the text has only one-byte characters,
// so character offsets are byte offsets.
func splitLines(lines []Line, paras []Para, words []Word, starts []uint32, text string, ascii bool) ([]Line, []Para) {
	pos, at := 0, 0 // the character offset of byte offset at
	runeOffset := func(b int) int {
		if ascii {
			return b
		}
		pos += utf8.RuneCountInString(text[at:b])
		at = b
		return pos
	}
	paraFirst := 0
	for k, st := range starts {
		first := int(st &^ paraBreak)
		end := len(words)
		if k+1 < len(starts) {
			end = int(starts[k+1] &^ paraBreak)
		}
		if st&paraBreak != 0 && len(lines) > 0 {
			paras = appendPara(paras, lines, paraFirst)
			paraFirst = len(lines)
		}
		a, b := words[first], words[end-1]
		start := runeOffset(int(a.Start))
		lines = append(lines, Line{Start: int(a.Start), End: int(b.End), RuneStart: start,
			Runes: runeOffset(int(b.End)) - start, FirstWord: first, NumWords: end - first})
	}
	if len(lines) > 0 {
		paras = appendPara(paras, lines, paraFirst)
	}
	return lines, paras
}

func appendPara(paras []Para, lines []Line, first int) []Para {
	a, b := lines[first], lines[len(lines)-1]
	runes := b.RuneStart + b.Runes - a.RuneStart
	return append(paras, Para{Start: a.Start, End: b.End, Runes: runes, FirstLine: first, NumLines: len(lines) - first})
}

// CountWords returns the number of words of s as Split counts them
// (for text in spaced scripts the same number as len(strings.Fields(s)))
// without allocating.
func CountWords(s string) int {
	n := 0
	in := false
	for i := 0; i < len(s); {
		c := s[i]
		space := false
		if c < utf8.RuneSelf {
			space = byteClass[c]&clsSpace != 0
			i++
		} else {
			r, size := utf8.DecodeRuneInString(s[i:])
			if c >= 0xE0 && isUnspaced(r) {
				n++
				in = false
				i = unspacedEnd(s, i, r, size)
				continue
			}
			space = spaceLead[c] && unicode.IsSpace(r)
			i += size
		}
		if space {
			in = false
		} else if !in {
			in = true
			n++
		}
	}
	return n
}

// keepWords is the largest word list (in words) a Scratch keeps after
// Release; a longer document's buffers are dropped so that a pooled
// Scratch does not pin tens of megabytes.
const keepWords = 1 << 17

// Release drops the buffers of s that a very long document made large.
// Call it before putting s back into a pool.
func (s *Scratch) Release() {
	if cap(s.Words) > keepWords {
		s.Words, s.hashes, s.valid, s.hashed = nil, nil, false, false
	}
	if cap(s.Lines) > keepWords || cap(s.starts) > keepWords {
		s.Lines, s.Paras, s.starts, s.valid = nil, nil, nil, false
	}
	if cap(s.bounds) > keepWords {
		s.bounds = nil
	}
}
