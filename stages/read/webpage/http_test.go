package webpage

import (
	"bufio"
	"bytes"
	"compress/flate"
	"compress/gzip"
	"compress/zlib"
	"fmt"
	"io"
	"net/http"
	"net/http/httputil"
	"strings"
	"testing"

	"github.com/andybalholm/brotli"
	"github.com/klauspost/compress/zstd"
	"golang.org/x/text/encoding/charmap"
	"golang.org/x/text/encoding/japanese"
)

const larkspurPage = `<!DOCTYPE html><html lang="en"><head><title>Hull survey — Larkspur Marine Works</title></head>
<body><nav><a href="/">Home</a> <a href="/yard">Yard</a></nav>
<h1>Hull survey</h1>
<p>Every boat that comes into the yard for winter storage is hauled out, pressure washed and surveyed before it goes on the stands, so that the owner knows what the season has done to the hull, the keel and the running gear before any work is quoted.</p>
<p>The surveyor checks the keel bolts, the rudder bearings and the through-hull fittings, and taps the hull with a plastic hammer to find any soft spots in the laminate that would need drying out over the winter months before the spring antifouling.</p>
<footer>© Larkspur Marine Works</footer></body></html>`

// chunk frames b in HTTP/1.1 chunks with net/http/httputil's writer.
func chunk(t *testing.T, b []byte, size int) []byte {
	var buf bytes.Buffer
	w := httputil.NewChunkedWriter(&buf)
	for i := 0; i < len(b); i += size {
		if _, err := w.Write(b[i:min(i+size, len(b))]); err != nil {
			t.Fatal(err)
		}
	}
	w.Close()
	buf.WriteString("\r\n") // end of the (empty) trailer section
	return buf.Bytes()
}

func compress(t *testing.T, coding string, b []byte) []byte {
	var buf bytes.Buffer
	var w io.WriteCloser
	switch coding {
	case "gzip":
		w = gzip.NewWriter(&buf)
	case "deflate":
		w = zlib.NewWriter(&buf)
	case "rawdeflate":
		w, _ = flate.NewWriter(&buf, 5)
	case "br":
		w = brotli.NewWriter(&buf)
	case "zstd":
		w, _ = zstd.NewWriter(&buf)
	}
	if _, err := w.Write(b); err != nil {
		t.Fatal(err)
	}
	w.Close()
	return buf.Bytes()
}

// TestDecodedBodyAgreesWithNetHTTP frames and compresses a page every way
// the extractor handles, with the standard library's and the codecs' own
// writers, and checks that the status, header fields and un-chunked body
// agree with net/http.ReadResponse and that decompression restores the
// page byte for byte.
func TestDecodedBodyAgreesWithNetHTTP(t *testing.T) {
	page := []byte(larkspurPage)
	for _, coding := range []string{"", "gzip", "deflate", "rawdeflate", "br", "zstd"} {
		for _, chunked := range []bool{false, true} {
			body := page
			hdr := "Content-Type: text/html; charset=utf-8\r\n"
			if coding != "" {
				body = compress(t, coding, page)
				name := coding
				if coding == "rawdeflate" {
					name = "deflate"
				}
				hdr += "Content-Encoding: " + name + "\r\n"
			}
			if chunked {
				body = chunk(t, body, 37)
				hdr += "Transfer-Encoding: chunked\r\n"
			} else {
				hdr += fmt.Sprintf("Content-Length: %d\r\n", len(body))
			}
			msg := append([]byte("HTTP/1.1 200 OK\r\n"+hdr+"\r\n"), body...)
			name := fmt.Sprintf("%s/chunked=%v", coding, chunked)

			ref, err := http.ReadResponse(bufio.NewReader(bytes.NewReader(msg)), nil)
			if err != nil {
				t.Fatal(err)
			}
			refBody, _ := io.ReadAll(ref.Body)
			r, err := parseResponse(msg)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if r.status != ref.StatusCode || r.header("content-encoding") != ref.Header.Get("Content-Encoding") {
				t.Errorf("%s: status %d %q, net/http %d %q", name, r.status, r.header("content-encoding"), ref.StatusCode, ref.Header.Get("Content-Encoding"))
			}
			got, err := r.decodedBody(DefaultMaxBytes)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if !bytes.Equal(got, page) {
				t.Errorf("%s: decoded body differs from the page", name)
			}
			if coding == "" && !bytes.Equal(got, refBody) {
				t.Errorf("%s: body differs from net/http's", name)
			}
			p, rule, err := FromWARCResponse(msg, "http://larkspur.test/survey", "2026-12-02T10:00:00Z", Options{})
			if err != nil || rule != "" || !strings.HasPrefix(p.Text, "Hull survey\nEvery boat") {
				t.Errorf("%s: rule %q err %v text %q", name, rule, err, p.Text)
			}
		}
	}
}

