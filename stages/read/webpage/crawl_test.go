package webpage

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"golang.org/x/net/html"
	"golang.org/x/net/html/charset"
)

// The crawl: testdata/webcrawl/crawl.warc.gz holds HTML documentation
// pages that Debian 12 packages ship under /usr/share/doc, served by
// Python's http.server on 127.0.0.1 and saved by GNU Wget 1.21.3 with
// --warc-file (testdata/webcrawl/build.sh; licences beside it).
//
// The check: for each page, the main content element was chosen by hand
// from the page's structure (mainOf below); its text, taken by a different
// route (golang.org/x/net/html's tree parser, not the tokenizer, and all
// text nodes under the element), is the reference. The extracted text is
// compared word by word as multisets (precision, recall and F1 over word
// occurrences: common practice in evaluating boilerplate removal).
// Required: F1 >= 0.90 on every page, and navigation/footer text under 5%
// of the output, measured as the share of output words that the main
// element does not account for (1 - precision).
const crawlWARC = "../../../testdata/webcrawl/crawl.warc.gz"

// mainSel picks a page's main content element: the first element with tag
// and, when attr is set, that attribute equal to val (class matches one of
// the classes); drop lists elements inside it that are not content.
type mainSel struct {
	tag, attr, val string
	drop           []mainSel
	up             string // then the nearest ancestor with this tag
	nth            int    // skip this many earlier matches
}

// mainOf names, per page, the element holding the article body.
var mainOf = map[string]mainSel{
	// Sphinx 5 (python3-doc): <div class="body" role="main">.
	"python3-doc/html/tutorial/appetite.html":      {tag: "div", attr: "role", val: "main"},
	"python3-doc/html/tutorial/venv.html":          {tag: "div", attr: "role", val: "main"},
	"python3-doc/html/tutorial/floatingpoint.html": {tag: "div", attr: "role", val: "main"},
	// DocBook XSL (debian-reference): the appendix/preface division.
	"debian-reference-en/docs/apa.en.html":  {tag: "div", attr: "class", val: "appendix"},
	"debian-reference-en/docs/pr01.en.html": {tag: "div", attr: "class", val: "preface"},
	// Node.js API docs: <div role="main" id="apicontent">.
	"nodejs/api/corepack.html": {tag: "div", attr: "id", val: "apicontent"},
	"nodejs/api/synopsis.html": {tag: "div", attr: "id", val: "apicontent"},
	// DocBook XSL (valgrind): the article/chapter division.
	"valgrind/html/quick-start.html":  {tag: "div", attr: "class", val: "article"},
	"valgrind/html/manual-intro.html": {tag: "div", attr: "class", val: "chapter"},
	// Texinfo (libffi): the chapter/section division without its
	// navigation header.
	"libffi8/html/Introduction.html": {tag: "div", attr: "class", val: "chapter", drop: []mainSel{{tag: "div", attr: "class", val: "header"}}},
	"libffi8/html/The-Basics.html":   {tag: "div", attr: "class", val: "section", drop: []mainSel{{tag: "div", attr: "class", val: "header"}}},
	// Hand-written HTML 3.2 (zlib, ISO-8859-1): the body without the
	// closing copyright line.
	"zlib1g-dev/examples/zlib_how.html": {tag: "body", drop: []mainSel{{tag: "i"}}},
	// DocBook DSSSL (base-passwd): the book division.
	"base-passwd/users-and-groups.html": {tag: "div", attr: "class", val: "BOOK"},
	// libxml-style API page (libxslt, ISO-8859-1, table layout with a
	// navigation column):
	// the table cell of the layout table that holds the second <h2> (the
	// first is the site banner's), without its navigation table.
	"libxslt1-dev/html/html/libxslt-templates.html": {tag: "h2", nth: 1, up: "td", drop: []mainSel{{tag: "table", attr: "class", val: "navigation"}}},
	// Texinfo single page (bc): the body without the per-node
	// navigation headers and the table of contents.
	"bc/bc.html": {tag: "body", drop: []mainSel{{tag: "div", attr: "class", val: "header"}, {tag: "div", attr: "class", val: "contents"}}},
}

// permalinks are the heading permalink signs of Sphinx (a.headerlink "¶")
// and the Node.js docs (a.mark "#"): page furniture, not content, on
// every page that has them.
var permalinks = []mainSel{{tag: "a", attr: "class", val: "headerlink"}, {tag: "a", attr: "class", val: "mark"}}

// charsetOf lists the pages not in UTF-8: they declare ISO-8859-1 in a
// <meta> element, which the WHATWG Encoding Standard maps to windows-1252.
var charsetOf = map[string]string{
	"zlib1g-dev/examples/zlib_how.html":             "windows-1252",
	"libxslt1-dev/html/html/libxslt-templates.html": "windows-1252",
}

// crawlPath returns the path below /usr/share/doc of a crawled URL.
func crawlPath(uri string) string {
	path := uri[strings.Index(uri, "/127.0.0.1:")+len("/127.0.0.1:"):]
	return path[strings.IndexByte(path, '/')+1:]
}

func (s mainSel) match(n *html.Node) bool {
	if n.Type != html.ElementNode || n.Data != s.tag {
		return false
	}
	if s.attr == "" {
		return true
	}
	for _, a := range n.Attr {
		if a.Key != s.attr {
			continue
		}
		if s.attr == "class" {
			for _, c := range strings.Fields(a.Val) {
				if strings.EqualFold(c, s.val) {
					return true
				}
			}
			return false
		}
		return a.Val == s.val
	}
	return false
}

func findNode(n *html.Node, s mainSel) *html.Node {
	skip := s.nth
	return findNth(n, s, &skip)
}

