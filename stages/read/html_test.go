package read

import (
	"bytes"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// crawlPages returns the HTML bodies of the pages in the wget crawl
// (testdata/webcrawl: HTTP/1.0, identity coding, so the body follows the
// header's blank line) with the text the WARC reader extracted from each.
func crawlPages(t *testing.T) (bodies [][]byte, texts []string) {
	t.Helper()
	recs, err := readAll(t, "../../testdata/webcrawl/crawl.warc.gz", ReadOptions{Source: "crawl"})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs {
		if r.Doc != nil {
			texts = append(texts, r.Doc.Text)
		}
	}
	// The raw bodies, by a second pass over the file with the plain
	// record splitter below.
	f, _ := os.Open("../../testdata/webcrawl/crawl.warc.gz")
	defer f.Close()
	dec, err := Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	all, _ := io.ReadAll(dec)
	for _, rec := range bytes.Split(all, []byte("WARC/1.0\r\n"))[1:] {
		hdr, block, _ := bytes.Cut(rec, []byte("\r\n\r\n"))
		if !bytes.Contains(hdr, []byte("WARC-Type: response")) || !bytes.HasPrefix(block, []byte("HTTP/1.0 200")) {
			continue
		}
		head, body, _ := bytes.Cut(block, []byte("\r\n\r\n"))
		if !bytes.Contains(head, []byte("Content-type: text/html")) {
			continue
		}
		bodies = append(bodies, bytes.TrimSuffix(body, []byte("\r\n\r\n")))
	}
	if len(bodies) != 15 || len(texts) != 15 {
		t.Fatalf("%d bodies, %d texts, want 15", len(bodies), len(texts))
	}
	return bodies, texts
}

// The same pages given as .html files (format sniffed from the name and
// from the content), as a JSONL field written by encoding/json, and as a
// Parquet column written by parquet-go give the same text as the WARC
// reader: one extraction serves every input form.
func TestHTMLInputsAgreeWithWARC(t *testing.T) {
	bodies, texts := crawlPages(t)
	dir := t.TempDir()

	var jl bytes.Buffer
	type row struct {
		ID   string `parquet:"id" json:"id"`
		HTML string `parquet:"html" json:"html"`
	}
	var rows []row
	for i, b := range bodies {
		name := filepath.Join(dir, "page"+fmtInt(int64(i))+".html")
		if i%2 == 1 {
			name = filepath.Join(dir, "page"+fmtInt(int64(i))) // no extension: sniffed
		}
		os.WriteFile(name, b, 0o644)
		recs, err := readAll(t, name, ReadOptions{Source: "files"})
		if err != nil || len(recs) != 1 || recs[0].Doc == nil {
			t.Fatalf("%s: %v %v", name, recs, err)
		}
		if recs[0].Doc.Text != texts[i] || recs[0].Doc.Meta["title"] == nil {
			t.Errorf("%s: text differs from the WARC reader's (title %v)", name, recs[0].Doc.Meta["title"])
		}
		// JSON strings are UTF-8: the two ISO-8859-1 pages are decoded
		// first, as a user's export would have them.
		p, _ := os.ReadFile(name)
		s := string(p)
		if !utf8Valid(p) {
			s = latin1(p)
		}
		line, _ := json.Marshal(row{ID: "p" + fmtInt(int64(i)), HTML: s})
		jl.Write(line)
		jl.WriteByte('\n')
		rows = append(rows, row{ID: "p" + fmtInt(int64(i)), HTML: s})
	}
	jpath := filepath.Join(dir, "pages.jsonl")
	os.WriteFile(jpath, jl.Bytes(), 0o644)
	recs, err := readAll(t, jpath, ReadOptions{Source: "j", TextField: "html", HTML: true})
	if err != nil || len(recs) != len(texts) {
		t.Fatalf("jsonl: %d records, %v", len(recs), err)
	}
	for i, r := range recs {
		if r.Doc == nil || r.Doc.Text != texts[i] || r.Doc.ID != "p"+fmtInt(int64(i)) {
			t.Errorf("jsonl line %d: %+v", i+1, r.Issue)
		}
	}

	ppath := filepath.Join(dir, "pages.parquet")
	f, _ := os.Create(ppath)
	w := parquet.NewGenericWriter[row](f)
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	w.Close()
	f.Close()
	in, _ := os.Open(ppath)
	defer in.Close()
	pr, err := NewParquetReader(in, "pages.parquet", 0, ReadOptions{Source: "p", TextField: "html", IDField: "id", HTML: true})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; ; i++ {
		r, err := pr.Next()
		if err == io.EOF {
			break
		}
		if err != nil || r.Doc == nil || r.Doc.Text != texts[i] {
			t.Fatalf("parquet row %d: %v %+v", i+1, err, r.Issue)
		}
	}

	// A field whose page has no main text is skipped by rule, not lost
	// silently.
	os.WriteFile(jpath, []byte(`{"id":"e","html":"<html><nav><a href=/>Home</a></nav></html>"}`+"\n"), 0o644)
	recs, _ = readAll(t, jpath, ReadOptions{Source: "j", TextField: "html", HTML: true})
	if len(recs) != 1 || recs[0].Issue == nil || !recs[0].Issue.Skip || recs[0].Issue.Rule != "no_text" || recs[0].Issue.DocID != "e" {
		t.Errorf("empty page: %+v", recs)
	}
}

func utf8Valid(b []byte) bool { return strings.ToValidUTF8(string(b), "\x00") == string(b) }

func latin1(b []byte) string {
	r := make([]rune, len(b))
	for i, c := range b {
		r[i] = rune(c)
	}
	return string(r)
}
