package webpage

import (
	"bufio"
	"bytes"
	"compress/flate"
	"compress/zlib"
	"errors"
	"fmt"
	"io"
	"net/http/httputil"
	"strconv"
	"strings"

	"github.com/andybalholm/brotli"
	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// response is an HTTP response message as a crawler stored it.
type response struct {
	status  int
	headers [][2]string // lower-case names, values as sent
	body    []byte
}

// maxHeaderFields bounds the header fields read from one message; more is
// a corrupt record.
const maxHeaderFields = 1000

var errTooLarge = errors.New("body larger than the limit")

// parseResponse reads the status line ("HTTP/1.1 200 OK"; HTTP/2 and /3
// as crawlers write them, "HTTP/2 200") and the header fields (RFC 9112
// §2-5); obsolete line folding is joined to the previous field.
func parseResponse(msg []byte) (*response, error) {
	line, rest, _ := bytes.Cut(msg, []byte("\n"))
	line = bytes.TrimRight(line, "\r")
	if !bytes.HasPrefix(line, []byte("HTTP/")) {
		return nil, fmt.Errorf("HTTP response: want a status line, got %.40q", line)
	}
	_, after, ok := bytes.Cut(line, []byte(" "))
	code := after
	if i := bytes.IndexByte(after, ' '); i >= 0 {
		code = after[:i]
	}
	st, err := strconv.Atoi(string(code))
	if !ok || err != nil || len(code) != 3 {
		return nil, fmt.Errorf("HTTP response: bad status code in %.40q", line)
	}
	r := &response{status: st}
	for {
		if len(rest) == 0 {
			// Headers without a blank line: the message has no body.
			return r, nil
		}
		line, rest, _ = bytes.Cut(rest, []byte("\n"))
		line = bytes.TrimRight(line, "\r")
		if len(line) == 0 {
			break
		}
		if (line[0] == ' ' || line[0] == '\t') && len(r.headers) > 0 {
			h := &r.headers[len(r.headers)-1]
			h[1] += " " + string(bytes.TrimSpace(line))
			continue
		}
		k, v, ok := bytes.Cut(line, []byte(":"))
		if !ok {
			continue // junk lines are ignored, as browsers do
		}
		if len(r.headers) >= maxHeaderFields {
			return nil, fmt.Errorf("HTTP response: more than %d header fields", maxHeaderFields)
		}
		r.headers = append(r.headers, [2]string{strings.ToLower(string(bytes.TrimSpace(k))), string(bytes.TrimSpace(v))})
	}
	r.body = rest
	return r, nil
}

// header returns the first value of the named field (lower case), or "".
func (r *response) header(name string) string {
	for _, h := range r.headers {
		if h[0] == name {
			return h[1]
		}
	}
	return ""
}

// tokens returns the comma-separated, lower-cased codings of every field
// called name, in order.
func (r *response) tokens(name string) []string {
	var out []string
	for _, h := range r.headers {
		if h[0] != name {
			continue
		}
		for _, t := range strings.Split(h[1], ",") {
			if t = strings.ToLower(strings.TrimSpace(t)); t != "" && t != "identity" {
				out = append(out, t)
			}
		}
	}
	return out
}

// decodedBody undoes the transfer coding and the content codings, in the
// reverse order of their listing (RFC 9110 §8.4), and returns at most
// limit bytes or errTooLarge.
func (r *response) decodedBody(limit int) ([]byte, error) {
	body := r.body
	for _, te := range r.tokens("transfer-encoding") {
		if te != "chunked" {
			continue
		}
		// Some tools store the body de-chunked but keep the header: a body
		// whose first line is not a chunk size is taken as it is.
		if !looksChunked(body) {
			break
		}
		var err error
		body, err = readLimited(httputil.NewChunkedReader(bytes.NewReader(body)), limit)
		if err != nil {
			return nil, wrapBody("chunked transfer coding", err)
		}
	}
	codings := r.tokens("content-encoding")
	for i := len(codings) - 1; i >= 0; i-- {
		var err error
		body, err = decompress(codings[i], body, limit)
		if err != nil {
			return nil, err
		}
	}
	if len(body) > limit {
		return nil, errTooLarge
	}
	return body, nil
}

func wrapBody(what string, err error) error {
	if err == errTooLarge {
		return err
	}
	return fmt.Errorf("HTTP body: %s: %w", what, err)
}

// looksChunked reports whether b starts with a chunk-size line: hex digits,
// optional chunk extensions, CRLF.
func looksChunked(b []byte) bool {
	n := 0
	for n < len(b) && n < 16 && isHex(b[n]) {
		n++
	}
	if n == 0 || n == len(b) {
		return false
	}
	switch b[n] {
	case '\r', '\n', ';', ' ', '\t':
		return true
	}
	return false
}

func isHex(c byte) bool {
	return '0' <= c && c <= '9' || 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F'
}

// readLimited reads r to its end, or returns errTooLarge past limit bytes.
func readLimited(r io.Reader, limit int) ([]byte, error) {
	b, err := io.ReadAll(io.LimitReader(r, int64(limit)+1))
	if err != nil {
		return nil, err
	}
	if len(b) > limit {
		return nil, errTooLarge
	}
	return b, nil
}

// decompress undoes one content coding.
func decompress(coding string, b []byte, limit int) ([]byte, error) {
	var rd io.Reader
	switch coding {
	case "gzip", "x-gzip":
		zr, err := gzip.NewReader(bytes.NewReader(b))
		if err != nil {
			return nil, wrapBody("gzip", err)
		}
		rd = zr
	case "deflate":
		// "deflate" means the zlib format (RFC 1950), but servers also send
		// raw deflate (RFC 1951); browsers accept both, and so do we.
		if zr, err := zlib.NewReader(bytes.NewReader(b)); err == nil {
			rd = zr
		} else {
			rd = flate.NewReader(bytes.NewReader(b))
		}
	case "br":
		rd = brotli.NewReader(bytes.NewReader(b))
	case "zstd":
		zr, err := zstd.NewReader(bytes.NewReader(b), zstd.WithDecoderConcurrency(1), zstd.WithDecoderMaxMemory(uint64(limit)+1))
		if err != nil {
			return nil, wrapBody("zstd", err)
		}
		defer zr.Close()
		rd = zr
	default:
		return nil, fmt.Errorf("HTTP body: unsupported Content-Encoding %q", coding)
	}
	out, err := readLimited(bufio.NewReader(rd), limit)
	if err != nil {
		return nil, wrapBody(coding, err)
	}
	return out, nil
}
