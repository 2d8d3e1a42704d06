package filters

import (
	"strings"
	"unicode"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

// NormalizeText puts text into one canonical shape: a Unicode normal form
// (NFC or NFKC), "\n" line endings, no control or zero-width characters,
// no trailing spaces, runs of spaces and tabs inside a line collapsed to
// one space (when collapseSpaces), at most maxBlank blank lines in a row,
// no leading or trailing blank lines; one final newline is kept.
//
// The two steps feed each other: NFKC turns compatibility characters into
// spaces (U+00A8 DIAERESIS becomes " " + U+0308, U+00A0 NO-BREAK SPACE
// becomes " ", UAX #15 compatibility decomposition), which the line
// cleanup then trims or collapses, and removing a control character can
// leave a base letter and a combining mark side by side to be composed.
// So the steps repeat until the normal form changes nothing:
// NormalizeText(NormalizeText(x)) == NormalizeText(x) with no changes.
// It returns the changes counted by kind (nil when nothing changed).
// Already-clean text costs one scan and no allocation.
func NormalizeText(text string, form norm.Form, collapseSpaces bool, maxBlank int) (string, map[string]int) {
	text, changes, formChanged := normalizePass(text, form, collapseSpaces, maxBlank, nil, false)
	for pass := 1; formChanged && pass < maxNormalizePasses; pass++ {
		text, changes, formChanged = normalizePass(text, form, collapseSpaces, maxBlank, changes, true)
	}
	return text, changes
}

// maxNormalizePasses bounds the passes of NormalizeText. After the first
// normal-form step the text holds no compatibility character, so later
// passes only delete or compose and two or three passes reach the fixed
// point; the bound is a guard, not a limit met in practice.
const maxNormalizePasses = 8

// normalizePass runs the line cleanup and then the normal form once,
// adding to changes; formChanged reports whether the normal form changed
// the text (only then can another pass change anything, as the line
// cleanup is idempotent). When isNormal is set the text is in the normal
// form already, and the form is checked again only if the cleanup
// changed the text.
func normalizePass(text string, form norm.Form, collapseSpaces bool, maxBlank int, changes map[string]int, isNormal bool) (string, map[string]int, bool) {
	in := text
	// One final newline is how most text files and many JSONL writers end
	// a document: it is kept, and only extra ones count as a change.
	body, final := strings.CutSuffix(text, "\n")
	crlf := false
	if final {
		body, crlf = strings.CutSuffix(body, "\r")
	}
	if final && body == "" {
		if changes == nil {
			changes = map[string]int{}
		}
		changes["trailing_newlines"]++
		return "", changes, false
	}
	if crlf {
		if changes == nil {
			changes = map[string]int{}
		}
		changes["line_endings"]++
	}
	if crlf || !isCleanFast(body, collapseSpaces, maxBlank) {
		body = cleanLines(body, collapseSpaces, maxBlank, &changes)
		if final && body == "" {
			final = false
		}
		if final {
			text = body + "\n"
		} else {
			text = body
		}
	}
	formChanged := false
	if isNormal && text == in {
		return text, changes, false
	}
	if !isASCII(text) && !form.IsNormalString(text) {
		n := form.String(text)
		if n != text {
			if changes == nil {
				changes = map[string]int{}
			}
			changes["unicode_"+strings.ToLower(formName(form))]++
			text = n
			formChanged = true
		}
	}
	return text, changes, formChanged
}

func formName(f norm.Form) string {
	if f == norm.NFKC {
		return "NFKC"
	}
	return "NFC"
}

// isCleanFast reports, in one byte scan, whether text needs no line or
// character cleanup.
func isCleanFast(text string, collapse bool, maxBlank int) bool {
	if len(text) == 0 {
		return true
	}
	if text[0] == '\n' || text[len(text)-1] == '\n' || text[len(text)-1] == ' ' || text[len(text)-1] == '\t' {
		return false
	}
	blank := 0
	prev := byte('\n')
	for i := 0; i < len(text); i++ {
		c := text[i]
		switch {
		case c == '\n':
			if prev == ' ' || prev == '\t' {
				return false
			}
			if prev == '\n' {
				blank++
				if blank > maxBlank {
					return false
				}
			} else {
				blank = 0
			}
		case c == '\t':
			if collapse {
				return false
			}
		case c == ' ':
			if collapse && (prev == ' ' || prev == '\n') {
				return false
			}
		case c < 0x20 || c == 0x7f:
			return false
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(text[i:])
			if badRune(r, size) {
				return false
			}
			i += size - 1
			c = 'x'
		}
		prev = c
	}
	return true
}

// badRune reports characters normalize removes: invalid bytes, C0/C1
// controls other than newline and tab, zero-width and byte-order marks.
func badRune(r rune, size int) bool {
	if r == utf8.RuneError && size == 1 {
		return true
	}
	switch r {
	case '\u200b', '\u200c', '\u200d', '\u2060', '\ufeff', '\u00ad':
		return true
	}
	if r == '\u2028' || r == '\u2029' || r == '\u0085' {
		return true
	}
	return r >= 0x80 && r < 0xa0 || unicode.Is(unicode.Co, r)
}

func cleanLines(text string, collapse bool, maxBlank int, changes *map[string]int) string {
	count := func(k string, n int) {
		if *changes == nil {
			*changes = map[string]int{}
		}
		(*changes)[k] += n
	}
	var b strings.Builder
	b.Grow(len(text))
	started := false
	pendingBlank := 0
	line := make([]byte, 0, 256)
	flush := func() {
		// Trim trailing spaces and emit the line with blank-line limits.
		n := len(line)
		for n > 0 && (line[n-1] == ' ' || line[n-1] == '\t') {
			n--
		}
		if n < len(line) {
			count("trailing_spaces", 1)
		}
		line = line[:n]
		if len(line) == 0 {
			if started {
				pendingBlank++
			} else {
				count("blank_lines", 1)
			}
			return
		}
		if started {
			keep := min(pendingBlank, maxBlank)
			if pendingBlank > keep {
				count("blank_lines", pendingBlank-keep)
			}
			b.WriteByte('\n')
			for i := 0; i < keep; i++ {
				b.WriteByte('\n')
			}
		}
		pendingBlank = 0
		started = true
		b.Write(line)
	}
	for i := 0; i < len(text); {
		// A whole clean line is copied at once; only dirty lines are
		// rebuilt byte by byte.
		if len(line) == 0 {
			end := strings.IndexByte(text[i:], '\n')
			if end < 0 {
				end = len(text) - i
			}
			if seg := text[i : i+end]; lineIsClean(seg, collapse) {
				line = append(line, seg...)
				i += end
				if i < len(text) {
					flush()
					line = line[:0]
					i++
				}
				continue
			}
		}
		c := text[i]
		switch {
		case c == '\r':
			count("line_endings", 1)
			if i+1 < len(text) && text[i+1] == '\n' {
				i++
			}
			flush()
			line = line[:0]
			i++
		case c == '\n':
			flush()
			line = line[:0]
			i++
		case c == ' ' || c == '\t':
			if collapse {
				// Leading runs are dropped, inner runs become one space,
				// a tab becomes a space.
				if len(line) == 0 || line[len(line)-1] == ' ' || c == '\t' {
					count("spaces_collapsed", 1)
				}
				if len(line) > 0 && line[len(line)-1] != ' ' {
					line = append(line, ' ')
				}
			} else {
				line = append(line, c)
			}
			i++
		case c < 0x20 || c == 0x7f:
			if c == '\f' || c == '\v' {
				count("line_endings", 1)
				flush()
				line = line[:0]
			} else {
				count("control_chars", 1)
			}
			i++
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(text[i:])
			if r == '\u2028' || r == '\u2029' || r == '\u0085' {
				count("line_endings", 1)
				flush()
				line = line[:0]
			} else if r == utf8.RuneError && size == 1 {
				count("invalid_utf8", 1)
				line = append(line, "\uFFFD"...)
			} else if badRune(r, size) {
				count("control_chars", 1)
			} else {
				line = append(line, text[i:i+size]...)
			}
			i += size
		default:
			line = append(line, c)
			i++
		}
	}
	flush()
	if pendingBlank > 0 {
		count("trailing_newlines", pendingBlank)
	}
	return b.String()
}

// lineIsClean reports whether one line (without its newline) needs no
// character or whitespace cleanup. Printable ASCII is checked 8 bytes at a
// time (SWAR); any other byte takes the exact per-byte path.
func lineIsClean(seg string, collapse bool) bool {
	if len(seg) == 0 {
		return false // blank lines take the counting path
	}
	if seg[0] == ' ' || seg[len(seg)-1] == ' ' || seg[len(seg)-1] == '\t' {
		return false
	}
	prev := byte('x')
	for i := 0; i < len(seg); {
		if i+8 <= len(seg) {
			v := load64(seg[i:])
			if (v-lo8*0x20)&^v&hi8|v&hi8 == 0 { // all bytes in 0x20..0x7f
				sp := v ^ (lo8 * ' ')
				m := (sp - lo8) & ^sp & hi8 // high bit of each space byte (a '!' after a space may also show: harmless, it only sends the line to the slow path)
				if collapse && (m&(m>>8) != 0 || (prev == ' ' && m&0x80 != 0)) {
					return false
				}
				if bytes8Has(v, 0x7f) {
					return false
				}
				prev = seg[i+7]
				i += 8
				continue
			}
		}
		c := seg[i]
		switch {
		case c == ' ':
			if collapse && prev == ' ' {
				return false
			}
		case c == '\t':
			if collapse {
				return false
			}
		case c < 0x20 || c == 0x7f:
			return false
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(seg[i:])
			if badRune(r, size) || r == '\u2028' || r == '\u2029' || r == '\u0085' {
				return false
			}
			i += size
			prev = 'x'
			continue
		}
		prev = c
		i++
	}
	return true
}

func load64(s string) uint64 {
	return uint64(s[0]) | uint64(s[1])<<8 | uint64(s[2])<<16 | uint64(s[3])<<24 |
		uint64(s[4])<<32 | uint64(s[5])<<40 | uint64(s[6])<<48 | uint64(s[7])<<56
}

// bytes8Has reports whether any byte of v equals c.
func bytes8Has(v uint64, c byte) bool {
	x := v ^ (lo8 * uint64(c))
	return (x-lo8)&^x&hi8 != 0
}

// isASCII reports whether text is pure ASCII, which every normal form
// leaves unchanged (IsNormalString itself allocates).
func isASCII(text string) bool {
	i := 0
	for ; i+8 <= len(text); i += 8 {
		if load64(text[i:])&hi8 != 0 {
			return false
		}
	}
	for ; i < len(text); i++ {
		if text[i] >= utf8.RuneSelf {
			return false
		}
	}
	return true
}

// Masks for byte-parallel (SWAR) tests on 8 bytes in a uint64.
const (
	lo8 = 0x0101010101010101
	hi8 = 0x8080808080808080
)
