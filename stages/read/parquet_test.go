package read

import (
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/parquet-go/parquet-go"
)

type pqRow struct {
	ID    string  `parquet:"id"`
	Text  string  `parquet:"text"`
	URL   string  `parquet:"url"`
	Score float64 `parquet:"score"`
}

// A Parquet file written by the parquet library's own writer, with several
// row groups, reads back row by row with text, id and extra columns.
func TestReadParquet(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "forum.parquet")
	f, err := os.Create(p)
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[pqRow](f, parquet.MaxRowsPerRowGroup(40))
	var rows []pqRow
	for i := 0; i < 100; i++ {
		rows = append(rows, pqRow{ID: "f" + fmtInt(int64(i)), Text: "Thread " + fmtInt(int64(i)) + ": the bilge alarm sounds at night.", URL: "https://forum.example/t/" + fmtInt(int64(i)), Score: float64(i) / 4})
	}
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	in, _ := os.Open(p)
	defer in.Close()
	r, err := NewParquetReader(in, "forum.parquet", 2, ReadOptions{Source: "forum", TextField: "text", IDField: "id"})
	if err != nil {
		t.Fatal(err)
	}
	if n := len(r.f.RowGroups()); n < 2 {
		t.Errorf("want several row groups, got %d", n)
	}
	var got []*Doc
	for {
		rec, err := r.Next()
		if rec.Doc != nil {
			got = append(got, rec.Doc)
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if len(got) != 100 {
		t.Fatalf("got %d rows", len(got))
	}
	d := got[57]
	if d.ID != "f57" || d.Text != rows[57].Text || d.Meta["url"] != rows[57].URL || d.Meta["score"] != 14.25 || d.Input != 2 || d.Line != 58 {
		t.Errorf("row 57 = %+v", d)
	}
	if _, err := NewParquetReader(in, "forum.parquet", 0, ReadOptions{TextField: "body"}); err == nil {
		t.Error("missing text column: no error")
	}
}
