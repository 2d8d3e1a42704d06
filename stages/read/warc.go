package read

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// warcReader parses WARC files (ISO 28500, versions 1.0 and 1.1): a record
// is a version line, named header fields, a blank line, Content-Length
// bytes of block, and two CRLFs. Text is taken from "conversion" records
// (extracted text, as in WET files) and from "resource" records whose
// Content-Type is text/*; other record types (warcinfo, request, response,
// metadata...) are skipped and counted. Per-record gzip members are handled
// by the decoder below, which reads multi-member gzip streams.
//
// The parser is hand-written because it needs only this grammar and must
// bound memory per record (a record longer than max_doc_bytes is skipped
// without being held); BenchmarkReadWARC measures it.
type warcReader struct {
	baseReader
	br      *bufio.Reader
	off     int64
	Skipped int64
}

// SkippedRecords is how many records of other types were passed over.
func (r *warcReader) SkippedRecords() int64 { return r.Skipped }

const maxWARCHeaderBytes = 1 << 20 // a header block larger than this is corrupt

func (r *warcReader) readLine() ([]byte, error) {
	line, err := r.br.ReadSlice('\n')
	r.off += int64(len(line))
	if err == bufio.ErrBufferFull {
		return nil, fmt.Errorf("WARC header line longer than %d bytes at byte %d", r.br.Size(), r.off)
	}
	return bytes.TrimRight(line, "\r\n"), err
}

func (r *warcReader) Next() (Record, error) {
	for {
		// Version line, after any blank lines between records.
		var line []byte
		var err error
		for {
			line, err = r.readLine()
			if err != nil && (len(line) == 0 || err != io.EOF) {
				if err == io.EOF {
					return Record{}, io.EOF
				}
				return Record{}, err
			}
			if len(line) > 0 {
				break
			}
		}
		start := r.off - int64(len(line)) - 2
		if !bytes.HasPrefix(line, []byte("WARC/")) {
			return Record{}, fmt.Errorf("byte %d: want a WARC version line, got %.40q", start, line)
		}
		r.rec++
		hdr := map[string]string{}
		hbytes := 0
		for {
			l, err := r.readLine()
			if err != nil {
				return Record{}, fmt.Errorf("record %d: truncated header: %w", r.rec, unexpected(err))
			}
			if len(l) == 0 {
				break
			}
			hbytes += len(l)
			if hbytes > maxWARCHeaderBytes {
				return Record{}, fmt.Errorf("record %d: header larger than %d bytes", r.rec, maxWARCHeaderBytes)
			}
			k, v, ok := bytes.Cut(l, []byte(":"))
			if !ok {
				continue // continuation lines and junk are ignored
			}
			hdr[strings.ToLower(string(bytes.TrimSpace(k)))] = string(bytes.TrimSpace(v))
		}
		n, perr := strconv.ParseInt(hdr["content-length"], 10, 64)
		if perr != nil || n < 0 {
			return Record{}, fmt.Errorf("record %d: bad Content-Length %q", r.rec, hdr["content-length"])
		}
		typ := strings.ToLower(hdr["warc-type"])
		ctype := strings.ToLower(hdr["content-type"])
		wanted := typ == "conversion" || (typ == "resource" && (ctype == "" || strings.HasPrefix(ctype, "text/")))
		id := strings.Trim(hdr["warc-record-id"], "<>")
		if !wanted || n > int64(r.opt.MaxDocBytes) {
			if _, err := io.CopyN(io.Discard, r.br, n); err != nil {
				return Record{}, fmt.Errorf("record %d: truncated block: %w", r.rec, unexpected(err))
			}
			r.off += n
			if !wanted {
				r.Skipped++
				continue
			}
			if id == "" {
				id = r.defaultID(r.rec)
			}
			return Record{Issue: &ReadIssue{File: r.file, Line: r.rec, Offset: start, Rule: RuleOversize, Bytes: n, DocID: id,
				Msg: fmt.Sprintf("record of %d bytes exceeds max_doc_bytes %d", n, r.opt.MaxDocBytes)}}, nil
		}
		block := make([]byte, n)
		if _, err := io.ReadFull(r.br, block); err != nil {
			return Record{}, fmt.Errorf("record %d: truncated block: %w", r.rec, unexpected(err))
		}
		r.off += n
		s, bad := repairUTF8(string(block))
		d := r.newDoc(s, id, r.rec)
		if u := hdr["warc-target-uri"]; u != "" {
			d.SetMeta("url", strings.Trim(u, "<>"))
		}
		if t := hdr["warc-date"]; t != "" {
			d.SetMeta("date", t)
		}
		if bad {
			return Record{Doc: d, Issue: utf8Issue(&r.baseReader, d)}, nil
		}
		return Record{Doc: d}, nil
	}
}

func unexpected(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}
