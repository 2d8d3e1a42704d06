package audit

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"

	"github.com/klauspost/compress/zstd"

	"winnow/stages"
)

// Record is one ledger decision (README "Run directory", ledger record).
// Keys other than the fixed ones are in Extra ("of", "similarity",
// "eval", "item", "matches", "message"...).
type Record struct {
	Doc    string `json:"doc"`
	Source string `json:"source"`
	File   string `json:"file"`
	Line   int64  `json:"line"`
	Stage  string `json:"stage"`
	Rule   string `json:"rule"`
	Action string `json:"action"`
	Value  any    `json:"value,omitempty"`
	Limit  any    `json:"limit,omitempty"`
	// Bytes is what the decision took out of the text (drops and edits
	// of stages; runs written before the key existed have none: HasBytes
	// is then false).
	Bytes    int64            `json:"bytes,omitempty"`
	HasBytes bool             `json:"-"`
	Changes  map[string]int64 `json:"changes,omitempty"`
	Extra    map[string]any   `json:"extra,omitempty"`
}

// ExtraString returns Extra[key] as a string ("" when absent).
func (r *Record) ExtraString(key string) string {
	s, _ := r.Extra[key].(string)
	return s
}

// MetricRow is one row of OUT/metrics/<stage>.jsonl.zst. Values are
// aligned with the names of the file the row came from; a metric that
// does not apply (JSON null) is NaN.
type MetricRow struct {
	Doc       string
	Source    string
	Order     stages.OrderKey
	Bytes     int64
	Action    string
	Rule      string
	DroppedBy string
	// Labels are the row's text values (the langid stage's "lang").
	Labels map[string]string
	Values []float64
}

// Shadow reports whether the row is a shadow measurement: the document
// had already been removed by an earlier stage.
func (r *MetricRow) Shadow() bool { return r.DroppedBy != "" }

// lineReader reads the lines of a zstd-compressed JSONL file.
type lineReader struct {
	path string
	f    *os.File
	z    *zstd.Decoder
	br   *bufio.Reader
	line int64
	buf  []byte
}

// maxLine bounds one ledger or metrics line (ledger records list at most
// 50 items; anything longer is a damaged file).
const maxLine = 64 << 20

func openLines(path string) (*lineReader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	z, err := zstd.NewReader(f, zstd.WithDecoderConcurrency(1), zstd.WithDecoderLowmem(true))
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &lineReader{path: path, f: f, z: z, br: bufio.NewReaderSize(z, 64<<10)}, nil
}

// next returns the next non-empty line (valid until the next call).
func (l *lineReader) next() ([]byte, error) {
	for {
		l.buf = l.buf[:0]
		for {
			chunk, err := l.br.ReadSlice('\n')
			l.buf = append(l.buf, chunk...)
			if err == bufio.ErrBufferFull {
				if len(l.buf) > maxLine {
					return nil, fmt.Errorf("%s:%d: line longer than %d bytes", l.path, l.line+1, maxLine)
				}
				continue
			}
			if err == io.EOF {
				if len(l.buf) == 0 {
					return nil, io.EOF
				}
				break
			}
			if err != nil {
				return nil, fmt.Errorf("%s: %w", l.path, err)
			}
			break
		}
		l.line++
		b := bytes.TrimSpace(l.buf)
		if len(b) > 0 {
			return b, nil
		}
	}
}

func (l *lineReader) close() {
	l.z.Close()
	l.f.Close()
}

