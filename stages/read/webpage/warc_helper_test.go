package webpage

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
)

// warcRecord is one record of a test WARC file.
type warcRecord struct {
	typ, uri, date, ctype string
	block                 []byte
}

// readWARC reads every record of a (multi-member gzip) WARC file, with a
// parser of its own so the tests do not lean on the reader under test.
func readWARC(t testing.TB, path string) []warcRecord {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	br := bufio.NewReader(zr)
	var out []warcRecord
	for {
		line, err := br.ReadString('\n')
		if err == io.EOF && line == "" {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		if strings.TrimSpace(line) == "" {
			continue
		}
		if !strings.HasPrefix(line, "WARC/") {
			t.Fatalf("%s: want a version line, got %q", path, line)
		}
		var r warcRecord
		n := -1
		for {
			h, err := br.ReadString('\n')
			if err != nil {
				t.Fatal(err)
			}
			h = strings.TrimRight(h, "\r\n")
			if h == "" {
				break
			}
			k, v, _ := strings.Cut(h, ":")
			v = strings.TrimSpace(v)
			switch strings.ToLower(k) {
			case "warc-type":
				r.typ = v
			case "warc-target-uri":
				r.uri = strings.Trim(v, "<>")
			case "warc-date":
				r.date = v
			case "content-type":
				r.ctype = v
			case "content-length":
				n, _ = strconv.Atoi(v)
			}
		}
		r.block = make([]byte, n)
		if _, err := io.ReadFull(br, r.block); err != nil {
			t.Fatal(err)
		}
		out = append(out, r)
	}
}

// page turns a test WARC record into its page, or the rule that skips it,
// with this package's functions; doc is false for warcinfo and request
// records, which hold no document. Another record type is an error.
func (r warcRecord) page() (p Page, rule string, doc bool, err error) {
	switch {
	case r.typ == "warcinfo" || r.typ == "request":
		return Page{}, "", false, nil
	case IsCrawlerRecord(r.typ, r.uri):
		rule = RuleCrawlerRecord
	case r.typ == "response":
		p, rule, err = FromWARCResponse(r.block, r.uri, r.date, Options{})
	case r.typ == "resource":
		p, rule, err = FromWARCResource(r.block, r.ctype, r.uri, r.date, Options{})
	default:
		err = fmt.Errorf("unexpected %s record", r.typ)
	}
	return p, rule, true, err
}

// pageBody returns the raw HTML body of a response record from the wget
// crawl (HTTP/1.0, identity coding, no chunking), for the reference side.
func pageBody(t testing.TB, block []byte) []byte {
	_, body, ok := bytes.Cut(block, []byte("\r\n\r\n"))
	if !ok {
		t.Fatal("response without a header end")
	}
	return body
}
