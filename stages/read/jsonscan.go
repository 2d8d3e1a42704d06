package read

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"unicode/utf16"
	"unicode/utf8"

	"winnow/stages/jsonl"
)

// RawJSON is a JSON value kept verbatim from an input record (an extra
// field carried into meta). It is written back byte for byte.
type RawJSON = jsonl.Raw

// jsonObjectScanner walks one JSON object line without building a generic
// tree: it decodes only the fields the reader asks for and returns the
// others as raw byte ranges. It validates structure (strings, nesting,
// literals, numbers) so a malformed line is reported, not half-read.
// encoding/json into map[string]any runs several times slower on web
// text; see BenchmarkReadJSONL.
type jsonObjectScanner struct {
	b   []byte
	i   int
	err error
}

var errJSON = errors.New("malformed JSON")

func (s *jsonObjectScanner) fail(msg string) {
	if s.err == nil {
		s.err = fmt.Errorf("%w: %s at byte %d", errJSON, msg, s.i+1)
	}
}

func (s *jsonObjectScanner) ws() {
	for s.i < len(s.b) {
		switch s.b[s.i] {
		case ' ', '\t', '\r', '\n':
			s.i++
		default:
			return
		}
	}
}

// eachField calls fn with every top-level key, unescaped (so "te\u0078t"
// is the key text, as encoding/json reads it), and the byte range of its
// value. key is only valid during the call.
func (s *jsonObjectScanner) eachField(fn func(key []byte, val []byte)) error {
	s.ws()
	if s.i >= len(s.b) || s.b[s.i] != '{' {
		s.fail("want an object")
		return s.err
	}
	s.i++
	s.ws()
	if s.i < len(s.b) && s.b[s.i] == '}' {
		s.i++
		return s.trailing()
	}
	for s.err == nil {
		s.ws()
		ks := s.i
		s.skipString()
		if s.err != nil {
			return s.err
		}
		key := s.b[ks+1 : s.i-1]
		if bytes.IndexByte(key, '\\') >= 0 || !utf8.Valid(key) {
			k, _ := decodeJSONString(s.b[ks:s.i])
			key = []byte(k)
		}
		s.ws()
		if s.i >= len(s.b) || s.b[s.i] != ':' {
			s.fail("want ':'")
			return s.err
		}
		s.i++
		s.ws()
		vs := s.i
		s.skipValue(0)
		if s.err != nil {
			return s.err
		}
		fn(key, s.b[vs:s.i])
		s.ws()
		if s.i >= len(s.b) {
			s.fail("unterminated object")
			return s.err
		}
		if s.b[s.i] == ',' {
			s.i++
			continue
		}
		if s.b[s.i] == '}' {
			s.i++
			return s.trailing()
		}
		s.fail("want ',' or '}'")
	}
	return s.err
}

// EachField calls fn with every top-level key and the raw bytes of its
// value in the JSON object b (the run's spill files keep meta this way).
func EachField(b []byte, fn func(key []byte, val []byte)) error {
	sc := jsonObjectScanner{b: b}
	return sc.eachField(fn)
}

func (s *jsonObjectScanner) trailing() error {
	s.ws()
	if s.i != len(s.b) {
		s.fail("unexpected data after the object")
	}
	return s.err
}

const maxJSONDepth = 512 // deeper nesting is rejected, not recursed into

func (s *jsonObjectScanner) skipValue(depth int) {
	if depth > maxJSONDepth {
		s.fail("nesting too deep")
		return
	}
	if s.i >= len(s.b) {
		s.fail("want a value")
		return
	}
	switch c := s.b[s.i]; {
	case c == '"':
		s.skipString()
	case c == '{':
		s.i++
		s.ws()
		if s.i < len(s.b) && s.b[s.i] == '}' {
			s.i++
			return
		}
		for s.err == nil {
			s.ws()
			s.skipString()
			s.ws()
			if s.i >= len(s.b) || s.b[s.i] != ':' {
				s.fail("want ':'")
				return
			}
			s.i++
			s.ws()
			s.skipValue(depth + 1)
			s.ws()
			if s.i >= len(s.b) {
				s.fail("unterminated object")
				return
			}
			if s.b[s.i] == '}' {
				s.i++
				return
			}
			if s.b[s.i] != ',' {
				s.fail("want ',' or '}'")
				return
			}
			s.i++
		}
	case c == '[':
		s.i++
		s.ws()
		if s.i < len(s.b) && s.b[s.i] == ']' {
			s.i++
			return
		}
		for s.err == nil {
			s.ws()
			s.skipValue(depth + 1)
			s.ws()
			if s.i >= len(s.b) {
				s.fail("unterminated array")
				return
			}
			if s.b[s.i] == ']' {
				s.i++
				return
			}
			if s.b[s.i] != ',' {
				s.fail("want ',' or ']'")
				return
			}
			s.i++
		}
	case c == 't':
		s.literal("true")
	case c == 'f':
		s.literal("false")
	case c == 'n':
		s.literal("null")
	case c == '-' || (c >= '0' && c <= '9'):
		s.skipNumber()
	case c == 0:
		s.fail("raw NUL byte")
	default:
		s.fail(fmt.Sprintf("unexpected %q", c))
	}
}

func (s *jsonObjectScanner) literal(lit string) {
	if len(s.b)-s.i >= len(lit) && string(s.b[s.i:s.i+len(lit)]) == lit {
		s.i += len(lit)
		return
	}
	s.fail("bad literal")
}

