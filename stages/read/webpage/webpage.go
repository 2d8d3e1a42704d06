// Package webpage turns a web page as a crawler saved it (an HTTP response
// in a WARC record, or an HTML file or string) into the page's main text.
//
// The steps are those of a browser up to layout, then a boilerplate
// classifier:
//
//  1. HTTP: the status line and header fields are read, the body is
//     un-chunked (Transfer-Encoding: chunked, RFC 9112 §7.1) and
//     decompressed (Content-Encoding gzip, deflate, br, zstd; RFC 9110
//     §8.4).
//  2. Charset: a byte-order mark, the charset parameter of Content-Type,
//     a <meta charset> or <meta http-equiv> in the first 1024 bytes (the
//     WHATWG prescan, as golang.org/x/net/html/charset does it), then
//     detection: a body that is valid UTF-8 is UTF-8, anything else is
//     windows-1252 (the WHATWG default for unlabelled pages). The text
//     comes out as UTF-8.
//  3. HTML: golang.org/x/net/html tokenizes the page (the HTML5
//     tokenization algorithm); the page is cut into blocks at block-level
//     tags as Pomikálek 2011 (PhD thesis "Removing Boilerplate and
//     Duplicate Content from Web Corpora", ch. 3) does. script, style,
//     templates, nav, forms, and elements whose ARIA role is navigation,
//     search, banner or contentinfo are dropped whole.
//  4. Boilerplate: each block is classified by its length, link density
//     and stop-word density, then revised by its neighbours, with the
//     thesis's algorithm and default parameters (see classify.go).
//
// The kept blocks become lines: headings, paragraphs, list items and table
// cells one line each, <pre> blocks as they are.
//
// A record that holds no page text is not an error but a skip with a rule
// name (the Rule* constants), which the caller counts.
package webpage

import (
	"net/http"
	"strings"
)

// Skip rules: why a record gave no document.
const (
	// RuleHTTPStatus: the response's status is not 2xx or 3xx.
	RuleHTTPStatus = "http_status"
	// RuleRedirect: the response is a 3xx redirect.
	RuleRedirect = "redirect"
	// RuleNotText: the content type is not HTML, XHTML, plain text or
	// Markdown.
	RuleNotText = "not_text"
	// RuleCrawlerRecord: the record is the crawler's own bookkeeping (its
	// argument list, its log, a manifest), not a page it fetched.
	RuleCrawlerRecord = "crawler_record"
	// RuleNoText: the page holds no text once boilerplate is removed.
	RuleNoText = "no_text"
	// RuleTooLarge: the body, once decompressed, exceeds Options.MaxBytes.
	RuleTooLarge = "too_large"
)

// Rules lists every skip rule, in the order reports print them.
var Rules = []string{RuleHTTPStatus, RuleRedirect, RuleNotText, RuleCrawlerRecord, RuleNoText, RuleTooLarge}

// DefaultMaxBytes bounds a decompressed body when Options.MaxBytes is 0:
// larger pages are skipped as too_large (a decompression bomb cannot grow
// memory past this).
const DefaultMaxBytes = 16 << 20

// Options tunes the extraction. The zero value is ready to use.
type Options struct {
	// MaxBytes bounds the decompressed body (DefaultMaxBytes when 0).
	MaxBytes int
	// Lang is the ISO 639-1 code of the stop-word list to classify with;
	// when empty, the page's <html lang> or Content-Language is used, then
	// English, and pages where English stop words are too rare are
	// classified without stop words (see classify.go).
	Lang string
	// KeepBoilerplate keeps every block (no classification): the whole
	// visible text of the page, as lines.
	KeepBoilerplate bool
}

func (o Options) maxBytes() int {
	if o.MaxBytes > 0 {
		return o.MaxBytes
	}
	return DefaultMaxBytes
}

// Page is the text of one web page and what is known about it.
type Page struct {
	// Text is the main text, UTF-8, one block per line.
	Text string
	// Title is the text of <title>, whitespace collapsed.
	Title string
	// URL is the address the page was fetched from (WARC-Target-URI).
	URL string
	// Date is when it was fetched (WARC-Date), as the record has it.
	Date string
	// Status is the HTTP status code (0 when there was no HTTP envelope).
	Status int
	// ContentType is the media type, lower case, without parameters.
	ContentType string
	// Charset is the name of the encoding the bytes were decoded from.
	Charset string
	// Lang is the stop-word language the page was classified with ("" in
	// the language-independent mode).
	Lang string
}

