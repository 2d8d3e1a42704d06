package read

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"unicode/utf8"

	"winnow/stages/jsonl"
)

// Format names an input record format.
type Format string

// Input formats. FormatAuto picks one from the file name (after any .gz or
// .zst suffix) and, failing that, from the first decompressed bytes.
const (
	FormatAuto    Format = "auto"
	FormatJSONL   Format = "jsonl"
	FormatText    Format = "text"
	FormatWARC    Format = "warc"
	FormatParquet Format = "parquet"
	// FormatHTML is one HTML page per file, reduced to its main text.
	FormatHTML Format = "html"
)

// Formats lists the formats an input may name (a spec's "format" choices).
var Formats = []Format{FormatAuto, FormatJSONL, FormatText, FormatWARC, FormatParquet, FormatHTML}

// ReadOptions says how to turn an input file's records into documents.
type ReadOptions struct {
	Source string
	Format Format
	// TextField and IDField name the JSONL fields or Parquet columns.
	TextField string
	IDField   string
	// HTML says the text field holds HTML: each document is the page's
	// main text (package webpage), its <title> in Meta "title"; a page
	// with no main text is skipped by rule.
	HTML bool
	// MetaFields restricts which extra fields go into Meta (nil: all).
	MetaFields []string
	// TextMode is "file" (one document per file) or "blocks" (one per
	// blank-line-separated block) for plain text.
	TextMode string
	// MaxDocBytes is the largest document held in memory; a longer record
	// is consumed and dropped with rule "oversize".
	MaxDocBytes int
}

// Read issue rules, recorded in the ledger under stage "read".
const (
	RuleMalformed   = "malformed_record"
	RuleOversize    = "oversize"
	RuleMissingText = "missing_text"
	RuleInvalidUTF8 = "invalid_utf8"
	// RuleNULByte records a document whose text held U+0000 (a raw NUL
	// byte, or JSON's \u0000): NUL is not text and breaks C-string
	// consumers downstream, so it is replaced with U+FFFD and the document
	// kept, as for invalid UTF-8. (In JSONL a raw NUL byte is not JSON at
	// all, so that line is a malformed_record.)
	RuleNULByte = "nul_byte"
	// RuleBrokenInput records an input that could not be read to its end
	// (a corrupt or truncated stream, an unreadable file); the documents
	// before the damage are kept.
	RuleBrokenInput = "broken_input"
	// RuleEmptyInput notes an input with no documents (not an error).
	RuleEmptyInput = "empty_input"
)

// ReadIssue is a problem with one record that costs only that record (or,
// for invalid UTF-8, only the bad bytes).
type ReadIssue struct {
	Source string
	File   string
	Line   int64
	Offset int64
	Rule   string
	Msg    string
	// DocID is the id the record would have had.
	DocID string
	// Bytes is the size of the record.
	Bytes int64
	// Fatal is set when the rest of the file could not be read.
	Fatal bool
	// Skip marks a record passed over by rule, not an error: a WARC record
	// that holds no page text (Rule is one of webpage.Rules: http_status,
	// redirect, not_text, crawler_record, no_text, too_large).
	Skip bool
}

// Repair reports whether the issue is an edit of a document that is kept
// (invalid UTF-8 or NUL replaced), not the loss of a record.
func (i *ReadIssue) Repair() bool { return i.Rule == RuleInvalidUTF8 || i.Rule == RuleNULByte }

func (i *ReadIssue) Error() string {
	return fmt.Sprintf("%s:%d: %s: %s", i.File, i.Line, i.Rule, i.Msg)
}

// Record is what a RecordReader yields: a document, an issue, or both (a
// document whose invalid UTF-8 was repaired).
type Record struct {
	Doc   *Doc
	Issue *ReadIssue
}

// RecordReader yields the records of one input file in order. Next returns
// io.EOF at the end; any other error is fatal for the rest of the file
// (every record before it has been returned).
type RecordReader interface {
	Next() (Record, error)
}

