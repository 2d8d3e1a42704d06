package run

import (
	"bufio"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"

	"winnow/stages/jsonl"

	"winnow/stages"
	"winnow/stages/read"

	"github.com/klauspost/compress/s2"
)

// docSpill stores the documents that reached a global stage, so the next
// segment of the pipeline can re-read them after the global decision
// without re-reading (and re-filtering) the inputs. Records are
// length-prefixed binary fields in an S2 stream (see recordFile): order,
// id, text, source, file, line, tokens, meta as JSON, then the measured
// values later stages asked for (uvarint count; name, float64 bits LE;
// sorted by name).
type docSpill struct {
	recordFile
	jb jsonl.Object
	n  int64
}

func createDocSpill(path string) (*docSpill, error) {
	rf, err := createRecordFile(path)
	if err != nil {
		return nil, err
	}
	return &docSpill{recordFile: *rf}, nil
}

// recordFile is an S2 stream of length-prefixed records: the runner's
// spills and a split run's key and id files. They are written once and
// read once or twice, never kept: S2 round-trips them at twice the speed
// of zstd's fastest level for half as many bytes again on disk
// (BenchmarkSpillCodec).
type recordFile struct {
	path string
	f    *os.File
	enc  *s2.Writer
	buf  []byte // the record being built, reused
}

func createRecordFile(path string) (*recordFile, error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	return &recordFile{path: path, f: f, enc: s2.NewWriter(f, s2.WriterConcurrency(1))}, nil
}

// openRecordFile opens a recordFile for reading.
func openRecordFile(path string) (*os.File, *bufio.Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	return f, bufio.NewReaderSize(s2.NewReader(f), 1<<20), nil
}

// put writes b as one record and keeps it as the buffer for the next.
func (w *recordFile) put(b []byte) error {
	var hdr [binary.MaxVarintLen64]byte
	n := binary.PutUvarint(hdr[:], uint64(len(b)))
	w.buf = b
	if _, err := w.enc.Write(hdr[:n]); err != nil {
		return err
	}
	_, err := w.enc.Write(b)
	return err
}

func (w *recordFile) close() error {
	err := w.enc.Close()
	if e := w.f.Close(); err == nil {
		err = e
	}
	return err
}

func (s *docSpill) add(d *stages.Doc) error {
	b := s.buf[:0]
	b = binary.AppendUvarint(b, uint64(d.Order))
	b = appendField(b, d.ID)
	b = appendField(b, d.Text)
	b = appendField(b, d.Source)
	b = appendField(b, d.File)
	b = binary.AppendVarint(b, d.Line)
	b = binary.AppendUvarint(b, uint64(d.Tokens))
	if len(d.Meta) > 0 {
		s.jb.B = jsonl.AppendValue(s.jb.B[:0], d.Meta)
		b = appendField(b, string(s.jb.B))
	} else {
		b = appendField(b, "")
	}
	if len(d.Measured) > 0 {
		names := make([]string, 0, len(d.Measured))
		for k := range d.Measured {
			names = append(names, k)
		}
		slices.Sort(names)
		b = binary.AppendUvarint(b, uint64(len(names)))
		for _, k := range names {
			b = appendField(b, k)
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(d.Measured[k]))
		}
	}
	s.n++
	return s.put(b)
}

func appendField(b []byte, s string) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	return append(b, s...)
}

var errSpill = errors.New("corrupt spill record")

// parseSpilled decodes one docSpill record.
func parseSpilled(b []byte) (*stages.Doc, error) {
	d := &stages.Doc{}
	var ok bool
	var u uint64
	if u, b, ok = takeUvarint(b); !ok {
		return nil, errSpill
	}
	d.Order = stages.OrderKey(u)
	fields := [4]*string{&d.ID, &d.Text, &d.Source, &d.File}
	for _, f := range fields {
		if *f, b, ok = takeField(b); !ok {
			return nil, errSpill
		}
	}
	line, k := binary.Varint(b)
	if k <= 0 {
		return nil, errSpill
	}
	d.Line, b = line, b[k:]
	if u, b, ok = takeUvarint(b); !ok {
		return nil, errSpill
	}
	d.Tokens = int(u)
	var meta string
	if meta, b, ok = takeField(b); !ok {
		return nil, errSpill
	}
	if len(b) > 0 {
		if u, b, ok = takeUvarint(b); !ok || u > uint64(len(b)) {
			return nil, errSpill
		}
		d.Measured = make(map[string]float64, u)
		for i := uint64(0); i < u; i++ {
			var name string
			if name, b, ok = takeField(b); !ok || len(b) < 8 {
				return nil, errSpill
			}
			d.Measured[name] = math.Float64frombits(binary.LittleEndian.Uint64(b))
			b = b[8:]
		}
	}
	if meta != "" {
		d.Meta = map[string]any{}
		if err := read.EachField([]byte(meta), func(k, v []byte) { d.Meta[string(k)] = metaValue(v) }); err != nil {
			return nil, fmt.Errorf("spill meta: %w", err)
		}
	}
	return d, nil
}

// metaValue turns a spilled meta value back into what a stage set: a JSON
// string becomes a Go string and true/false a bool (stages and `only:`
// scopes compare them: a detected "lang" must still match after a global
// stage); numbers, lists and objects stay raw JSON, written out as read.
func metaValue(v []byte) any {
	switch {
	case len(v) > 0 && v[0] == '"':
		var s string
		if json.Unmarshal(v, &s) == nil {
			return s
		}
	case string(v) == "true":
		return true
	case string(v) == "false":
		return false
	}
	return read.RawJSON(append([]byte(nil), v...))
}

func takeUvarint(b []byte) (uint64, []byte, bool) {
	u, k := binary.Uvarint(b)
	if k <= 0 {
		return 0, b, false
	}
	return u, b[k:], true
}

func takeField(b []byte) (string, []byte, bool) {
	f, rest, ok := takeBytes(b)
	return string(f), rest, ok
}

// takeBytes is takeField without the copy: the field aliases b.
func takeBytes(b []byte) ([]byte, []byte, bool) {
	n, b, ok := takeUvarint(b)
	if !ok || uint64(len(b)) < n {
		return nil, b, false
	}
	return b[:n], b[n:], true
}

// forEachSpilled calls fn with every document of a spill, in order,
// stopping at the first error.
func forEachSpilled(path string, fn func(*stages.Doc) error) error {
	return forEachRecord(path, func(b []byte) error {
		d, err := parseSpilled(b)
		if err != nil {
			return fmt.Errorf("spill %s: %w", path, err)
		}
		return fn(d)
	})
}

// forEachRecord calls fn with every record of a recordFile, in order; b is
// reused for the next record.
func forEachRecord(path string, fn func(b []byte) error) error {
	f, br, err := openRecordFile(path)
	if err != nil {
		return err
	}
	defer f.Close()
	var buf []byte
	for {
		n, err := binary.ReadUvarint(br)
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		if cap(buf) < int(n) {
			buf = make([]byte, n)
		}
		b := buf[:n]
		if _, err := io.ReadFull(br, b); err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		if err := fn(b); err != nil {
			return err
		}
	}
}