// FromWARCResponse extracts the page held by the block of a WARC
// "response" record: an HTTP response message (status line, header
// fields, body). It returns the page, or the name of the rule that skips
// the record, or an error for a message it cannot parse (a malformed status
// line, a broken chunked or compressed body).
func FromWARCResponse(payload []byte, targetURI, warcDate string, opt Options) (Page, string, error) {
	resp, err := parseResponse(payload)
	if err != nil {
		return Page{}, "", err
	}
	p := Page{URL: targetURI, Date: warcDate, Status: resp.status}
	switch {
	case resp.status >= 300 && resp.status < 400:
		return p, RuleRedirect, nil
	case resp.status < 200 || resp.status >= 300:
		return p, RuleHTTPStatus, nil
	}
	body, err := resp.decodedBody(opt.maxBytes())
	if err == errTooLarge {
		return p, RuleTooLarge, nil
	}
	if err != nil {
		return p, "", err
	}
	return fromBody(p, body, resp.header("content-type"), resp.header("content-language"), opt)
}

// FromWARCResource extracts the page held by the block of a WARC
// "resource" record (the document itself, no HTTP envelope); contentType is
// the record's Content-Type.
func FromWARCResource(block []byte, contentType, targetURI, warcDate string, opt Options) (Page, string, error) {
	p := Page{URL: targetURI, Date: warcDate}
	if len(block) > opt.maxBytes() {
		return p, RuleTooLarge, nil
	}
	return fromBody(p, block, contentType, "", opt)
}

// FromHTML extracts the main text of an HTML document given as bytes (a
// .html file, or a JSON/Parquet field that holds HTML). contentType may be
// empty; a string already decoded to UTF-8 should pass
// "text/html; charset=utf-8".
func FromHTML(doc []byte, contentType string, opt Options) (Page, string, error) {
	if len(doc) > opt.maxBytes() {
		return Page{}, RuleTooLarge, nil
	}
	if contentType == "" {
		contentType = "text/html"
	}
	return fromBody(Page{}, doc, contentType, "", opt)
}

// IsCrawlerRecord reports whether a WARC record of type warcType with
// target URI uri is the crawler's own bookkeeping rather than something it
// fetched: every "metadata" record, and "resource" records whose URI is
// not a web or file address (GNU Wget stores its arguments and log as
// resource records under metadata://gnu.org/software/wget/warc/...).
// Resource records without a URI are not judged here.
func IsCrawlerRecord(warcType, uri string) bool {
	switch strings.ToLower(warcType) {
	case "metadata":
		return true
	case "resource":
		uri = strings.Trim(uri, "<>")
		if uri == "" {
			return false
		}
		scheme, _, ok := strings.Cut(uri, ":")
		if !ok {
			return false
		}
		switch strings.ToLower(scheme) {
		case "http", "https", "ftp", "file":
			return false
		}
		return true
	}
	return false
}

// mediaType returns the lower-case media type of a Content-Type value.
func mediaType(ct string) string {
	mt, _, _ := strings.Cut(ct, ";")
	return strings.ToLower(strings.TrimSpace(mt))
}

// kind sorts media types: HTML pages, plain text, or neither.
type kind int

const (
	kindOther kind = iota
	kindHTML
	kindPlain
)

func kindOf(mt string) kind {
	switch mt {
	case "text/html", "application/xhtml+xml", "application/xhtml":
		return kindHTML
	case "text/plain", "text/markdown", "text/x-markdown":
		return kindPlain
	}
	return kindOther
}

// fromBody decodes and extracts a body whose Content-Type is ct; a missing
// or generic type is sniffed with net/http.DetectContentType (the WHATWG
// MIME sniffing algorithm).
func fromBody(p Page, body []byte, ct, contentLang string, opt Options) (Page, string, error) {
	mt := mediaType(ct)
	if mt == "" || mt == "application/octet-stream" || mt == "unknown/unknown" {
		ct = http.DetectContentType(body)
		mt = mediaType(ct)
	}
	p.ContentType = mt
	k := kindOf(mt)
	if k == kindOther {
		return p, RuleNotText, nil
	}
	text, name := decodeCharset(body, ct, k == kindHTML)
	p.Charset = name
	if k == kindPlain {
		// NUL is no text character: U+FFFD marks where one was.
		p.Text = plainText(strings.ReplaceAll(text, "\x00", "\ufffd"))
	} else {
		// The HTML tree builder ignores U+0000 in text (HTML Living
		// Standard §13.2.6.4.7); the tokenizer passes it on.
		if strings.IndexByte(text, 0) >= 0 {
			text = strings.ReplaceAll(text, "\x00", "")
		}
		ex := getExtractor()
		defer putExtractor(ex)
		lang := opt.Lang
		ex.run(text, opt, lang, contentLang)
		p.Title = ex.titleText()
		p.Lang = ex.usedLang
		p.Text = ex.output()
	}
	if p.Text == "" {
		return p, RuleNoText, nil
	}
	return p, "", nil
}

// plainText trims trailing spaces from the lines of a plain-text body and
// drops blank lines at its ends.
func plainText(s string) string {
	lines := strings.Split(strings.ReplaceAll(s, "\r\n", "\n"), "\n")
	var b strings.Builder
	for _, l := range lines {
		l = strings.TrimRight(l, " \t\r\f\v")
		if b.Len() > 0 || l != "" {
			b.WriteString(l)
			b.WriteByte('\n')
		}
	}
	return strings.TrimRight(b.String(), "\n")
}
