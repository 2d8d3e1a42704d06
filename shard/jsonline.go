package shard

import (
	"encoding/json"
	"math"
	"sort"
	"strconv"
	"unicode/utf8"
)

// appendLine appends one shard line: {"id","text","source","tokens",meta...}
// with meta keys in sorted order (only those keep allows), so lines are
// byte-identical from run to run.
func appendLine(b []byte, id, text, source string, tokens int, meta map[string]any, keep func(string) bool) []byte {
	b = append(b, `{"id":`...)
	b = appendJSONString(b, id)
	b = append(b, `,"text":`...)
	b = appendJSONString(b, text)
	b = append(b, `,"source":`...)
	b = appendJSONString(b, source)
	b = append(b, `,"tokens":`...)
	b = strconv.AppendInt(b, int64(tokens), 10)
	b = appendMeta(b, meta, keep)
	return append(b, '}', '\n')
}

// appendMeta appends ,"key":value for each kept meta key in sorted order,
// skipping keys that would shadow the fixed ones.
func appendMeta(b []byte, meta map[string]any, keep func(string) bool) []byte {
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
		b = appendJSONString(b, k)
		b = append(b, ':')
		b = appendJSONValue(b, meta[k])
	}
	return b
}

func appendJSONValue(b []byte, v any) []byte {
	switch x := v.(type) {
	case nil:
		return append(b, "null"...)
	case string:
		return appendJSONString(b, x)
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
		return appendJSONFloat(b, float64(x))
	case float64:
		return appendJSONFloat(b, x)
	case json.Number:
		return append(b, x...)
	case json.RawMessage:
		return append(b, x...)
	case json.Marshaler: // e.g. a raw JSON value kept from the input record
		if enc, err := x.MarshalJSON(); err == nil && len(enc) > 0 {
			return append(b, enc...)
		}
		return append(b, "null"...)
	case []string:
		b = append(b, '[')
		for i, s := range x {
			if i > 0 {
				b = append(b, ',')
			}
			b = appendJSONString(b, s)
		}
		return append(b, ']')
	case []any:
		b = append(b, '[')
		for i, s := range x {
			if i > 0 {
				b = append(b, ',')
			}
			b = appendJSONValue(b, s)
		}
		return append(b, ']')
	case map[string]any:
		keys := make([]string, 0, len(x))
		for k := range x {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		b = append(b, '{')
		for i, k := range keys {
			if i > 0 {
				b = append(b, ',')
			}
			b = appendJSONString(b, k)
			b = append(b, ':')
			b = appendJSONValue(b, x[k])
		}
		return append(b, '}')
	}
	enc, err := json.Marshal(v) // sorts map keys
	if err != nil {
		return append(b, "null"...)
	}
	return append(b, enc...)
}

func appendJSONFloat(b []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(b, "null"...)
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return strconv.AppendInt(b, int64(v), 10)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

const hexDigits = "0123456789abcdef"

// appendJSONString appends s as a JSON string; invalid UTF-8 becomes
// U+FFFD so every line is valid JSON.
func appendJSONString(b []byte, s string) []byte {
	b = append(b, '"')
	start := 0
	for i := 0; i < len(s); {
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
		r, size := utf8.DecodeRuneInString(s[i:])
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