// parseRecord decodes one ledger line. The fixed keys are read by the
// flat scanner; nested values ("changes", "items", list limits) are
// decoded with encoding/json from their raw bytes.
func parseRecord(b []byte) (Record, error) {
	var r Record
	var perr error
	sc := flatScanner{b: b}
	err := sc.object(func(key []byte, str string, num float64, kind byte) error {
		var v any
		switch kind {
		case 's':
			v = str
		case 'n':
			v = num
		case 'b':
			v = num == 1
		case 'o':
			if string(key) == "changes" {
				if err := json.Unmarshal([]byte(str), &r.Changes); err != nil {
					perr = fmt.Errorf("changes: %w", err)
				}
				return nil
			}
			if err := json.Unmarshal([]byte(str), &v); err != nil {
				perr = fmt.Errorf("%s: %w", key, err)
			}
		}
		switch string(key) {
		case "doc":
			r.Doc = str
		case "source":
			r.Source = str
		case "file":
			r.File = str
		case "line":
			if kind != 'n' || num != math.Trunc(num) {
				perr = fmt.Errorf("line: want an integer")
			}
			r.Line = int64(num)
		case "stage":
			r.Stage = str
		case "rule":
			r.Rule = str
		case "action":
			r.Action = str
		case "value":
			r.Value = v
		case "limit":
			r.Limit = v
		case "bytes":
			if kind != 'n' || num != math.Trunc(num) {
				perr = fmt.Errorf("bytes: want an integer")
			}
			r.Bytes, r.HasBytes = int64(num), true
		default:
			if r.Extra == nil {
				r.Extra = map[string]any{}
			}
			r.Extra[string(key)] = v
		}
		return nil
	})
	if err == nil {
		err = perr
	}
	return r, err
}

// metricsFile reads one metrics file row by row. The metric names are
// learned from the rows (every key that is not one of the fixed ones), in
// the order they first appear.
type metricsFile struct {
	lr    *lineReader
	names []string
	index map[string]int
}

func openMetrics(path string) (*metricsFile, error) {
	lr, err := openLines(path)
	if err != nil {
		return nil, err
	}
	return &metricsFile{lr: lr, index: map[string]int{}}, nil
}

func (m *metricsFile) close() { m.lr.close() }

