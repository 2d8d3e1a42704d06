package read

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
)

// parquetReader reads a Parquet file row group by row group, so memory is
// bounded by one batch of rows, not the file. The text, id and extra
// columns are chosen by name among the top-level leaf columns.
type parquetReader struct {
	baseReader
	f        *parquet.File
	rgi      int
	rows     parquet.Rows
	buf      []parquet.Row
	n, i     int
	textCol  int
	idCol    int
	metaCols []parquetMetaCol
}

type parquetMetaCol struct {
	name  string
	index int
}

const parquetBatchRows = 64 // rows decoded per ReadRows call

// NewParquetReader opens a Parquet file. Parquet needs random access to its
// footer, so it is read from the file itself, not through a decompressor.
func NewParquetReader(f *os.File, file string, input int, opt ReadOptions) (*parquetReader, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	if err := checkParquetHead(f); err != nil {
		return nil, err
	}
	pf, err := parquet.OpenFile(f, st.Size())
	if err != nil {
		return nil, fmt.Errorf("parquet: %w", err)
	}
	r := &parquetReader{baseReader: baseReader{file: file, input: input, opt: opt}, f: pf, textCol: -1, idCol: -1}
	if r.opt.MaxDocBytes <= 0 {
		r.opt.MaxDocBytes = DefaultMaxDocBytes
	}
	var names []string
	for _, fld := range pf.Schema().Fields() {
		names = append(names, fld.Name())
		if fld.Name() == opt.TextField {
			if why := notStringColumn(fld); why != "" {
				return nil, fmt.Errorf("parquet: column %q %s, so it cannot be the text column (text_field); the text must be a top-level string (BYTE_ARRAY) column", fld.Name(), why)
			}
		}
		leaf, ok := pf.Schema().Lookup(fld.Name())
		if !ok || !fld.Leaf() {
			continue
		}
		switch {
		case fld.Name() == opt.TextField:
			r.textCol = leaf.ColumnIndex
		case opt.IDField != "" && fld.Name() == opt.IDField:
			r.idCol = leaf.ColumnIndex
		case r.wantMeta(fld.Name()):
			r.metaCols = append(r.metaCols, parquetMetaCol{fld.Name(), leaf.ColumnIndex})
		}
	}
	if r.textCol < 0 {
		return nil, fmt.Errorf("parquet: no top-level column %q (columns: %s); set text_field to the column that holds the text", opt.TextField, strings.Join(names, ", "))
	}
	return r, nil
}

func (r *parquetReader) Next() (Record, error) {
	for r.i >= r.n {
		if r.rows == nil {
			if r.rgi >= len(r.f.RowGroups()) {
				return Record{}, io.EOF
			}
			r.rows = r.f.RowGroups()[r.rgi].Rows()
			r.rgi++
		}
		if r.buf == nil {
			r.buf = make([]parquet.Row, parquetBatchRows)
		}
		n, err := r.rows.ReadRows(r.buf)
		r.n, r.i = n, 0
		if err == io.EOF || (err == nil && n == 0) {
			r.rows.Close()
			r.rows = nil
			if n == 0 {
				continue
			}
		} else if err != nil {
			return Record{}, fmt.Errorf("parquet row group %d: %w", r.rgi-1, err)
		}
	}
	row := r.buf[r.i]
	r.i++
	r.rec++
	ln := r.rec
	var text, id string
	hasText := false
	var meta map[string]any
	for _, v := range row {
		c := v.Column()
		switch {
		case v.IsNull():
		case c == r.textCol:
			if v.Kind() == parquet.ByteArray {
				if len(v.ByteArray()) > r.opt.MaxDocBytes {
					return Record{Issue: &ReadIssue{File: r.file, Line: ln, Rule: RuleOversize, Bytes: int64(len(v.ByteArray())), DocID: r.defaultID(ln),
						Msg: fmt.Sprintf("row of %d bytes exceeds max_doc_bytes %d", len(v.ByteArray()), r.opt.MaxDocBytes)}}, nil
				}
				text, hasText = string(v.ByteArray()), true
			}
		case c == r.idCol:
			id = v.String()
		default:
			for _, m := range r.metaCols {
				if m.index == c {
					if meta == nil {
						meta = map[string]any{}
					}
					meta[m.name] = parquetValue(v)
				}
			}
		}
	}
	if !hasText {
		return Record{Issue: &ReadIssue{File: r.file, Line: ln, Rule: RuleMissingText, Msg: fmt.Sprintf("row has no string %q", r.opt.TextField), DocID: r.defaultID(ln)}}, nil
	}
	return r.textRecord(text, false, id, ln, meta), nil
}

func parquetValue(v parquet.Value) any {
	switch v.Kind() {
	case parquet.Boolean:
		return v.Boolean()
	case parquet.Int32, parquet.Int64:
		return v.Int64()
	case parquet.Float, parquet.Double:
		return v.Double()
	case parquet.ByteArray, parquet.FixedLenByteArray:
		s, _ := repairUTF8(string(v.ByteArray()))
		return s
	}
	return strconv.Quote(v.String())
}

// checkParquetHead refuses, with a message that says what the file is, a
// file that is not Parquet: a compressed Parquet file (Parquet compresses
// its pages itself and needs random access to its footer, so it is read
// uncompressed) or anything without the "PAR1" magic (Apache Parquet
// format specification, "File format": the file starts and ends with it).
func checkParquetHead(f *os.File) error {
	head := make([]byte, 4)
	n, _ := f.ReadAt(head, 0)
	head = head[:n]
	switch c := sniffCodec(head); {
	case c != CodecNone:
		return fmt.Errorf("parquet: the file is %s-compressed; Parquet compresses its pages itself and must be read uncompressed (decompress it first, e.g. %s -d)", c, c)
	case !bytes.Equal(head, []byte("PAR1")):
		return fmt.Errorf("parquet: not a Parquet file: it does not start with the magic bytes PAR1 (starts with %q)", head)
	}
	return nil
}

// notStringColumn says why a top-level field cannot hold the documents'
// text ("" when it can): a struct, list or map column, a repeated column,
// or a leaf of another physical type.
func notStringColumn(fld parquet.Field) string {
	if !fld.Leaf() {
		if lt := fld.Type().LogicalType(); lt != nil && lt.Value != nil {
			switch lt.Value.(type) {
			case *format.ListType:
				return "is a list"
			case *format.MapType:
				return "is a map"
			}
		}
		var sub []string
		for _, f := range fld.Fields() {
			sub = append(sub, f.Name())
		}
		return fmt.Sprintf("is a struct (fields: %s)", strings.Join(sub, ", "))
	}
	if fld.Repeated() {
		return "is a repeated column (a list)"
	}
	switch k := fld.Type().Kind(); k {
	case parquet.ByteArray, parquet.FixedLenByteArray:
		return ""
	default:
		return fmt.Sprintf("holds %s values, not strings", k)
	}
}