func TestSkipRules(t *testing.T) {
	ok := "Content-Type: text/html\r\n\r\n" + larkspurPage
	cases := []struct {
		msg, rule string
		opt       Options
	}{
		{"HTTP/1.1 200 OK\r\n" + ok, "", Options{}},
		{"HTTP/1.1 404 Not Found\r\n" + ok, RuleHTTPStatus, Options{}},
		{"HTTP/1.1 503 Service Unavailable\r\n" + ok, RuleHTTPStatus, Options{}},
		{"HTTP/1.1 301 Moved Permanently\r\nLocation: /x\r\n\r\n", RuleRedirect, Options{}},
		{"HTTP/1.1 200 OK\r\nContent-Type: image/png\r\n\r\n\x89PNG\r\n", RuleNotText, Options{}},
		{"HTTP/1.1 200 OK\r\nContent-Type: application/pdf\r\n\r\n%PDF-1.4", RuleNotText, Options{}},
		{"HTTP/1.1 200 OK\r\n\r\n\x89PNG\r\n\x1a\n\x00\x00", RuleNotText, Options{}}, // sniffed
		{"HTTP/1.1 200 OK\r\nContent-Type: text/html\r\n\r\n<html><body><script>var x = 1;</script></body></html>", RuleNoText, Options{}},
		{"HTTP/1.1 200 OK\r\n" + ok, RuleTooLarge, Options{MaxBytes: 100}},
		{"HTTP/1.1 200 OK\r\nContent-Type: text/plain\r\n\r\nMooring fees are due in April.\r\n", "", Options{}},
	}
	for _, c := range cases {
		_, rule, err := FromWARCResponse([]byte(c.msg), "u", "d", c.opt)
		if err != nil || rule != c.rule {
			t.Errorf("%.40q: rule %q err %v, want %q", c.msg, rule, err, c.rule)
		}
	}
	// A compression bomb stops at the limit.
	big := compress(t, "gzip", bytes.Repeat([]byte("a"), 1<<20))
	msg := append([]byte("HTTP/1.1 200 OK\r\nContent-Type: text/plain\r\nContent-Encoding: gzip\r\n\r\n"), big...)
	if _, rule, err := FromWARCResponse(msg, "u", "d", Options{MaxBytes: 1 << 16}); rule != RuleTooLarge || err != nil {
		t.Errorf("gzip bomb: rule %q err %v", rule, err)
	}
	for _, bad := range []string{"", "GET / HTTP/1.1\r\n\r\n", "HTTP/1.1 2x0 OK\r\n\r\n",
		"HTTP/1.1 200 OK\r\nContent-Encoding: gzip\r\n\r\nnot gzip at all",
		"HTTP/1.1 200 OK\r\nContent-Encoding: compress\r\n\r\nxx"} {
		if _, _, err := FromWARCResponse([]byte(bad), "u", "d", Options{}); err == nil {
			t.Errorf("%q: want an error", bad)
		}
	}
}

func TestIsCrawlerRecord(t *testing.T) {
	cases := []struct {
		typ, uri string
		want     bool
	}{
		{"resource", "<metadata://gnu.org/software/wget/warc/wget_arguments.txt>", true},
		{"resource", "metadata://gnu.org/software/wget/warc/wget.log", true},
		{"metadata", "http://larkspur.test/", true},
		{"resource", "urn:x-log:crawl", true},
		{"resource", "http://larkspur.test/a.html", false},
		{"resource", "file:///srv/docs/a.html", false},
		{"resource", "", false},
		{"response", "metadata://x", false},
	}
	for _, c := range cases {
		if got := IsCrawlerRecord(c.typ, c.uri); got != c.want {
			t.Errorf("IsCrawlerRecord(%q, %q) = %v", c.typ, c.uri, got)
		}
	}
}

