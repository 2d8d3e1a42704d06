package filters

import (
	"strings"
	"unicode"
	"unicode/utf8"
	"unsafe"
)

// Published values of the line-level cleaning of Raffel et al. 2020,
// "Exploring the Limits of Transfer Learning with a Unified Text-to-Text
// Transformer", section 2.2, from memory: pages with fewer than 5
// sentences are discarded and only lines of at least 3 words are kept. A
// secondary description of the same corpus (a glossary entry on C4)
// agrees: "Discard pages with fewer than five sentences and any line
// shorter than three words".
const (
	C4FewestWordsPerLine = 3 // lines with fewer words are removed
	C4FewestSentences    = 5 // pages with fewer sentences are dropped
	// C4LongestWord is the word length (characters) beyond which the
	// reference implementation removes a line; it is not in the paper
	// (from memory of the released cleaning code: 1000).
	C4LongestWord = 1000
)

// C4PolicyNoticePhrases are the boilerplate policy phrases whose lines are
// removed (Raffel et al. 2020, section 2.2, from memory), matched without
// regard to ASCII case.
var C4PolicyNoticePhrases = []string{"terms of use", "privacy policy", "cookie policy", "uses cookies", "use of cookies", "use cookies"}

// LineOptions selects the line rules CleanLines applies.
type LineOptions struct {
	// FewestWords removes lines with fewer words (0: no limit).
	FewestWords int
	// LongestWord removes lines with a word longer than this many
	// characters (0: no limit).
	LongestWord int
	// RemoveUnpunctuated removes lines that do not end in terminal
	// punctuation, or that end in an ellipsis.
	RemoveUnpunctuated bool
	// RemoveJavascript removes lines containing "javascript".
	RemoveJavascript bool
	// RemovePolicyNotices removes lines containing a C4PolicyNoticePhrases phrase.
	RemovePolicyNotices bool
	// RemoveCitations deletes citation markers such as "[1]", "[edit]"
	// and "[citation needed]" from lines.
	RemoveCitations bool
}

// C4LineOptions returns the options of Raffel et al. 2020.
func C4LineOptions() LineOptions {
	return LineOptions{FewestWords: C4FewestWordsPerLine, LongestWord: C4LongestWord, RemoveUnpunctuated: true,
		RemoveJavascript: true, RemovePolicyNotices: true, RemoveCitations: true}
}

// LineResult is what CleanLines did to one text.
type LineResult struct {
	// Text is the cleaned text: the kept lines, trimmed, joined by "\n"
	// ("\n\n" where the original had a blank line between them). It is
	// the input unchanged when nothing was removed.
	Text string
	// Changed is true when a line or a citation marker was removed.
	Changed bool
	// Lines is the number of non-blank input lines; Kept of output lines.
	Lines, Kept int
	// Removed lines by the first rule they failed, in the order the rules
	// are applied.
	OverlongWord, Unpunctuated, Short, Javascript, Policy int
	// Citations is the number of citation markers deleted from kept lines.
	Citations int
	// Placeholder and Braces report the page rules: the text contains
	// "lorem ipsum" (any case) or "{". The caller drops such pages.
	Placeholder, Braces bool
	// Sentences is CountSentences of the cleaned text.
	Sentences int
}

// CleanLines applies the line rules of opt to text, line by line in the
// order of the reference implementation (from memory): long word, then
// citation removal, terminal punctuation, word count, "javascript",
// policy phrases. It also evaluates the page rules on the original text
// and counts the sentences of the result.
func CleanLines(text string, opt LineOptions) LineResult {
	res := LineResult{
		Placeholder: ContainsFold(text, "lorem ipsum"),
		Braces:      strings.IndexByte(text, '{') >= 0,
	}
	out := make([]byte, 0, len(text))
	var cite, lower []byte
	blank := false // a blank line since the last kept line
	rest := text
	for len(rest) > 0 {
		var line string
		if i := strings.IndexByte(rest, '\n'); i >= 0 {
			line, rest = rest[:i], rest[i+1:]
		} else {
			line, rest = rest, ""
		}
		line = strings.TrimSpace(line)
		if line == "" {
			blank = true
			continue
		}
		res.Lines++
		words, longest := wordStats(line)
		if opt.LongestWord > 0 && longest > opt.LongestWord {
			res.OverlongWord++
			continue
		}
		cites := 0
		if opt.RemoveCitations && strings.IndexByte(line, '[') >= 0 {
			cite, cites = removeCitations(cite[:0], line)
			if cites > 0 {
				line = strings.TrimSpace(unsafe.String(unsafe.SliceData(cite), len(cite))) // cite is not reused before line is copied
				words, _ = wordStats(line)
			}
		}
		if opt.RemoveUnpunctuated && !EndsWithTerminal(line) {
			res.Unpunctuated++
			continue
		}
		if words < opt.FewestWords {
			res.Short++
			continue
		}
		if opt.RemoveJavascript || opt.RemovePolicyNotices {
			lower = appendLowerASCII(lower[:0], line)
			l := unsafe.String(unsafe.SliceData(lower), len(lower))
			if opt.RemoveJavascript && strings.Contains(l, "javascript") {
				res.Javascript++
				continue
			}
			if opt.RemovePolicyNotices && containsAny(l, C4PolicyNoticePhrases) {
				res.Policy++
				continue
			}
		}
		res.Citations += cites
		if res.Kept > 0 {
			if blank {
				out = append(out, '\n', '\n')
			} else {
				out = append(out, '\n')
			}
		}
		out = append(out, line...)
		res.Kept++
		blank = false
	}
	res.Changed = res.Kept < res.Lines || res.Citations > 0
	if res.Changed {
		res.Text = unsafe.String(unsafe.SliceData(out), len(out)) // out is not used again
	} else {
		res.Text = text
	}
	res.Sentences = CountSentences(res.Text)
	return res
}

