package read

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"

	"winnow/stages/read/webpage"
)

// warcReader parses WARC files (ISO 28500, versions 1.0 and 1.1): a record
// is a version line, named header fields, a blank line, Content-Length
// bytes of block, and two CRLFs. Text is taken as it is from "conversion"
// records (extracted text, as in WET files) and from "resource" records
// whose Content-Type is text/* other than HTML; "response" records (HTTP
// messages) and HTML resources go through package webpage, which keeps a
// page's main text. Records that hold no page text (a redirect, an error
// status, an image, the crawler's own log, a page without text) come back
// as skip records naming the rule; record types that never hold documents
// (warcinfo, request, revisit) are only counted. Per-record gzip members
// are handled by the decoder below, which reads multi-member gzip streams.
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
		uri := strings.Trim(hdr["warc-target-uri"], "<>")
		id := strings.Trim(hdr["warc-record-id"], "<>")
		if id == "" {
			id = r.defaultID(r.rec)
		}
		kind, rule := warcKind(typ, ctype, uri)
		if kind == warcOther {
			if err := r.discard(n); err != nil {
				return Record{}, err
			}
			r.Skipped++
			continue
		}
		if rule == "" && n > int64(r.opt.MaxDocBytes) {
			if kind == warcPage {
				rule = webpage.RuleTooLarge
			} else {
				if err := r.discard(n); err != nil {
					return Record{}, err
				}
				return Record{Issue: &ReadIssue{File: r.file, Line: r.rec, Offset: start, Rule: RuleOversize, Bytes: n, DocID: id,
					Msg: fmt.Sprintf("record of %d bytes exceeds max_doc_bytes %d", n, r.opt.MaxDocBytes)}}, nil
			}
		}
		if rule != "" {
			if err := r.discard(n); err != nil {
				return Record{}, err
			}
			return r.skip(start, n, id, uri, typ, rule), nil
		}
		block := make([]byte, n)
		if _, err := io.ReadFull(r.br, block); err != nil {
			return Record{}, fmt.Errorf("record %d: truncated block: %w", r.rec, unexpected(err))
		}
		r.off += n
		date := hdr["warc-date"]
		if kind == warcPage {
			return r.page(block, typ, ctype, uri, date, id, start), nil
		}
		s, bad := repairUTF8(string(block))
		d := r.newDoc(s, id, r.rec)
		if uri != "" {
			d.SetMeta("url", uri)
		}
		if date != "" {
			d.SetMeta("date", date)
		}
		if bad {
			return Record{Doc: d, Issue: utf8Issue(&r.baseReader, d)}, nil
		}
		return Record{Doc: d}, nil
	}
}

// What a WARC record is to the reader.
const (
	warcOther = iota // holds no document by its type (warcinfo, request, revisit...): counted in Skipped
	warcText         // text as it is: conversion records, text resources
	warcPage         // a web page: response records, HTML resources
)

// warcKind sorts a record by its WARC-Type, Content-Type and target URI;
// a record of a document type that holds no page gets the skip rule.
func warcKind(typ, ctype, uri string) (int, string) {
	if webpage.IsCrawlerRecord(typ, uri) {
		return warcText, webpage.RuleCrawlerRecord
	}
	switch typ {
	case "conversion":
		return warcText, ""
	case "resource":
		mt, _, _ := strings.Cut(ctype, ";")
		switch mt = strings.TrimSpace(mt); {
		case mt == "text/html" || mt == "application/xhtml+xml":
			return warcPage, ""
		case mt == "" || strings.HasPrefix(mt, "text/"):
			return warcText, ""
		}
		return warcText, webpage.RuleNotText
	case "response":
		// The block is an HTTP message ("application/http"); DNS and other
		// protocols' responses are not pages.
		if ctype == "" || strings.HasPrefix(ctype, "application/http") {
			return warcPage, ""
		}
		return warcPage, webpage.RuleNotText
	}
	return warcOther, ""
}

// discard consumes a block of n bytes without holding it.
func (r *warcReader) discard(n int64) error {
	if _, err := io.CopyN(io.Discard, r.br, n); err != nil {
		return fmt.Errorf("record %d: truncated block: %w", r.rec, unexpected(err))
	}
	r.off += n
	return nil
}

// skip returns the record of a WARC record passed over by rule.
func (r *warcReader) skip(start, n int64, id, uri, typ, rule string) Record {
	return Record{Issue: &ReadIssue{File: r.file, Line: r.rec, Offset: start, Rule: rule, Bytes: n, DocID: id,
		Msg: typ + " record " + uri, Skip: true}}
}

// page extracts the main text of a response or HTML resource record
// (package webpage); the page's title, status and content type go into
// Meta beside the URL and date.
func (r *warcReader) page(block []byte, typ, ctype, uri, date, id string, start int64) Record {
	opt := webpage.Options{MaxBytes: r.opt.MaxDocBytes}
	var p webpage.Page
	var rule string
	var err error
	if typ == "response" {
		p, rule, err = webpage.FromWARCResponse(block, uri, date, opt)
	} else {
		p, rule, err = webpage.FromWARCResource(block, ctype, uri, date, opt)
	}
	n := int64(len(block))
	if err != nil {
		return Record{Issue: &ReadIssue{File: r.file, Line: r.rec, Offset: start, Rule: RuleMalformed, Bytes: n, DocID: id,
			Msg: fmt.Sprintf("%s record %s: %v", typ, uri, err)}}
	}
	if rule != "" {
		rec := r.skip(start, n, id, uri, typ, rule)
		if p.Status != 0 {
			rec.Issue.Msg += fmt.Sprintf(" (HTTP %d)", p.Status)
		} else if p.ContentType != "" && rule == webpage.RuleNotText {
			rec.Issue.Msg += " (" + p.ContentType + ")"
		}
		return rec
	}
	d := r.newDoc(p.Text, id, r.rec)
	setPageMeta(d, p)
	return Record{Doc: d}
}

// setPageMeta copies what is known about a page into a document's Meta.
func setPageMeta(d *Doc, p webpage.Page) {
	for _, kv := range [...][2]string{{"url", p.URL}, {"date", p.Date}, {"title", p.Title}, {"content_type", p.ContentType}} {
		if kv[1] != "" {
			d.SetMeta(kv[0], kv[1])
		}
	}
	if p.Status != 0 {
		d.SetMeta("status", p.Status)
	}
}

func unexpected(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}