func findNth(n *html.Node, s mainSel, skip *int) *html.Node {
	if s.match(n) {
		if *skip == 0 {
			return n
		}
		*skip--
	}
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		if m := findNth(c, s, skip); m != nil {
			return m
		}
	}
	return nil
}

// refBlock are the elements that browsers render as blocks (HTML Living
// Standard §15.3, the user-agent style sheet) plus <br>: text on either
// side of them is not one word.
var refBlock = map[string]bool{}

func init() {
	for _, t := range strings.Fields(`address article aside blockquote body br caption center dd details dialog
		div dl dt fieldset figcaption figure footer form h1 h2 h3 h4 h5 h6 header hgroup hr html legend li
		main menu nav ol optgroup option p pre section summary table tbody td tfoot th thead title tr ul`) {
		refBlock[t] = true
	}
}

// nodeText writes the text of every text node under n, skipping scripts,
// styles and the dropped elements, with a space at block boundaries.
func nodeText(n *html.Node, drop []mainSel, b *strings.Builder) {
	if n.Type == html.TextNode {
		b.WriteString(n.Data)
		return
	}
	if n.Type == html.ElementNode {
		switch n.Data {
		case "script", "style", "noscript", "template":
			return
		}
		for _, d := range drop {
			if d.match(n) {
				return
			}
		}
		if refBlock[n.Data] {
			b.WriteByte(' ')
			defer b.WriteByte(' ')
		}
	}
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		nodeText(c, drop, b)
	}
}

// referenceWords returns the words of the page's main element.
func referenceWords(t *testing.T, body []byte, sel mainSel) []string {
	r, err := charset.NewReader(bytes.NewReader(body), "text/html")
	if err != nil {
		t.Fatal(err)
	}
	doc, err := html.Parse(r)
	if err != nil {
		t.Fatal(err)
	}
	m := findNode(doc, sel)
	if m != nil && sel.up != "" {
		for m != nil && !(m.Type == html.ElementNode && m.Data == sel.up) {
			m = m.Parent
		}
	}
	if m == nil {
		t.Fatalf("main element %+v not found", sel)
	}
	var b strings.Builder
	nodeText(m, append(sel.drop, permalinks...), &b)
	return strings.Fields(b.String())
}

// wordScores returns precision, recall and F1 of got against want, both
// taken as multisets of words.
func wordScores(got, want []string) (p, r, f float64) {
	bag := map[string]int{}
	for _, w := range want {
		bag[w]++
	}
	match := 0
	for _, w := range got {
		if bag[w] > 0 {
			bag[w]--
			match++
		}
	}
	if len(got) == 0 || len(want) == 0 {
		return 0, 0, 0
	}
	p = float64(match) / float64(len(got))
	r = float64(match) / float64(len(want))
	if p+r == 0 {
		return p, r, 0
	}
	return p, r, 2 * p * r / (p + r)
}

func TestCrawlMainTextF1(t *testing.T) {
	recs := readWARC(t, crawlWARC)
	seen := 0
	var sumF float64
	for _, rec := range recs {
		if rec.typ != "response" {
			continue
		}
		path := crawlPath(rec.uri)
		sel, ok := mainOf[path]
		if !ok {
			continue
		}
		seen++
		page, rule, err := FromWARCResponse(rec.block, rec.uri, rec.date, Options{})
		if err != nil || rule != "" {
			t.Errorf("%s: rule %q, err %v", path, rule, err)
			continue
		}
		want := referenceWords(t, pageBody(t, rec.block), sel)
		got := strings.Fields(page.Text)
		p, r, f := wordScores(got, want)
		sumF += f
		t.Logf("%-48s words %5d/%5d  P %.3f  R %.3f  F1 %.3f  lang %q charset %s", path, len(got), len(want), p, r, f, page.Lang, page.Charset)
		if f < 0.90 {
			t.Errorf("%s: F1 %.3f < 0.90", path, f)
		}
		if 1-p >= 0.05 {
			t.Errorf("%s: %.1f%% of the output is outside the main element (want < 5%%)", path, 100*(1-p))
		}
		if wantCS := charsetOf[path]; page.Charset != wantCS && !(wantCS == "" && page.Charset == "utf-8") {
			t.Errorf("%s: charset %s, want %s", path, page.Charset, wantCS)
		}
		if page.Title == "" || page.URL != rec.uri || page.Date != rec.date || page.Status != 200 || page.ContentType != "text/html" {
			t.Errorf("%s: meta %+v", path, fmt.Sprintf("title %q url %q date %q status %d type %q", page.Title, page.URL, page.Date, page.Status, page.ContentType))
		}
	}
	if seen != len(mainOf) {
		t.Fatalf("found %d of the %d pages in %s", seen, len(mainOf), crawlWARC)
	}
	t.Logf("mean F1 %.3f over %d pages", sumF/float64(seen), seen)
}

// TestCrawlRecordsByRule sorts every record of the wget crawl: the 15
// pages give text, and the rest is skipped by rule: the 301 (a redirect,
// requested without following it), the 404, the PNG and the CSS file, and
// Wget's manifest (a metadata record), argument list and log (resource
// records under metadata://gnu.org/software/wget/warc/).
func TestCrawlRecordsByRule(t *testing.T) {
	got := map[string]int{}
	for _, rec := range readWARC(t, crawlWARC) {
		_, rule, doc, err := rec.page()
		if !doc {
			continue
		}
		if err != nil {
			t.Fatalf("%s: %v", rec.uri, err)
		}
		if rule == "" {
			rule = "page"
		}
		got[rule]++
	}
	want := map[string]int{"page": 15, RuleRedirect: 1, RuleHTTPStatus: 1, RuleNotText: 2, RuleCrawlerRecord: 3}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("records by rule %v, want %v", got, want)
	}
}
