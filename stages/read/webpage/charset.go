package webpage

import (
	"bytes"
	"strings"
	"unicode/utf8"

	"golang.org/x/net/html/charset"
	"golang.org/x/text/encoding"
	"golang.org/x/text/encoding/charmap"
)

// decodeCharset returns body as UTF-8 and the name of the encoding it was
// read in. The order is the WHATWG encoding sniffing algorithm's (HTML
// Living Standard §13.2.3.2): byte-order mark, the transport's charset
// parameter, the <meta> prescan of the first 1024 bytes (only for HTML),
// then detection. golang.org/x/net/html/charset does the first three; its
// detection looks at 1024 bytes only, so an unlabelled body is re-checked
// whole: valid UTF-8 is UTF-8, anything else windows-1252. Bytes invalid in
// the chosen encoding become U+FFFD.
func decodeCharset(body []byte, contentType string, isHTML bool) (string, string) {
	var e encoding.Encoding
	var name string
	var certain bool
	if isHTML {
		e, name, certain = charset.DetermineEncoding(body, contentType)
	} else {
		e, name, certain = plainEncoding(body, contentType)
	}
	if !certain && name == "windows-1252" && !(isHTML && declaresCharset(body)) && utf8.Valid(body) {
		name, e = "utf-8", encoding.Nop
	}
	if name == "utf-8" || e == encoding.Nop || e == nil {
		// Skip a UTF-8 byte-order mark.
		s := strings.TrimPrefix(string(body), "\ufeff")
		if !utf8.ValidString(s) {
			s = strings.ToValidUTF8(s, "\ufffd")
		}
		return s, "utf-8"
	}
	out, err := e.NewDecoder().Bytes(body)
	if err != nil {
		// Decoders of x/text replace invalid input and do not fail; keep
		// the text readable if one ever does.
		return strings.ToValidUTF8(string(body), "\ufffd"), name
	}
	s := strings.TrimPrefix(string(out), "\ufeff")
	if !utf8.ValidString(s) {
		s = strings.ToValidUTF8(s, "\ufffd")
	}
	return s, name
}

// declaresCharset reports whether the first 1024 bytes (the prescan's
// window) mention a charset: a page that names its encoding is read in it,
// as browsers do, even when its bytes would also be valid UTF-8.
func declaresCharset(body []byte) bool {
	head := body[:min(len(body), 1024)]
	for i := 0; i+7 <= len(head); i++ {
		if head[i]|0x20 == 'c' && bytes.EqualFold(head[i:i+7], []byte("charset")) {
			return true
		}
	}
	return false
}

// plainEncoding is DetermineEncoding without the <meta> prescan (a plain
// text body has no markup to believe).
func plainEncoding(body []byte, contentType string) (encoding.Encoding, string, bool) {
	if len(body) >= 2 && (body[0] == 0xfe && body[1] == 0xff || body[0] == 0xff && body[1] == 0xfe) ||
		len(body) >= 3 && body[0] == 0xef && body[1] == 0xbb && body[2] == 0xbf {
		return charset.DetermineEncoding(body[:min(len(body), 3)], "")
	}
	if _, params, ok := strings.Cut(contentType, ";"); ok {
		for _, p := range strings.Split(params, ";") {
			k, v, _ := strings.Cut(p, "=")
			if strings.EqualFold(strings.TrimSpace(k), "charset") {
				if e, name := charset.Lookup(strings.Trim(strings.TrimSpace(v), `"'`)); e != nil {
					return e, name, true
				}
			}
		}
	}
	return charmap.Windows1252, "windows-1252", false
}
