package read

import (
	"bufio"
	"bytes"
	"fmt"
	"io"

	"winnow/stages/read/webpage"
)

// htmlReader reads one HTML file as one document: its main text, as
// package webpage extracts it (charset from a byte-order mark or <meta>,
// then detection; boilerplate removed), with the title in Meta.
type htmlReader struct {
	baseReader
	br   *bufio.Reader
	done bool
}

func (r *htmlReader) Next() (Record, error) {
	if r.done {
		return Record{}, io.EOF
	}
	r.done = true
	b, err := io.ReadAll(io.LimitReader(r.br, int64(r.opt.MaxDocBytes)+1))
	if err != nil {
		return Record{}, err
	}
	if len(b) > r.opt.MaxDocBytes {
		n, _ := io.Copy(io.Discard, r.br)
		size := int64(len(b)) + n
		return Record{Issue: &ReadIssue{File: r.file, Line: 1, Rule: RuleOversize, Bytes: size, DocID: r.defaultID(1),
			Msg: fmt.Sprintf("document of %d bytes exceeds max_doc_bytes %d", size, r.opt.MaxDocBytes)}}, nil
	}
	if len(bytes.TrimSpace(b)) == 0 {
		return Record{}, io.EOF
	}
	d := r.newDoc("", "", 1)
	return r.fromHTML(d, b, ""), nil
}

// fromHTML sets d's text to the main text of the HTML page b (contentType
// may name its charset) and returns the record: the document, or a skip
// record when the page holds no text.
func (b *baseReader) fromHTML(d *Doc, page []byte, contentType string) Record {
	p, rule, err := webpage.FromHTML(page, contentType, webpage.Options{MaxBytes: b.opt.MaxDocBytes})
	if err != nil {
		return Record{Issue: &ReadIssue{File: b.file, Line: d.Line, Rule: RuleMalformed, Bytes: int64(len(page)), DocID: d.ID,
			Msg: "HTML: " + err.Error()}}
	}
	if rule != "" {
		return Record{Issue: &ReadIssue{File: b.file, Line: d.Line, Rule: rule, Bytes: int64(len(page)), DocID: d.ID,
			Msg: "HTML page without main text", Skip: true}}
	}
	d.Text = p.Text
	if _, ok := d.Meta["title"]; !ok && p.Title != "" {
		d.SetMeta("title", p.Title)
	}
	return Record{Doc: d}
}
