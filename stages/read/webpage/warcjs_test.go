package webpage

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"compress/zlib"
	"io"
	"net/http"
	"strings"
	"testing"

	"github.com/andybalholm/brotli"
)

// testdata/warcjs/pages.warc.gz was written by the npm package warcio
// 2.4.11 (warcio.js) from Debian documentation pages, with bodies
// compressed by Node's zlib (gzip, br, deflate) and chunked
// (testdata/warcjs/build.mjs). The reference side decodes each response
// with net/http.ReadResponse (status, headers, chunked transfer coding) and
// the standard library's gzip/zlib readers (brotli: andybalholm/brotli,
// the decoder Go's ecosystem uses), then takes the main element's text as
// in TestCrawlMainTextF1.
const warcjsWARC = "../../../testdata/warcjs/pages.warc.gz"

var warcjsMain = map[string]mainSel{
	"python3-doc/html/tutorial/interactive.html": {tag: "div", attr: "role", val: "main"},
	"python3-doc/html/tutorial/whatnow.html":     {tag: "div", attr: "role", val: "main"},
	"valgrind/html/dist.readme-packagers.html":   {tag: "div", attr: "class", val: "chapter"},
	"libffi8/html/Memory-Usage.html":             {tag: "div", attr: "class", val: "chapter", drop: []mainSel{{tag: "div", attr: "class", val: "header"}}},
	"nodejs/api/documentation.html":              {tag: "div", attr: "id", val: "apicontent"},
	"libffi8/html/Structures.html":               {tag: "div", attr: "class", val: "subsection", drop: []mainSel{{tag: "div", attr: "class", val: "header"}}},
}

// referenceBody decodes an HTTP response block with the standard library.
func referenceBody(t *testing.T, block []byte) []byte {
	resp, err := http.ReadResponse(bufio.NewReader(bytes.NewReader(block)), nil)
	if err != nil {
		t.Fatal(err)
	}
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	var r io.Reader
	switch resp.Header.Get("Content-Encoding") {
	case "":
		return body
	case "gzip":
		r, err = gzip.NewReader(bytes.NewReader(body))
	case "deflate":
		r, err = zlib.NewReader(bytes.NewReader(body))
	case "br":
		r = brotli.NewReader(bytes.NewReader(body))
	}
	if err != nil {
		t.Fatal(err)
	}
	out, err := io.ReadAll(r)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func TestWarcioPages(t *testing.T) {
	rules := map[string]int{}
	pages := 0
	for _, rec := range readWARC(t, warcjsWARC) {
		page, rule, doc, err := rec.page()
		if !doc {
			continue
		}
		if err != nil {
			t.Errorf("%s: %v", rec.uri, err)
			continue
		}
		if rule != "" {
			rules[rule]++
			continue
		}
		pages++
		path := strings.TrimPrefix(strings.TrimPrefix(rec.uri, "http://docs.larkspur.test/"), "file:///usr/share/doc/")
		sel, ok := warcjsMain[path]
		if !ok {
			t.Errorf("unexpected page %s", rec.uri)
			continue
		}
		body := rec.block
		if rec.typ == "response" {
			body = referenceBody(t, rec.block)
		}
		want := referenceWords(t, body, sel)
		p, r, f := wordScores(strings.Fields(page.Text), want)
		t.Logf("%-44s P %.3f R %.3f F1 %.3f", path, p, r, f)
		if f < 0.90 || 1-p >= 0.05 {
			t.Errorf("%s: F1 %.3f, precision %.3f (want F1 >= 0.90, precision > 0.95)", path, f, p)
		}
	}
	if pages != len(warcjsMain) {
		t.Errorf("%d pages, want %d", pages, len(warcjsMain))
	}
	// valgrind/html/FAQ.html is a title page with a table of contents
	// only: no main text.
	want := map[string]int{RuleRedirect: 1, RuleHTTPStatus: 1, RuleNotText: 1, RuleCrawlerRecord: 1, RuleNoText: 1}
	for k, v := range want {
		if rules[k] != v {
			t.Errorf("rule %s: %d records, want %d (all: %v)", k, rules[k], v, rules)
		}
	}
}