// TestCharsets encodes a page with golang.org/x/text's encoders and
// labels it every way the WHATWG sniffing order knows.
func TestCharsets(t *testing.T) {
	latin, _ := charmap.ISO8859_1.NewEncoder().String("<p>Ålesund café: boeuf bourguignon served at the Larkspur yard café every Friday évening</p>")
	sjis, _ := japanese.ShiftJIS.NewEncoder().String("<p>ラークスパー造船所の冬の保管は十月に始まります。</p>")
	cases := []struct {
		name, ct, body, want, charset string
	}{
		{"header", "text/html; charset=iso-8859-1", latin, "Ålesund café", "windows-1252"},
		{"meta", "text/html", `<meta charset="iso-8859-1">` + latin, "Ålesund café", "windows-1252"},
		{"http-equiv", "text/html", `<meta http-equiv="Content-Type" content="text/html; charset=Shift_JIS">` + sjis, "ラークスパー造船所", "shift_jis"},
		{"header beats meta", "text/html; charset=shift_jis", `<meta charset="utf-8">` + sjis, "ラークスパー造船所", "shift_jis"},
		{"bom", "text/html", "\ufeff<p>Ålesund café and more words to make it a paragraph of text</p>", "Ålesund café", "utf-8"},
		{"detected utf-8", "text/html", "<p>Ålesund café and more words to make it a paragraph of text</p>", "Ålesund café", "utf-8"},
		{"detected 1252", "text/html", latin, "Ålesund café", "windows-1252"},
		{"broken utf-8", "text/html; charset=utf-8", "<p>Ålesund \xff café</p>", "Ålesund \ufffd café", "utf-8"},
	}
	for _, c := range cases {
		p, _, err := FromHTML([]byte(c.body), c.ct, Options{KeepBoilerplate: true})
		if err != nil || !strings.Contains(p.Text, c.want) || p.Charset != c.charset {
			t.Errorf("%s: text %q charset %q err %v, want %q in %s", c.name, p.Text, p.Charset, err, c.want, c.charset)
		}
	}
}

// TestStructure checks the line layout on a small page: headings,
// paragraphs, list items and table cells one line each, <pre> as it is,
// scripts, styles, navigation, forms and heading permalinks gone.
func TestStructure(t *testing.T) {
	doc := `<html><head><title> Slipway
	 rates </title><style>p{color:red}</style></head><body>
<nav>Home | Yard</nav><div role="navigation">Menu</div>
<h2>Rates  for the <b>slipway</b><a class="headerlink" href="#rates">¶</a></h2>
<p>Hauling out
   and <i>relaunching</i> are charged per metre.</p>
<ul><li>Up to 8 m<li>Over 8 m</ul>
<table><tr><th>Length</th><td>Price</td></tr></table>
<pre>
  length  price
  8 m     120
</pre>
<form><input value="x"><button>Book now</button></form>
<script>document.write("hidden")</script>
<p>Line one<br>still one<br><br>line two</p>
</body></html>`
	p, rule, err := FromHTML([]byte(doc), "", Options{KeepBoilerplate: true})
	if err != nil || rule != "" {
		t.Fatal(rule, err)
	}
	want := "Rates for the slipway\nHauling out and relaunching are charged per metre.\nUp to 8 m\nOver 8 m\nLength\nPrice\n  length  price\n  8 m     120\nLine one still one\nline two"
	if p.Text != want {
		t.Errorf("text\n%s\nwant\n%s", p.Text, want)
	}
	if p.Title != "Slipway rates" {
		t.Errorf("title %q", p.Title)
	}
}

// TestBoilerplateRemoved checks the classifier on the Larkspur page: the
// navigation and the © footer go, the two paragraphs and the heading stay.
func TestBoilerplateRemoved(t *testing.T) {
	p, _, _ := FromHTML([]byte(strings.Replace(larkspurPage, "<nav>", "<div>", 1)), "", Options{})
	if strings.Contains(p.Text, "Home") || strings.Contains(p.Text, "©") {
		t.Errorf("boilerplate kept: %q", p.Text)
	}
	if !strings.HasPrefix(p.Text, "Hull survey\nEvery boat") || !strings.HasSuffix(p.Text, "spring antifouling.") {
		t.Errorf("content lost: %q", p.Text)
	}
}
