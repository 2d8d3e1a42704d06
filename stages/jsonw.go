package stages

import (
	"bytes"
	"encoding/json"
	"math"
	"sort"
	"strconv"
	"unicode/utf8"
)

// jsonBuf builds one JSON object with keys in the order they are added, so
// that ledger, metrics and shard lines are byte-identical from run to run
// without a reflective encoder in the hot path.
type jsonBuf struct {
	b     []byte
	first bool
}

func (j *jsonBuf) begin() { j.b = append(j.b[:0], '{'); j.first = true }

func (j *jsonBuf) end() []byte { j.b = append(j.b, '}', '\n'); return j.b }

func (j *jsonBuf) key(k string) {
	if !j.first {
		j.b = append(j.b, ',')
	}
	j.first = false
	j.b = appendJSONString(j.b, k)
	j.b = append(j.b, ':')
}

func (j *jsonBuf) str(k, v string) { j.key(k); j.b = appendJSONString(j.b, v) }

func (j *jsonBuf) int(k string, v int64) { j.key(k); j.b = strconv.AppendInt(j.b, v, 10) }

func (j *jsonBuf) float(k string, v float64) { j.key(k); j.b = appendJSONFloat(j.b, v) }

// val writes any JSON-encodable value; maps are written with sorted keys.
func (j *jsonBuf) val(k string, v any) { j.key(k); j.b = appendJSONValue(j.b, v) }

func appendJSONFloat(b []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(b, "null"...)
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return strconv.AppendInt(b, int64(v), 10)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

func appendJSONValue(b []byte, v any) []byte {
	switch x := v.(type) {
	case nil:
		return append(b, "null"...)
	case RawJSON:
		if !utf8.Valid(x) {
			return append(b, bytes.ToValidUTF8(x, []byte("\ufffd"))...)
		}
		return append(b, x...)
	case string:
		return appendJSONString(b, x)
	case float64:
		return appendJSONFloat(b, x)
	case float32:
		return appendJSONFloat(b, float64(x))
	case int:
		return strconv.AppendInt(b, int64(x), 10)
	case int64:
		return strconv.AppendInt(b, x, 10)
	case uint64:
		return strconv.AppendUint(b, x, 10)
	case bool:
		return strconv.AppendBool(b, x)
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
	case map[string]int:
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
			b = strconv.AppendInt(b, int64(x[k]), 10)
		}
		return append(b, '}')
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
	}
	enc, err := json.Marshal(v) // encoding/json sorts map keys
	if err != nil {
		return append(b, "null"...)
	}
	return append(b, enc...)
}

const hexDigits = "0123456789abcdef"

// appendJSONString appends s as a JSON string. Invalid UTF-8 is written as
// U+FFFD, so every line the project writes is valid JSON and valid UTF-8.
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
			i += size
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
