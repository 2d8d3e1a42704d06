package read

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

const parquetFixtures = "../../testdata/parquet"

// readParquet opens path and returns every record.
func readParquet(t testing.TB, path string, opt ReadOptions) ([]Record, error) {
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r, err := NewParquetReader(f, filepath.Base(path), 0, opt)
	if err != nil {
		return nil, err
	}
	return drainRecords(r)
}

// A Parquet file written by DuckDB (an independent writer; see
// testdata/parquet/README.md) reads back every row, in order, with the
// text and id DuckDB's own JSON writer gives for the same rows.
func TestParquetWrittenByDuckDB(t *testing.T) {
	recs, err := readParquet(t, filepath.Join(parquetFixtures, "udhr.parquet"), ReadOptions{Source: "udhr", TextField: "text", IDField: "id"})
	if err != nil {
		t.Fatal(err)
	}
	exp, err := os.Open(filepath.Join(parquetFixtures, "udhr.expected.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	defer exp.Close()
	sc := bufio.NewScanner(exp)
	sc.Buffer(nil, 1<<20)
	i := 0
	for sc.Scan() {
		var want struct {
			ID   string `json:"id"`
			Text string `json:"text"`
			N    int64  `json:"n"`
		}
		if err := json.Unmarshal(sc.Bytes(), &want); err != nil {
			t.Fatal(err)
		}
		if i >= len(recs) || recs[i].Doc == nil {
			t.Fatalf("row %d missing", i+1)
		}
		d := recs[i].Doc
		if d.ID != want.ID || d.Text != want.Text || d.Meta["n"] != want.N {
			t.Errorf("row %d = %q %q %v, want %q %q %d", i+1, d.ID, d.Text, d.Meta["n"], want.ID, want.Text, want.N)
		}
		i++
	}
	if i != 60 || len(recs) != i {
		t.Errorf("read %d rows, DuckDB wrote %d", len(recs), i)
	}
}

// A text column that is not a top-level string column, and a compressed
// .parquet file, are refused at open with a message that says what is
// wrong (not one missing_text per row, nor a bare "invalid magic").
func TestParquetWrongTextColumn(t *testing.T) {
	udhr := filepath.Join(parquetFixtures, "udhr.parquet")
	for _, c := range []struct{ file, field, want string }{
		{udhr, "n", `column "n" holds INT32 values, not strings`},
		{udhr, "tags", `column "tags" is a list`},
		{udhr, "info", `column "info" is a struct (fields: lang, chars)`},
		{udhr, "body", `no top-level column "body" (columns: id, text, n, tags, info)`},
		{filepath.Join(parquetFixtures, "nested_text.parquet"), "text", `column "text" is a struct (fields: text, lang)`},
		{filepath.Join(parquetFixtures, "list_text.parquet"), "text", `column "text" is a list`},
	} {
		_, err := readParquet(t, c.file, ReadOptions{TextField: c.field, IDField: "id"})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s text_field %q: got %v, want %q", filepath.Base(c.file), c.field, err, c.want)
		}
	}
	raw, _ := os.ReadFile(udhr)
	dir := t.TempDir()
	var gz bytes.Buffer
	w := gzip.NewWriter(&gz)
	w.Write(raw)
	w.Close()
	p := filepath.Join(dir, "udhr.parquet.gz")
	os.WriteFile(p, gz.Bytes(), 0o644)
	if _, err := readParquet(t, p, ReadOptions{TextField: "text"}); err == nil || !strings.Contains(err.Error(), "gzip-compressed") {
		t.Errorf("gzip-compressed parquet: %v", err)
	}
	p = filepath.Join(dir, "notes.parquet")
	os.WriteFile(p, []byte(`{"text":"not parquet"}`), 0o644)
	if _, err := readParquet(t, p, ReadOptions{TextField: "text"}); err == nil || !strings.Contains(err.Error(), "PAR1") {
		t.Errorf("JSON named .parquet: %v", err)
	}
}

type fuzzPQRow struct {
	ID   string `parquet:"id"`
	Text string `parquet:"text"`
}

// FuzzParquetReader writes rows with the parquet library's writer (row
// groups of a fuzzed size) and checks that the reader returns every row,
// in order, with the same id and (repaired) text: no row is lost. Seeds
// include the rows of the DuckDB fixture.
func FuzzParquetReader(f *testing.F) {
	f.Add("Keel.\x1fMast.\x1f\x1fRudder.", uint8(2))
	f.Add("\xff\x00x", uint8(1))
	if recs, err := readParquet(f, filepath.Join(parquetFixtures, "udhr.parquet"), ReadOptions{TextField: "text"}); err == nil {
		var texts []string
		for _, r := range recs[:10] {
			texts = append(texts, r.Doc.Text)
		}
		f.Add(strings.Join(texts, "\x1f"), uint8(3))
	}
	f.Fuzz(func(t *testing.T, joined string, group uint8) {
		texts := strings.Split(joined, "\x1f")
		rows := make([]fuzzPQRow, len(texts))
		for i, tx := range texts {
			rows[i] = fuzzPQRow{ID: "r" + fmtInt(int64(i)), Text: tx}
		}
		p := filepath.Join(t.TempDir(), "f.parquet")
		out, err := os.Create(p)
		if err != nil {
			t.Fatal(err)
		}
		w := parquet.NewGenericWriter[fuzzPQRow](out, parquet.MaxRowsPerRowGroup(int64(group%8)+1))
		if _, err := w.Write(rows); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		out.Close()
		recs, err := readParquet(t, p, ReadOptions{TextField: "text", IDField: "id", MaxDocBytes: 1 << 20})
		if err != nil {
			t.Fatal(err)
		}
		if len(recs) != len(rows) {
			t.Fatalf("read %d rows, wrote %d", len(recs), len(rows))
		}
		for i, r := range recs {
			want, _, _ := repairText(rows[i].Text, false)
			if r.Doc == nil || r.Doc.ID != rows[i].ID || r.Doc.Text != want {
				t.Fatalf("row %d = %+v, wrote %+v", i, r.Doc, rows[i])
			}
		}
	})
}
