// Package jsonl encodes the JSON lines every winnow writer produces
// (shards, ledger, metrics, corpora): keys in a fixed order, maps with
// sorted keys, floats in the shortest form, invalid UTF-8 as U+FFFD, so
// that every file is byte-identical from run to run and valid JSON. It is
// hand-written because encoding/json reflects on every value and would be
// the slowest part of writing a shard.
package jsonl

import (
	"encoding/binary"
	"encoding/json"
	"math"
	"sort"
	"strconv"
	"unicode/utf8"
)

// Raw is a JSON value kept verbatim (e.g. an extra field of an input
// record); it is written back byte for byte.
type Raw []byte

// MarshalJSON returns the raw bytes.
func (r Raw) MarshalJSON() ([]byte, error) { return r, nil }

// Object builds one JSON object line with keys in the order they are added.
type Object struct {
	B     []byte
	first bool
}

// Begin starts a new object, reusing the buffer.
func (j *Object) Begin() { j.B = append(j.B[:0], '{'); j.first = true }

// End closes the object with a newline and returns the line.
func (j *Object) End() []byte { j.B = append(j.B, '}', '\n'); return j.B }

// Key writes a key (and the separator before it).
func (j *Object) Key(k string) {
	if !j.first {
		j.B = append(j.B, ',')
	}
	j.first = false
	j.B = AppendString(j.B, k)
	j.B = append(j.B, ':')
}

// Str writes a string field.
func (j *Object) Str(k, v string) { j.Key(k); j.B = AppendString(j.B, v) }

// Int writes an integer field.
func (j *Object) Int(k string, v int64) { j.Key(k); j.B = strconv.AppendInt(j.B, v, 10) }

// Float writes a number field (NaN and infinities as null).
func (j *Object) Float(k string, v float64) { j.Key(k); j.B = AppendFloat(j.B, v) }

// Val writes any value with AppendValue.
func (j *Object) Val(k string, v any) { j.Key(k); j.B = AppendValue(j.B, v) }