// Skipper is a RecordReader that passes over records it does not turn into
// documents (WARC request, response and metadata records) and counts them.
type Skipper interface {
	SkippedRecords() int64
}

// ErrBinary is returned for input that is neither text, gzip nor zstd.
var ErrBinary = errors.New("binary data: not text, gzip or zstd (wrong format or a corrupt file)")

// ErrMultilineJSON is returned for a JSON input whose first line opens an
// object and holds nothing else: one JSON value written over many lines
// (pretty-printed), not one document per line. (An input that starts
// with "[" is read as an array of documents: jsonarray.go.) Read as JSON Lines,
// every one of its lines would be a malformed record.
var ErrMultilineJSON = errors.New("a JSON object written over many lines (its first line is only \"{\"), not JSON Lines " +
	"or an array of documents: write one document per line")

// firstJSONByte returns the first byte of head that is not JSON white
// space (0 if none).
func firstJSONByte(head []byte) byte {
	for _, c := range head {
		if !isJSONSpace(c) {
			return c
		}
	}
	return 0
}

// looksMultilineJSON reports whether the first non-blank line of head is a
// lone "{" or "[" (white space around it allowed). A JSON Lines record is
// never that: a line of its own is a whole object.
func looksMultilineJSON(head []byte) bool {
	for len(head) > 0 {
		line := head
		i := bytes.IndexByte(head, '\n')
		if i >= 0 {
			line, head = head[:i], head[i+1:]
		} else {
			// A first line longer than the peeked head: not a lone bracket.
			return false
		}
		t := bytes.TrimSpace(line)
		if len(t) == 0 {
			continue
		}
		return len(t) == 1 && (t[0] == '{' || t[0] == '[')
	}
	return false
}

// NewRecordReader returns the reader for format over decompressed bytes r.
// file is the display path used in ids and messages; input is the file's
// index in the run, used in order keys.
func NewRecordReader(r io.Reader, file string, input int, opt ReadOptions) (RecordReader, Format, error) {
	br := bufio.NewReaderSize(r, 256<<10)
	head, _ := br.Peek(4096)
	// A UTF-8 byte-order mark (Unicode 15.0 section 23.8: U+FEFF at the
	// start of a stream is a signature, not content) would otherwise glue
	// itself to the first record, making the first JSON line malformed.
	skip := 0
	if bytes.HasPrefix(head, utf8BOM) {
		skip, _ = br.Discard(len(utf8BOM))
		head, _ = br.Peek(4096)
	}
	format := opt.Format
	if format == "" || format == FormatAuto {
		format = GuessFormat(file, head)
	}
	if opt.MaxDocBytes <= 0 {
		opt.MaxDocBytes = DefaultMaxDocBytes
	}
	base := baseReader{file: file, input: input, opt: opt}
	switch format {
	case FormatJSONL, FormatText:
		if looksBinary(head) {
			return nil, format, ErrBinary
		}
		if format == FormatJSONL && firstJSONByte(head) == '[' {
			return newJSONArrayReader(base, br, skip), format, nil
		}
		if format == FormatJSONL && looksMultilineJSON(head) {
			return nil, format, ErrMultilineJSON
		}
		lr := newLineReader(br, opt.MaxDocBytes)
		lr.off = int64(skip)
		if format == FormatJSONL {
			return &jsonlReader{baseReader: base, lr: lr}, format, nil
		}
		return &textReader{baseReader: base, lr: lr}, format, nil
	case FormatWARC:
		if len(head) > 0 && !bytes.HasPrefix(head, []byte("WARC/")) {
			return nil, format, fmt.Errorf("not a WARC file: does not start with \"WARC/\"")
		}
		return &warcReader{baseReader: base, src: r, br: br}, format, nil
	case FormatParquet:
		return nil, format, fmt.Errorf("parquet must be read from a seekable, uncompressed file")
	case FormatHTML:
		return &htmlReader{baseReader: base, br: br}, format, nil
	}
	return nil, format, fmt.Errorf("unknown format %q", format)
}