func (s *jsonObjectScanner) skipNumber() {
	start := s.i
	if s.b[s.i] == '-' {
		s.i++
	}
	digits := func() int {
		n := 0
		for s.i < len(s.b) && s.b[s.i] >= '0' && s.b[s.i] <= '9' {
			s.i++
			n++
		}
		return n
	}
	first := s.i
	if digits() == 0 {
		s.fail("bad number")
		return
	}
	if s.b[first] == '0' && s.i-first > 1 {
		// RFC 8259 section 6: "Leading zeros are not allowed."
		s.i = first
		s.fail("number with a leading zero")
		return
	}
	if s.i < len(s.b) && s.b[s.i] == '.' {
		s.i++
		if digits() == 0 {
			s.fail("bad number")
			return
		}
	}
	if s.i < len(s.b) && (s.b[s.i] == 'e' || s.b[s.i] == 'E') {
		s.i++
		if s.i < len(s.b) && (s.b[s.i] == '+' || s.b[s.i] == '-') {
			s.i++
		}
		if digits() == 0 {
			s.fail("bad number")
			return
		}
	}
	if s.i == start {
		s.fail("bad number")
	}
}

// skipString moves past a string starting at s.i, validating escapes.
func (s *jsonObjectScanner) skipString() {
	if s.i >= len(s.b) || s.b[s.i] != '"' {
		s.fail("want a string")
		return
	}
	s.i++
	for s.i < len(s.b) {
		// Skip 8 plain bytes at a time (no quote, backslash or control).
		for s.i+8 <= len(s.b) && plain8(binary.LittleEndian.Uint64(s.b[s.i:])) {
			s.i += 8
		}
		if s.i >= len(s.b) {
			break
		}
		c := s.b[s.i]
		switch {
		case c == '"':
			s.i++
			return
		case c == '\\':
			if s.i+1 >= len(s.b) {
				s.fail("unterminated string")
				return
			}
			switch s.b[s.i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				s.i += 2
			case 'u':
				if s.i+6 > len(s.b) || !isHex4(s.b[s.i+2:s.i+6]) {
					s.fail("bad \\u escape")
					return
				}
				s.i += 6
			default:
				s.fail("bad escape")
				return
			}
		case c == 0:
			s.fail("raw NUL byte in string (JSON allows it only as \\u0000)")
			return
		case c < 0x20:
			s.fail(fmt.Sprintf("raw control character %#04x in string", c))
			return
		default:
			s.i++
		}
	}
	s.fail("unterminated string")
}

const (
	lo8 = 0x0101010101010101
	hi8 = 0x8080808080808080
)

// plain8 reports whether none of the 8 bytes in v is '"', '\\' or a
// control character (< 0x20), with the usual SWAR zero-byte tests.
func plain8(v uint64) bool {
	q := v ^ (lo8 * '"')
	b := v ^ (lo8 * '\\')
	hasQ := (q - lo8) & ^q & hi8
	hasB := (b - lo8) & ^b & hi8
	hasC := (v - lo8*0x20) & ^v & hi8
	return hasQ|hasB|hasC == 0
}

func isHex4(b []byte) bool {
	for _, c := range b {
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f' || c >= 'A' && c <= 'F') {
			return false
		}
	}
	return true
}

// decodeJSONString decodes a validated JSON string literal (with quotes).
// invalid reports whether the bytes held invalid UTF-8, which is replaced
// with U+FFFD. Runs without escapes are copied in bulk.
func decodeJSONString(lit []byte) (s string, invalid bool) {
	body := lit[1 : len(lit)-1]
	esc := bytes.IndexByte(body, '\\')
	valid := utf8.Valid(body)
	if esc < 0 && valid {
		return string(body), false
	}
	out := make([]byte, 0, len(body))
	for len(body) > 0 {
		esc = bytes.IndexByte(body, '\\')
		if esc < 0 {
			out = append(out, body...)
			break
		}
		out = append(out, body[:esc]...)
		body = body[esc:]
		switch body[1] {
		case 'n':
			out = append(out, '\n')
		case 't':
			out = append(out, '\t')
		case 'r':
			out = append(out, '\r')
		case 'b':
			out = append(out, '\b')
		case 'f':
			out = append(out, '\f')
		case 'u':
			r := rune(hex4(body[2:6]))
			body = body[6:]
			if utf16.IsSurrogate(r) {
				if len(body) >= 6 && body[0] == '\\' && body[1] == 'u' {
					if d := utf16.DecodeRune(r, rune(hex4(body[2:6]))); d != utf8.RuneError {
						body = body[6:]
						out = utf8.AppendRune(out, d)
						continue
					}
				}
				invalid = true
				r = utf8.RuneError
			}
			out = utf8.AppendRune(out, r)
			continue
		default: // " \ /
			out = append(out, body[1])
		}
		body = body[2:]
	}
	if !valid {
		invalid = true
		out = jsonl.AppendValidUTF8(nil, out)
	}
	return string(out), invalid
}

func hex4(b []byte) uint16 {
	var v uint16
	for _, c := range b[:4] {
		v <<= 4
		switch {
		case c >= '0' && c <= '9':
			v |= uint16(c - '0')
		case c >= 'a' && c <= 'f':
			v |= uint16(c - 'a' + 10)
		case c >= 'A' && c <= 'F':
			v |= uint16(c - 'A' + 10)
		}
	}
	return v
}