// AppendFloat appends v in the shortest form that reads back exactly;
// integral values without a decimal point; NaN and infinities as null.
func AppendFloat(b []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(b, "null"...)
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return strconv.AppendInt(b, int64(v), 10)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

// AppendValue appends v as JSON. Maps are written with sorted keys; Raw,
// json.RawMessage and json.Marshaler values verbatim; anything else
// through encoding/json (which also sorts map keys).
func AppendValue(b []byte, v any) []byte {
	switch x := v.(type) {
	case nil:
		return append(b, "null"...)
	case string:
		return AppendString(b, x)
	case Raw:
		if !utf8.Valid(x) {
			return AppendValidUTF8(b, x)
		}
		return append(b, x...)
	case bool:
		return strconv.AppendBool(b, x)
	case int:
		return strconv.AppendInt(b, int64(x), 10)
	case int32:
		return strconv.AppendInt(b, int64(x), 10)
	case int64:
		return strconv.AppendInt(b, x, 10)
	case uint32:
		return strconv.AppendUint(b, uint64(x), 10)
	case uint64:
		return strconv.AppendUint(b, x, 10)
	case float32:
		return AppendFloat(b, float64(x))
	case float64:
		return AppendFloat(b, x)
	case json.Number:
		return append(b, x...)
	case json.RawMessage:
		return append(b, x...)
	case []string:
		b = append(b, '[')
		for i, s := range x {
			if i > 0 {
				b = append(b, ',')
			}
			b = AppendString(b, s)
		}
		return append(b, ']')
	case []any:
		b = append(b, '[')
		for i, s := range x {
			if i > 0 {
				b = append(b, ',')
			}
			b = AppendValue(b, s)
		}
		return append(b, ']')
	case map[string]any:
		return appendMap(b, x, func(b []byte, v any) []byte { return AppendValue(b, v) })
	case map[string]int:
		return appendMap(b, x, func(b []byte, v int) []byte { return strconv.AppendInt(b, int64(v), 10) })
	case json.Marshaler:
		if enc, err := x.MarshalJSON(); err == nil && len(enc) > 0 {
			return append(b, enc...)
		}
		return append(b, "null"...)
	}
	enc, err := json.Marshal(v)
	if err != nil {
		return append(b, "null"...)
	}
	return append(b, enc...)
}

func appendMap[V any](b []byte, m map[string]V, val func([]byte, V) []byte) []byte {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	b = append(b, '{')
	for i, k := range keys {
		if i > 0 {
			b = append(b, ',')
		}
		b = AppendString(b, k)
		b = append(b, ':')
		b = val(b, m[k])
	}
	return append(b, '}')
}

// AppendMeta appends ,"key":value for each meta key (those keep allows,
// when keep is set) in sorted order, skipping keys that would shadow the
// fixed keys of a document line.
func AppendMeta(b []byte, meta map[string]any, keep func(string) bool) []byte {
	if len(meta) == 0 {
		return b
	}
	keys := make([]string, 0, len(meta))
	for k := range meta {
		switch k {
		case "id", "text", "source", "tokens":
			continue
		}
		if keep != nil && !keep(k) {
			continue
		}
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		b = append(b, ',')
		b = AppendString(b, k)
		b = append(b, ':')
		b = AppendValue(b, meta[k])
	}
	return b
}

// AppendDocLine appends one output document line:
// {"id","text","source","tokens",<meta keys sorted>}.
func AppendDocLine(b []byte, id, text, source string, tokens int, meta map[string]any, keep func(string) bool) []byte {
	b = append(b, `{"id":`...)
	b = AppendString(b, id)
	b = append(b, `,"text":`...)
	b = AppendString(b, text)
	b = append(b, `,"source":`...)
	b = AppendString(b, source)
	b = append(b, `,"tokens":`...)
	b = strconv.AppendInt(b, int64(tokens), 10)
	b = AppendMeta(b, meta, keep)
	return append(b, '}', '\n')
}

const hexDigits = "0123456789abcdef"

const (
	lo8 = 0x0101010101010101
	hi8 = 0x8080808080808080
)

// plain8 reports whether the 8 bytes in v are all printable ASCII other
// than '"' and '\\' (SWAR zero-byte tests), i.e. need no escaping.
func plain8(v uint64) bool {
	q := v ^ (lo8 * '"')
	s := v ^ (lo8 * '\\')
	return ((q-lo8)&^q|(s-lo8)&^s|(v-lo8*0x20)&^v|v)&hi8 == 0
}

// AppendString appends s as a JSON string. Invalid UTF-8 is written as
// U+FFFD, and U+2028/U+2029 are escaped, so every line is valid JSON (and
// valid JavaScript). Runs of plain ASCII are copied 8 bytes at a time.
func AppendString[T string | []byte](b []byte, s T) []byte {
	b = append(b, '"')
	start := 0
	for i := 0; i < len(s); {
		for i+8 <= len(s) && plain8(load8(s[i:i+8])) {
			i += 8
		}
		if i >= len(s) {
			break
		}
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			b = append(b, s[start:i]...)
			switch c {
			case '"', '\\':
				b = append(b, '\\', c)
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xF])
			}
			i++
			start = i
			continue
		}
		r, size := decodeRune(s, i)
		if r == utf8.RuneError && size == 1 {
			b = append(b, s[start:i]...)
			b = append(b, `\ufffd`...)
			i++
			start = i
			continue
		}
		if r == '\u2028' || r == '\u2029' {
			b = append(b, s[start:i]...)
			b = append(b, '\\', 'u', '2', '0', '2', hexDigits[r&0xF])
			i += size
			start = i
			continue
		}
		i += size
	}
	b = append(b, s[start:]...)
	return append(b, '"')
}

func decodeRune[T string | []byte](s T, i int) (rune, int) {
	if bs, ok := any(s).([]byte); ok {
		return utf8.DecodeRune(bs[i:])
	}
	return utf8.DecodeRuneInString(string(s[i:]))
}

func load8[T string | []byte](s T) uint64 {
	if bs, ok := any(s).([]byte); ok {
		return binary.LittleEndian.Uint64(bs)
	}
	str := string(s)
	return uint64(str[0]) | uint64(str[1])<<8 | uint64(str[2])<<16 | uint64(str[3])<<24 |
		uint64(str[4])<<32 | uint64(str[5])<<40 | uint64(str[6])<<48 | uint64(str[7])<<56
}

// AppendValidUTF8 appends b with every byte that is not part of a valid
// UTF-8 sequence replaced by U+FFFD (one per byte, as AppendString does).
func AppendValidUTF8(dst, b []byte) []byte {
	for i := 0; i < len(b); {
		c := b[i]
		if c < utf8.RuneSelf {
			dst = append(dst, c)
			i++
			continue
		}
		r, size := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && size == 1 {
			dst = append(dst, "\uFFFD"...)
		} else {
			dst = append(dst, b[i:i+size]...)
		}
		i += size
	}
	return dst
}