// next parses the next row. The row's Values slice is freshly allocated.
func (m *metricsFile) next() (*MetricRow, error) {
	b, err := m.lr.next()
	if err != nil {
		return nil, err
	}
	row := &MetricRow{Values: make([]float64, len(m.names))}
	for i := range row.Values {
		row.Values[i] = math.NaN()
	}
	sc := flatScanner{b: b}
	err = sc.object(func(key []byte, str string, num float64, kind byte) error {
		switch string(key) {
		case "doc":
			row.Doc = str
		case "source":
			row.Source = str
		case "order":
			row.Order = stages.OrderKey(uint64(num))
		case "bytes":
			row.Bytes = int64(num)
		case "action":
			row.Action = str
		case "rule":
			row.Rule = str
		case "dropped_by":
			row.DroppedBy = str
		default:
			if kind == 's' {
				if row.Labels == nil {
					row.Labels = map[string]string{}
				}
				row.Labels[string(key)] = str
				return nil
			}
			i, ok := m.index[string(key)]
			if !ok {
				i = len(m.names)
				m.names = append(m.names, string(key))
				m.index[string(key)] = i
				row.Values = append(row.Values, math.NaN())
			}
			if kind == 'n' {
				row.Values[i] = num
			}
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("%s:%d: %w", m.lr.path, m.lr.line, err)
	}
	if sc.orderRaw != "" {
		// Order keys are integers up to 2^64: parse exactly rather than
		// through float64.
		u, perr := strconv.ParseUint(sc.orderRaw, 10, 64)
		if perr == nil {
			row.Order = stages.OrderKey(u)
		}
	}
	return row, nil
}

// flatScanner parses one flat JSON object: string, number, null and
// boolean values are decoded; nested values are skipped. It is several
// times faster than encoding/json into a map, which matters because a run
// has one metrics row per document and stage.
type flatScanner struct {
	b        []byte
	i        int
	orderRaw string
}

var errFlat = errors.New("malformed metrics row")

func (s *flatScanner) ws() {
	for s.i < len(s.b) && (s.b[s.i] == ' ' || s.b[s.i] == '\t' || s.b[s.i] == '\n' || s.b[s.i] == '\r') {
		s.i++
	}
}

// object calls fn for each key with the decoded value; kind is 's'
// (string), 'n' (number), 'z' (null), 'b' (boolean, num 1 or 0) or 'o'
// (nested object or array, passed undecoded in str).
func (s *flatScanner) object(fn func(key []byte, str string, num float64, kind byte) error) error {
	s.ws()
	if s.i >= len(s.b) || s.b[s.i] != '{' {
		return fmt.Errorf("%w: want an object", errFlat)
	}
	s.i++
	s.ws()
	if s.i < len(s.b) && s.b[s.i] == '}' {
		return nil
	}
	for {
		s.ws()
		key, err := s.str()
		if err != nil {
			return err
		}
		s.ws()
		if s.i >= len(s.b) || s.b[s.i] != ':' {
			return fmt.Errorf("%w: want ':' after key %q", errFlat, key)
		}
		s.i++
		s.ws()
		if s.i >= len(s.b) {
			return fmt.Errorf("%w: truncated", errFlat)
		}
		var (
			str  string
			num  float64
			kind byte
		)
		switch c := s.b[s.i]; {
		case c == '"':
			v, err := s.str()
			if err != nil {
				return err
			}
			str, kind = string(v), 's'
		case c == 'n':
			if !bytes.HasPrefix(s.b[s.i:], []byte("null")) {
				return fmt.Errorf("%w: bad literal", errFlat)
			}
			s.i += 4
			num, kind = math.NaN(), 'z'
		case c == 't' || c == 'f':
			switch {
			case bytes.HasPrefix(s.b[s.i:], []byte("true")):
				s.i += 4
				num = 1
			case bytes.HasPrefix(s.b[s.i:], []byte("false")):
				s.i += 5
			default:
				return fmt.Errorf("%w: bad literal", errFlat)
			}
			kind = 'b'
		case c == '{' || c == '[':
			start := s.i
			if err := s.skipNested(); err != nil {
				return err
			}
			str, kind = string(s.b[start:s.i]), 'o'
		default:
			j := s.i
			for j < len(s.b) && (s.b[j] == '-' || s.b[j] == '+' || s.b[j] == '.' || s.b[j] == 'e' || s.b[j] == 'E' || (s.b[j] >= '0' && s.b[j] <= '9')) {
				j++
			}
			raw := string(s.b[s.i:j])
			f, err := strconv.ParseFloat(raw, 64)
			if err != nil {
				return fmt.Errorf("%w: bad number %q for key %q", errFlat, raw, key)
			}
			if string(key) == "order" {
				s.orderRaw = raw
			}
			s.i = j
			num, kind = f, 'n'
		}
		if err := fn(key, str, num, kind); err != nil {
			return err
		}
		s.ws()
		if s.i >= len(s.b) {
			return fmt.Errorf("%w: truncated", errFlat)
		}
		if s.b[s.i] == ',' {
			s.i++
			continue
		}
		if s.b[s.i] == '}' {
			s.i++
			return nil
		}
		return fmt.Errorf("%w: want ',' or '}'", errFlat)
	}
}

// str parses a JSON string at s.i and returns its decoded bytes.
func (s *flatScanner) str() ([]byte, error) {
	if s.i >= len(s.b) || s.b[s.i] != '"' {
		return nil, fmt.Errorf("%w: want a string", errFlat)
	}
	start := s.i
	s.i++
	esc := false
	for s.i < len(s.b) {
		c := s.b[s.i]
		if c == '\\' {
			esc = true
			s.i += 2
			continue
		}
		if c == '"' {
			s.i++
			if !esc {
				return s.b[start+1 : s.i-1], nil
			}
			var v string
			if err := json.Unmarshal(s.b[start:s.i], &v); err != nil {
				return nil, fmt.Errorf("%w: %v", errFlat, err)
			}
			return []byte(v), nil
		}
		s.i++
	}
	return nil, fmt.Errorf("%w: unterminated string", errFlat)
}

func (s *flatScanner) skipNested() error {
	depth := 0
	for s.i < len(s.b) {
		switch s.b[s.i] {
		case '"':
			if _, err := s.str(); err != nil {
				return err
			}
			continue
		case '{', '[':
			depth++
		case '}', ']':
			depth--
			if depth == 0 {
				s.i++
				return nil
			}
		}
		s.i++
	}
	return fmt.Errorf("%w: unterminated value", errFlat)
}
