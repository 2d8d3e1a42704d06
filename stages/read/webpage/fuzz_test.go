package webpage

import (
	"html"
	"slices"
	"strings"
	"testing"
	"unicode/utf8"
)

var fuzzSeeds = []string{
	larkspurPage,
	"<p>a<b>b</b>c</p><pre>\n x\n\ty</pre><br><br>z",
	"<div role=navigation><div>x</div></div>after",
	"<a href=x>link <a>nested</a></a><p>text",
	"<svg><p>inside</p></svg></p>out",
	"<title>t</title><title>u</title><h1>h<p>p</h1>",
	"<table><td>1<td>2<tr><th>3</table>",
	"<pre>a<pre>b</pre>c</pre>",
	"<p>caf\xe9 \xff\xfe</p>",
	"<p>nul\x00here</p><pre>a\x00b</pre>",
	"<meta charset=shift_jis><p>\x83\x89\x81[\x83N</p>",
	"<script><p>not text</p>",
	"<h2>T<a href=#t>x<p>¶</a></h2>",
	"<h2><a href=#t>¶</a>T<a href=#u><div>#</div></a></h2><p>after",
	"",
}

// FuzzFromHTML checks properties of the extraction on any input:
// the text and title are valid UTF-8 and the text has no NUL; the same input gives the same page
// twice (the pooled state leaks nothing); classified output lines are a
// subsequence of the lines kept without classification (boilerplate
// removal only removes blocks); and extraction is idempotent on words:
// the output, written back as one HTML paragraph per line, extracts to the
// same words.
func FuzzFromHTML(f *testing.F) {
	for _, s := range fuzzSeeds {
		f.Add([]byte(s))
	}
	for _, rec := range readWARC(f, crawlWARC)[:12] {
		if rec.typ == "response" {
			f.Add(pageBody(f, rec.block))
		}
	}
	f.Fuzz(func(t *testing.T, doc []byte) {
		all, _, err := FromHTML(doc, "", Options{KeepBoilerplate: true})
		if err != nil {
			t.Fatal(err)
		}
		if !utf8.ValidString(all.Text) || !utf8.ValidString(all.Title) || strings.IndexByte(all.Text, 0) >= 0 {
			t.Fatalf("invalid UTF-8: %q / %q", all.Text, all.Title)
		}
		again, _, _ := FromHTML(doc, "", Options{KeepBoilerplate: true})
		if again != all {
			t.Fatalf("second run differs:\n%q\n%q", again.Text, all.Text)
		}
		main, _, _ := FromHTML(doc, "", Options{})
		if !utf8.ValidString(main.Text) {
			t.Fatalf("invalid UTF-8: %q", main.Text)
		}
		if main.Text != "" && !isSubsequence(blockLines(main.Text), blockLines(all.Text)) {
			t.Fatalf("classified output is not a subsequence of the blocks:\n%q\n%q", main.Text, all.Text)
		}
		var b strings.Builder
		b.WriteString("<!DOCTYPE html><meta charset=utf-8>")
		for _, l := range strings.Split(all.Text, "\n") {
			b.WriteString("<p>" + html.EscapeString(l) + "</p>\n")
		}
		back, _, _ := FromHTML([]byte(b.String()), "text/html; charset=utf-8", Options{KeepBoilerplate: true})
		if !slices.Equal(strings.Fields(back.Text), strings.Fields(all.Text)) {
			t.Fatalf("not idempotent:\n%q\n%q", all.Text, back.Text)
		}
	})
}

func blockLines(s string) []string { return strings.Split(s, "\n") }

func isSubsequence(sub, of []string) bool {
	j := 0
	for _, x := range of {
		if j < len(sub) && sub[j] == x {
			j++
		}
	}
	return j == len(sub)
}

// FuzzFromWARCResponse feeds arbitrary response blocks: no panic, and a
// page that is returned has text, valid UTF-8, and a 2xx status.
func FuzzFromWARCResponse(f *testing.F) {
	f.Add([]byte("HTTP/1.1 200 OK\r\nContent-Type: text/html\r\n\r\n" + larkspurPage))
	f.Add([]byte("HTTP/1.1 200 OK\r\nTransfer-Encoding: chunked\r\n\r\n5\r\nhello\r\n0\r\n\r\n"))
	f.Add([]byte("HTTP/1.1 200 OK\r\nContent-Encoding: gzip, br\r\n\r\n\x1f\x8b"))
	f.Add([]byte("HTTP/2 301\r\nLocation: /\r\n\r\n"))
	for _, rec := range readWARC(f, warcjsWARC) {
		if rec.typ == "response" {
			f.Add(rec.block)
		}
	}
	f.Fuzz(func(t *testing.T, msg []byte) {
		p, rule, err := FromWARCResponse(msg, "u", "d", Options{MaxBytes: 1 << 20})
		if err != nil || rule != "" {
			return
		}
		if p.Text == "" || !utf8.ValidString(p.Text) || p.Status < 200 || p.Status > 299 {
			t.Fatalf("page %+v", p)
		}
	})
}
