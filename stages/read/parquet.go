package read

import (
	"fmt"
	"io"
	"os"
	"sort"
	"strconv"

	"github.com/parquet-go/parquet-go"
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
		sort.Strings(names)
		return nil, fmt.Errorf("parquet: no top-level column %q (columns: %v)", opt.TextField, names)
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
	s, bad := repairUTF8(text)
	d := r.newDoc(s, id, ln)
	d.Meta = meta
	if r.opt.HTML {
		return r.fromHTML(d, []byte(s), "text/html; charset=utf-8"), nil
	}
	if bad {
		return Record{Doc: d, Issue: utf8Issue(&r.baseReader, d)}, nil
	}
	return Record{Doc: d}, nil
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
