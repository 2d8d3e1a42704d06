package read

import (
	"fmt"
	"strings"
	"testing"
)

// The two real WARC files of testdata: one written by GNU Wget 1.21.3
// crawling Debian documentation pages from a loopback web server
// (testdata/webcrawl), one written by the npm package warcio 2.4.11
// (testdata/warcjs). Each HTML page must give one document with its main
// text (package webpage checks the text against each page's main element),
// and every other record must be skipped by a named rule.
func TestReadRealWARCs(t *testing.T) {
	cases := []struct {
		path  string
		pages int
		skips map[string]int
	}{
		{"../../testdata/webcrawl/crawl.warc.gz", 15,
			map[string]int{"redirect": 1, "http_status": 1, "not_text": 2, "crawler_record": 3}},
		{"../../testdata/warcjs/pages.warc.gz", 6,
			map[string]int{"redirect": 1, "http_status": 1, "not_text": 1, "crawler_record": 1, "no_text": 1}},
	}
	for _, c := range cases {
		recs, err := readAll(t, c.path, ReadOptions{Source: "crawl"})
		if err != nil {
			t.Fatalf("%s: %v", c.path, err)
		}
		pages := 0
		skips := map[string]int{}
		for _, r := range recs {
			switch {
			case r.Doc != nil && r.Issue == nil:
				pages++
				d := r.Doc
				url, _ := d.Meta["url"].(string)
				title, _ := d.Meta["title"].(string)
				if len(d.Text) < 200 || title == "" || !strings.HasPrefix(url, "http") && !strings.HasPrefix(url, "file:") || d.Meta["date"] == nil {
					t.Errorf("%s: page %s: title %q, %d bytes of text, meta %v", c.path, d.ID, title, len(d.Text), d.Meta)
				}
				if strings.HasPrefix(url, "http") && d.Meta["status"] != 200 {
					t.Errorf("%s: %s: status %v", c.path, url, d.Meta["status"])
				}
			case r.Issue != nil && r.Issue.Skip && r.Doc == nil:
				skips[r.Issue.Rule]++
				if r.Issue.DocID == "" || r.Issue.Line == 0 {
					t.Errorf("%s: skip record without id or record number: %+v", c.path, r.Issue)
				}
			default:
				t.Errorf("%s: unexpected record %+v %+v", c.path, r.Doc, r.Issue)
			}
		}
		if pages != c.pages || fmt.Sprint(skips) != fmt.Sprint(c.skips) {
			t.Errorf("%s: %d pages, skips %v; want %d pages, skips %v", c.path, pages, skips, c.pages, c.skips)
		}
	}
}