// DefaultMaxDocBytes is the default largest document held in memory.
const DefaultMaxDocBytes = 8 << 20

// GuessFormat picks a format from the file name (after any .gz or .zst
// suffix) and, failing that, from the first decompressed bytes head.
func GuessFormat(file string, head []byte) Format {
	name := strings.ToLower(file)
	for _, suf := range []string{".gz", ".zst", ".zstd", ".gzip"} {
		name = strings.TrimSuffix(name, suf)
	}
	switch {
	case strings.HasSuffix(name, ".jsonl"), strings.HasSuffix(name, ".json"), strings.HasSuffix(name, ".ndjson"):
		return FormatJSONL
	case strings.HasSuffix(name, ".warc"), strings.HasSuffix(name, ".wet"):
		return FormatWARC
	case strings.HasSuffix(name, ".parquet"):
		return FormatParquet
	case strings.HasSuffix(name, ".txt"), strings.HasSuffix(name, ".text"), strings.HasSuffix(name, ".md"):
		return FormatText
	case strings.HasSuffix(name, ".html"), strings.HasSuffix(name, ".htm"), strings.HasSuffix(name, ".xhtml"):
		return FormatHTML
	}
	switch {
	case bytes.HasPrefix(head, []byte("PAR1")):
		return FormatParquet
	case bytes.HasPrefix(head, []byte("WARC/")):
		return FormatWARC
	case len(bytes.TrimLeft(head, " \t\r\n")) > 0 && bytes.TrimLeft(head, " \t\r\n")[0] == '{':
		return FormatJSONL
	case looksHTML(head):
		return FormatHTML
	}
	return FormatText
}

// looksHTML reports whether a stream starts, after white space and a
// UTF-8 byte-order mark, with an HTML document type or <html> tag (an
// XML declaration before them is allowed).
func looksHTML(head []byte) bool {
	h := bytes.TrimLeft(bytes.TrimPrefix(head, []byte("\ufeff")), " \t\r\n")
	if len(h) > 5 && bytes.EqualFold(h[:5], []byte("<?xml")) {
		if i := bytes.Index(h, []byte("?>")); i >= 0 {
			h = bytes.TrimLeft(h[i+2:], " \t\r\n")
		}
	}
	for _, p := range []string{"<!doctype html", "<html"} {
		if len(h) >= len(p) && bytes.EqualFold(h[:len(p)], []byte(p)) {
			return true
		}
	}
	return false
}

var utf8BOM = []byte{0xef, 0xbb, 0xbf}

// looksBinary reports whether the first bytes of a stream are not text:
// mostly invalid UTF-8 and control characters. A stray NUL byte is not
// enough: it is judged per record (see RuleNULByte), so a NUL in the first
// 4 KiB and one further on get the same treatment.
func looksBinary(head []byte) bool {
	if len(head) == 0 {
		return false
	}
	bad := 0
	for i := 0; i < len(head); {
		r, size := utf8.DecodeRune(head[i:])
		if (r == utf8.RuneError && size == 1 && i+4 < len(head)) || (r < 0x20 && r != '\n' && r != '\r' && r != '\t' && r != '\f') {
			bad++
		}
		i += size
	}
	return bad*10 > len(head) // more than 10% garbage
}

type baseReader struct {
	file  string
	input int
	opt   ReadOptions
	rec   int64
}

// defaultID is "<source>/<file>:<line>". A file outside the spec's
// directory has an absolute Display; its leading "/" is dropped so that
// source and path are joined by one slash ("docs/srv/x.html:1").
func (b *baseReader) defaultID(line int64) string {
	return b.opt.Source + "/" + strings.TrimPrefix(b.file, "/") + ":" + strconv.FormatInt(line, 10)
}