// wordStats returns the number of words of line (as Split cuts them) and
// the length in characters of its longest word.
func wordStats(line string) (words, longest int) {
	cur := 0
	for i := 0; i < len(line); {
		c := line[i]
		if c < utf8.RuneSelf {
			i++
			if byteClass[c]&clsSpace != 0 {
				if cur > 0 {
					words++
					longest = max(longest, cur)
				}
				cur = 0
				continue
			}
			cur++
			continue
		}
		r, size := utf8.DecodeRuneInString(line[i:])
		if c >= 0xE0 && isUnspaced(r) {
			// a word of a script without spaces ends the word before it
			// and is one word of its own (see Split)
			if cur > 0 {
				words++
				longest = max(longest, cur)
			}
			cur = 0
			end := unspacedEnd(line, i, r, size)
			words++
			longest = max(longest, utf8.RuneCountInString(line[i:end]))
			i = end
			continue
		}
		i += size
		if unicode.IsSpace(r) {
			if cur > 0 {
				words++
				longest = max(longest, cur)
			}
			cur = 0
			continue
		}
		cur++
	}
	if cur > 0 {
		words++
		longest = max(longest, cur)
	}
	return words, longest
}

// terminalRunes end a sentence-final line: the paper's period,
// exclamation mark, question mark and end quotation mark, with the
// typographic closing quotes and the full-width CJK marks added (our
// extension, for lines in other scripts).
func isTerminal(r rune) bool {
	switch r {
	case '.', '!', '?', '"', '\u201D', '\u2019', '\u00BB', '\u3002', '\uFF01', '\uFF1F':
		return true
	}
	return false
}

// EndsWithTerminal reports whether a trimmed line ends in terminal
// punctuation and not in an ellipsis ("..." or U+2026).
func EndsWithTerminal(line string) bool {
	r, _ := utf8.DecodeLastRuneInString(line)
	return isTerminal(r) && !EndsWithEllipsis(line)
}

// containsAny reports whether s contains one of subs.
func containsAny(s string, subs []string) bool {
	for _, p := range subs {
		if strings.Contains(s, p) {
			return true
		}
	}
	return false
}

// appendLowerASCII appends s with ASCII letters lower-cased.
func appendLowerASCII(dst []byte, s string) []byte {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		dst = append(dst, c)
	}
	return dst
}

// ContainsFold reports whether s contains sub, comparing ASCII letters
// without regard to case (sub must be lower-case ASCII). It allocates
// nothing.
func ContainsFold(s, sub string) bool {
	if sub == "" {
		return true
	}
	c0 := sub[0]
	u0 := c0
	if 'a' <= c0 && c0 <= 'z' {
		u0 = c0 - 'a' + 'A'
	}
	for i := 0; i+len(sub) <= len(s); i++ {
		if c := s[i]; c != c0 && c != u0 {
			continue
		}
		if equalFoldASCII(s[i:i+len(sub)], sub) {
			return true
		}
	}
	return false
}

func equalFoldASCII(s, lower string) bool {
	for i := 0; i < len(lower); i++ {
		c := s[i]
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		if c != lower[i] {
			return false
		}
	}
	return true
}

