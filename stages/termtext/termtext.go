// Package termtext makes strings safe to print on a terminal. Document
// ids, file names, rule values and texts come from the inputs; printed raw,
// an ESC or OSC sequence in them would move the cursor, retitle the window,
// rewrite earlier lines or hide text, and a BEL would ring. Every terminal
// output of winnow goes through Escape (for one field) or Writer (for a
// whole stream), which share one rule.
//
// Escaped are: the C0 controls U+0000–U+001F, DEL, the C1 controls
// U+0080–U+009F (CSI U+009B and OSC U+009D act like ESC sequences on some
// terminals), the bidirectional formatting characters U+061C, U+200E, U+200F,
// U+202A–U+202E and U+2066–U+2069 (they reorder what follows), and bytes
// that are not UTF-8. The control sets are those of ECMA-48 section 5
// (C0 and C1 sets) and Unicode UAX #9 section 2 (explicit directional
// formatting characters).
package termtext

import (
	"fmt"
	"io"
	"unicode/utf8"
)

// needs reports whether rune r (size bytes; RuneError with size 1 is an
// invalid byte) must be escaped.
func needs(r rune, size int) bool {
	switch {
	case r == utf8.RuneError && size == 1:
		return true
	case r < 0x20 || r == 0x7f:
		return true
	case r >= 0x80 && r <= 0x9f:
		return true
	case r == 0x061c || r == 0x200e || r == 0x200f || (r >= 0x202a && r <= 0x202e) || (r >= 0x2066 && r <= 0x2069):
		return true
	}
	return false
}

// appendEscaped appends the escape of one rune or invalid byte: \xHH for
// C0 controls and invalid bytes, \uHHHH for DEL and the rest (so an escaped
// JSON stream stays valid JSON: it never holds raw C0 bytes or invalid
// UTF-8, and \uHHHH is a JSON escape).
func appendEscaped(b []byte, r rune, size int, raw byte) []byte {
	switch {
	case r == utf8.RuneError && size == 1:
		return fmt.Appendf(b, `\x%02x`, raw)
	case r < 0x20:
		switch r {
		case '\n':
			return append(b, `\n`...)
		case '\t':
			return append(b, `\t`...)
		case '\r':
			return append(b, `\r`...)
		}
		return fmt.Appendf(b, `\x%02x`, r)
	}
	return fmt.Appendf(b, `\u%04x`, r)
}

// Escape returns s with every control character (newline and tab
// included), bidirectional formatting character and invalid byte written as
// a visible escape. Strings without any are returned as they are.
func Escape(s string) string { return escape(s, false) }

// EscapeLines is Escape but keeps newlines and tabs, for messages of
// several lines (errors listed one per line).
func EscapeLines(s string) string { return escape(s, true) }

func escape(s string, keepLines bool) string {
	i := firstUnsafe(s, keepLines)
	if i < 0 {
		return s
	}
	b := make([]byte, 0, len(s)+16)
	b = append(b, s[:i]...)
	for i < len(s) {
		r, size := utf8.DecodeRuneInString(s[i:])
		if needs(r, size) && !(keepLines && (r == '\n' || r == '\t')) {
			b = appendEscaped(b, r, size, s[i])
		} else {
			b = append(b, s[i:i+size]...)
		}
		i += size
	}
	return string(b)
}

// firstUnsafe returns the index of the first byte of s to escape, or -1.
func firstUnsafe(s string, keepLines bool) int {
	for i := 0; i < len(s); {
		c := s[i]
		if c >= 0x20 && c < 0x7f {
			i++
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if needs(r, size) && !(keepLines && (r == '\n' || r == '\t')) {
			return i
		}
		i += size
	}
	return -1
}

// Writer escapes a stream as EscapeLines does: text tables and JSON written
// through it keep their newlines and tabs, and nothing else reaches the
// terminal raw. A UTF-8 sequence split between two writes is joined before
// it is judged; Flush writes a trailing incomplete sequence as escapes.
type Writer struct {
	w       io.Writer
	pending []byte
	buf     []byte
}

// NewWriter returns a Writer writing to w.
func NewWriter(w io.Writer) *Writer { return &Writer{w: w} }

// Write escapes p and writes it; it reports len(p) on success.
func (e *Writer) Write(p []byte) (int, error) {
	data := p
	if len(e.pending) > 0 {
		data = append(e.pending, p...)
		e.pending = nil
	}
	b := e.buf[:0]
	i := 0
	for i < len(data) {
		c := data[i]
		if c >= 0x20 && c < 0x7f || c == '\n' || c == '\t' {
			b = append(b, c)
			i++
			continue
		}
		if c >= 0x80 && !utf8.FullRune(data[i:]) {
			e.pending = append([]byte(nil), data[i:]...) // wait for the rest
			break
		}
		r, size := utf8.DecodeRune(data[i:])
		if needs(r, size) {
			b = appendEscaped(b, r, size, c)
		} else {
			b = append(b, data[i:i+size]...)
		}
		i += size
	}
	e.buf = b
	if _, err := e.w.Write(b); err != nil {
		return 0, err
	}
	return len(p), nil
}

// Flush writes an incomplete UTF-8 sequence left at the end of the stream
// (as escapes).
func (e *Writer) Flush() error {
	if len(e.pending) == 0 {
		return nil
	}
	var b []byte
	for _, c := range e.pending {
		b = fmt.Appendf(b, `\x%02x`, c)
	}
	e.pending = nil
	_, err := e.w.Write(b)
	return err
}