func (b *baseReader) newDoc(text, id string, line int64) *Doc {
	if id == "" {
		id = b.defaultID(line)
	}
	return &Doc{ID: id, Text: text, Source: b.opt.Source, File: b.file, Line: line, Input: b.input}
}

func (b *baseReader) wantMeta(key string) bool {
	if b.opt.MetaFields == nil {
		return true
	}
	for _, k := range b.opt.MetaFields {
		if k == key {
			return true
		}
	}
	return false
}

// repairUTF8 replaces invalid UTF-8 with U+FFFD and reports whether it did.
func repairUTF8(s string) (string, bool) {
	if utf8.ValidString(s) {
		return s, false
	}
	return string(jsonl.AppendValidUTF8(make([]byte, 0, len(s)+8), []byte(s))), true
}

// repairText makes a document's text valid, NUL-free UTF-8: invalid bytes
// and U+0000 each become U+FFFD. It is the one rule for every format, so a
// NUL costs no document wherever it appears in a file.
func repairText(s string, alreadyBad bool) (out string, bad bool, nuls int) {
	out, bad = repairUTF8(s)
	bad = bad || alreadyBad
	if nuls = strings.Count(out, "\x00"); nuls > 0 {
		out = strings.ReplaceAll(out, "\x00", "\uFFFD")
	}
	return out, bad, nuls
}

// repairIssue is the record of a repairText edit (nil when none).
func repairIssue(b *baseReader, d *Doc, bad bool, nuls int) *ReadIssue {
	if !bad && nuls == 0 {
		return nil
	}
	iss := &ReadIssue{File: b.file, Line: d.Line, Rule: RuleInvalidUTF8, Msg: "invalid UTF-8 replaced with U+FFFD", DocID: d.ID, Bytes: int64(len(d.Text))}
	switch {
	case bad && nuls > 0:
		iss.Msg = fmt.Sprintf("invalid UTF-8 and %d NUL character(s) replaced with U+FFFD", nuls)
	case nuls > 0:
		iss.Rule, iss.Msg = RuleNULByte, fmt.Sprintf("%d NUL character(s) replaced with U+FFFD", nuls)
	}
	return iss
}

// textRecord builds the record of a document whose text is raw (not yet
// repaired); alreadyBad says the decoder already replaced invalid UTF-8.
func (b *baseReader) textRecord(text string, alreadyBad bool, id string, line int64, meta map[string]any) Record {
	s, bad, nuls := repairText(text, alreadyBad)
	d := b.newDoc(s, id, line)
	if meta != nil {
		d.Meta = meta
	}
	return Record{Doc: d, Issue: repairIssue(b, d, bad, nuls)}
}

type jsonlReader struct {
	baseReader
	lr *lineReader
}

func (r *jsonlReader) Next() (Record, error) {
	for {
		off := r.lr.off
		line, n, oversize, err := r.lr.next()
		if err != nil && err != io.EOF {
			// A line cut by a broken stream is incomplete: report the
			// break, not a malformed record.
			return Record{}, err
		}
		if err != nil && line == nil && !oversize {
			return Record{}, err
		}
		ln := r.lr.line
		if oversize {
			return Record{Issue: &ReadIssue{File: r.file, Line: ln, Offset: off, Rule: RuleOversize, Bytes: n,
				Msg: fmt.Sprintf("line of %d bytes exceeds max_doc_bytes %d", n, r.opt.MaxDocBytes), DocID: r.defaultID(ln)}}, err
		}
		if len(bytes.TrimSpace(line)) == 0 {
			if err != nil {
				return Record{}, err
			}
			continue
		}
		rec := r.parseJSON(line, ln, off)
		return rec, err
	}
}