// removeCitations appends line to dst without its citation markers
// ("[" digits "]", "[edit]", "[citation needed]", any case; from memory
// of the reference implementation) and returns the number removed. A
// space left doubled, or before punctuation, by a removal is dropped.
func removeCitations(dst []byte, line string) ([]byte, int) {
	n := 0
	for i := 0; i < len(line); {
		if line[i] == '[' {
			if l := citationLen(line[i:]); l > 0 {
				n++
				i += l
				// "word [1] next" and "word [1]." keep one space, none before punctuation
				if len(dst) > 0 && dst[len(dst)-1] == ' ' && (i >= len(line) || line[i] == ' ' || isClosingPunct(line[i])) {
					dst = dst[:len(dst)-1]
				}
				continue
			}
		}
		dst = append(dst, line[i])
		i++
	}
	return dst, n
}

func isClosingPunct(c byte) bool {
	switch c {
	case '.', ',', ';', ':', '!', '?', ')':
		return true
	}
	return false
}

// citationLen returns the length of the citation marker at the start of s
// (which starts with '['), or 0.
func citationLen(s string) int {
	j := 1
	for j < len(s) && s[j] >= '0' && s[j] <= '9' {
		j++
	}
	if j < len(s) && s[j] == ']' {
		return j + 1
	}
	for _, m := range [...]string{"[edit]", "[citation needed]"} {
		if len(s) >= len(m) && equalFoldASCII(s[:len(m)], m) {
			return len(m)
		}
	}
	return 0
}

// sentenceAbbrevs are words whose trailing period does not end a sentence
// (common practice: a short list of English abbreviations).
var sentenceAbbrevs = map[string]bool{
	"mr": true, "mrs": true, "ms": true, "dr": true, "st": true, "jr": true, "sr": true, "prof": true,
	"vs": true, "etc": true, "e.g": true, "i.e": true, "fig": true, "approx": true, "inc": true,
	"ltd": true, "vol": true, "pp": true, "cf": true, "al": true,
}

// CountSentences counts the sentences of text, an approximation of the
// statistical sentence splitter the reference implementation used: a
// sentence ends at a run of '.', '!', '?' (or their full-width forms, or
// an ellipsis) followed, after optional closing quotes and brackets, by
// whitespace or the end of the text (a full-width mark needs no space),
// and must contain a letter or digit.
// A period after a single capital letter (an initial) or after a common
// abbreviation does not end a sentence. Trailing text without final
// punctuation counts as one more sentence.
func CountSentences(text string) int {
	n := 0
	content := false // the current sentence has a letter or digit
	for i := 0; i < len(text); {
		if c := text[i]; c < utf8.RuneSelf && c != '.' && c != '!' && c != '?' {
			content = content || asciiAlnum[c]
			i++
			continue
		}
		r, size := utf8.DecodeRuneInString(text[i:])
		if !isSentenceEnd(r) {
			if unicode.IsLetter(r) || unicode.IsDigit(r) {
				content = true
			}
			i += size
			continue
		}
		start := i
		j := i + size
		for j < len(text) {
			r2, s2 := utf8.DecodeRuneInString(text[j:])
			if !isSentenceEnd(r2) && !isCloser(r2) {
				break
			}
			j += s2
		}
		// full-width marks end a sentence without a following space
		atBoundary := j == len(text) || r == '\u3002' || r == '\uFF01' || r == '\uFF1F'
		if !atBoundary {
			r2, _ := utf8.DecodeRuneInString(text[j:])
			atBoundary = unicode.IsSpace(r2)
		}
		if atBoundary && content && !(r == '.' && j == start+1 && isAbbrevBefore(text[:start])) {
			n++
			content = false
		}
		i = j
	}
	if content {
		n++
	}
	return n
}

func isSentenceEnd(r rune) bool {
	switch r {
	case '.', '!', '?', '\u2026', '\u3002', '\uFF01', '\uFF1F':
		return true
	}
	return false
}

func isCloser(r rune) bool {
	switch r {
	case '"', '\'', ')', ']', '\u201D', '\u2019', '\u00BB', '\u300D', '\u300F':
		return true
	}
	return false
}

// isAbbrevBefore reports whether the word ending s (just before a period)
// is an initial or a listed abbreviation.
func isAbbrevBefore(s string) bool {
	k := len(s)
	for k > 0 {
		c := s[k-1]
		if c >= utf8.RuneSelf || !(asciiAlnum[c] || c == '.') {
			break
		}
		k--
	}
	w := s[k:]
	if w == "" || (k > 0 && s[k-1] >= utf8.RuneSelf) {
		return false
	}
	if len(w) == 1 && w[0] >= 'A' && w[0] <= 'Z' {
		return true
	}
	if len(w) > 8 {
		return false
	}
	var buf [8]byte
	for i := 0; i < len(w); i++ {
		c := w[i]
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		buf[i] = c
	}
	return sentenceAbbrevs[string(buf[:len(w)])]
}