// parseJSON turns one JSON object (a JSON Lines line or an array element)
// into a record numbered ln at byte offset off.
func (r *baseReader) parseJSON(line []byte, ln, off int64) Record {
	sc := jsonObjectScanner{b: line}
	var text, id []byte
	var meta map[string]any
	tf, idf := r.opt.TextField, r.opt.IDField
	perr := sc.eachField(func(key, val []byte) {
		k := string(key)
		switch {
		case k == tf:
			text = val
		case idf != "" && k == idf:
			id = val
		default:
			if r.wantMeta(k) {
				if meta == nil {
					meta = make(map[string]any, 4)
				}
				meta[k] = RawJSON(append([]byte(nil), val...))
			}
		}
	})
	if perr != nil {
		return Record{Issue: &ReadIssue{File: r.file, Line: ln, Offset: off, Rule: RuleMalformed, Msg: perr.Error(), DocID: r.defaultID(ln), Bytes: int64(len(line))}}
	}
	if text == nil || text[0] != '"' {
		msg := fmt.Sprintf("no string field %q", tf)
		if text != nil {
			msg = fmt.Sprintf("field %q is not a string", tf)
		}
		return Record{Issue: &ReadIssue{File: r.file, Line: ln, Offset: off, Rule: RuleMissingText, Msg: msg, DocID: r.defaultID(ln), Bytes: int64(len(line))}}
	}
	s, bad := decodeJSONString(text)
	var ids string
	if id != nil {
		if id[0] == '"' {
			ids, _ = decodeJSONString(id)
			ids, _ = repairUTF8(ids)
		} else if id[0] != 'n' { // numbers and other scalars keep their literal; null means none
			ids = string(id)
		}
	}
	if r.opt.HTML {
		d := r.newDoc("", ids, ln)
		d.Meta = meta
		rec := r.fromHTML(d, []byte(s), "text/html; charset=utf-8")
		if rec.Issue != nil {
			rec.Issue.Offset = off
		} else if bad {
			rec.Issue = repairIssue(r, rec.Doc, true, 0)
		}
		return rec
	}
	return r.textRecord(s, bad, ids, ln, meta)
}

type textReader struct {
	baseReader
	lr   *lineReader
	done bool
}

// Next returns one document per file (TextMode "file") or per
// blank-line-separated block ("blocks").
func (r *textReader) Next() (Record, error) {
	if r.done {
		return Record{}, io.EOF
	}
	var buf []byte
	start := int64(0)
	oversize := false
	var size int64
	var startOff int64
	for {
		off := r.lr.off
		line, n, over, err := r.lr.next()
		if err != nil && line == nil && !over {
			if err == io.EOF {
				r.done = true
				if start == 0 {
					return Record{}, io.EOF
				}
				break
			}
			return Record{}, err
		}
		blank := !over && len(bytes.TrimSpace(line)) == 0
		if r.opt.TextMode == "blocks" && blank {
			if start == 0 {
				continue
			}
			break
		}
		if start == 0 {
			start = r.lr.line
			startOff = off
		}
		size += n
		if over || size > int64(r.opt.MaxDocBytes) {
			oversize = true
			buf = nil
		}
		if !oversize {
			if len(buf) > 0 {
				buf = append(buf, '\n')
			}
			buf = append(buf, line...)
		}
		if err == io.EOF {
			r.done = true
			break
		}
	}
	if oversize {
		return Record{Issue: &ReadIssue{File: r.file, Line: start, Offset: startOff, Rule: RuleOversize, Bytes: size,
			Msg: fmt.Sprintf("document of %d bytes exceeds max_doc_bytes %d", size, r.opt.MaxDocBytes), DocID: r.defaultID(start)}}, nil
	}
	return r.textRecord(string(buf), false, "", start, nil), nil
}

// OpenFile opens path for reading; "-" is standard input.
func OpenFile(path string) (io.ReadCloser, error) {
	if path == "-" {
		return io.NopCloser(os.Stdin), nil
	}
	return os.Open(path)
}
