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
//
// A record whose Content-Length is wrong is found by its terminator: the
// block must be followed by CRLF CRLF. When it is not, the record is
// reported (malformed_record, with its number) and the reader
// resynchronises at the next line that starts with "WARC/": inside the
// block when the length was too long (so the records it swallowed are read
// again), after it when too short. Only the damaged record is lost.
type warcReader struct {
	baseReader
	src     io.Reader // the stream under br, for re-reading swallowed bytes
	br      *bufio.Reader
	off     int64
	Skipped int64
}

// SkippedRecords is how many records of other types were passed over.
func (r *warcReader) SkippedRecords() int64 { return r.Skipped }

const maxWARCHeaderBytes = 1 << 20 // a header block larger than this is corrupt

var (
	warcTerminator = []byte("\r\n\r\n")
	warcVersion    = []byte("WARC/")
)

func (r *warcReader) readLine() ([]byte, error) {
	line, err := r.br.ReadSlice('\n')
	r.off += int64(len(line))
	if err == bufio.ErrBufferFull {
		return nil, fmt.Errorf("WARC header line longer than %d bytes at byte %d", r.br.Size(), r.off)
	}
	return bytes.TrimRight(line, "\r\n"), err
}

// isVersionLine reports whether b starts like a WARC version line
// ("WARC/" and a digit).
func isVersionLine(b []byte) bool {
	return len(b) > len(warcVersion) && bytes.HasPrefix(b, warcVersion) && b[len(warcVersion)] >= '0' && b[len(warcVersion)] <= '9'
}

// skipToVersionLine discards bytes up to the next line that starts with
// "WARC/<digit>" (which is left unread) or the end, and returns how many
// bytes it skipped. The current position counts as a line start.
func (r *warcReader) skipToVersionLine() (int64, error) {
	var n int64
	for {
		h, err := r.br.Peek(len(warcVersion) + 1)
		if isVersionLine(h) {
			return n, nil
		}
		if len(h) == 0 {
			return n, err
		}
		for {
			frag, err := r.br.ReadSlice('\n')
			n += int64(len(frag))
			r.off += int64(len(frag))
			if err == bufio.ErrBufferFull {
				continue
			}
			if err != nil {
				return n, err
			}
			break
		}
	}
}

// reread makes pending the next bytes to read, ahead of what br holds.
func (r *warcReader) reread(pending []byte, at int64) {
	buffered, _ := r.br.Peek(r.br.Buffered())
	all := make([]byte, 0, len(pending)+len(buffered))
	all = append(append(all, pending...), buffered...)
	r.br.Discard(len(buffered)) // src may be the old br itself
	r.br = bufio.NewReaderSize(io.MultiReader(bytes.NewReader(all), r.src), r.br.Size())
	r.off = at
}

// blockScan is what readBlock saw of a record's block.
type blockScan struct {
	data []byte // the whole block, when kept
	got  int64  // bytes read (less than the length at end of file)
	// next is the offset inside the block of the first line that starts
	// with a WARC version (-1: none), and tail the bytes from there on,
	// kept up to a bound (overflow set when cut).
	next     int64
	tail     []byte
	overflow bool
}

// findVersion returns the offset just after the first "\nWARC/" in b, or,
// when there is none, after a '\n' whose following bytes in b are a proper
// prefix of "WARC/" (a version line that may continue past b); -1 if none.
func findVersion(b []byte) int {
	if i := bytes.Index(b, []byte("\nWARC/")); i >= 0 {
		return i + 1
	}
	for i := max(0, len(b)-len(warcVersion)); i < len(b); i++ {
		if b[i] == '\n' && bytes.HasPrefix(warcVersion, b[i+1:]) {
			return i + 1
		}
	}
	return -1
}

// readBlock reads n bytes of block, keeping them when keep is set, and
// notes the first line inside them that may start a version line, so a
// wrong Content-Length can be repaired. Memory is bounded by
// max_doc_bytes either way.
func (r *warcReader) readBlock(n int64, keep bool) (blockScan, error) {
	bs := blockScan{next: -1}
	if keep {
		bs.data = make([]byte, n)
		m, err := io.ReadFull(r.br, bs.data)
		bs.got = int64(m)
		r.off += int64(m)
		bs.data = bs.data[:m]
		if i := findVersion(bs.data); i >= 0 {
			bs.next = int64(i)
			bs.tail = bs.data[i:]
		}
		return bs, err
	}
	limit := int64(r.opt.MaxDocBytes)
	var carry []byte // the last bytes of the previous chunk
	for bs.got < n {
		want := min(n-bs.got, int64(r.br.Size()))
		chunk, err := r.br.Peek(int(want))
		if len(chunk) == 0 {
			if err == nil {
				err = io.ErrUnexpectedEOF
			}
			return bs, err
		}
		if bs.next < 0 {
			// Look across the chunk boundary, then inside the chunk.
			probe := append(append([]byte(nil), carry...), chunk[:min(len(chunk), len(warcVersion))]...)
			if i := bytes.Index(probe, []byte("\nWARC/")); i >= 0 && i < len(carry) {
				bs.next = bs.got - int64(len(carry)) + int64(i) + 1
				bs.tail = append(append(bs.tail, carry[i+1:]...), chunk...)
			} else if i := findVersion(chunk); i >= 0 {
				bs.next = bs.got + int64(i)
				bs.tail = append(bs.tail, chunk[i:]...)
			} else if len(carry) > 0 && carry[len(carry)-1] == '\n' && bytes.HasPrefix(chunk, warcVersion) {
				bs.next = bs.got
				bs.tail = append(bs.tail, chunk...)
			}
		} else if !bs.overflow {
			if int64(len(bs.tail)+len(chunk)) > limit {
				bs.overflow = true
				bs.tail = nil
			} else {
				bs.tail = append(bs.tail, chunk...)
			}
		}
		carry = append(carry[:0], chunk[max(0, len(chunk)-len(warcVersion)):]...)
		r.br.Discard(len(chunk))
		bs.got += int64(len(chunk))
		r.off += int64(len(chunk))
		if err != nil && int64(len(chunk)) < want {
			return bs, io.ErrUnexpectedEOF
		}
	}
	return bs, nil
}

// endRecord checks the terminator after a block of the claimed length and
// consumes it. It returns "" when the record ended where it should, or
// what went wrong after resynchronising at the next version line.
func (r *warcReader) endRecord(blockStart, n int64, bs blockScan, readErr error) (string, error) {
	if readErr == nil && r.terminated() {
		return "", nil
	}
	if bs.next >= 0 && !bs.overflow {
		// The candidate must really start a version line (it may run on
		// past the block).
		probe := bs.tail
		if len(probe) <= len(warcVersion) {
			more, _ := r.br.Peek(len(warcVersion) + 1 - len(probe))
			probe = append(append([]byte(nil), probe...), more...)
		}
		if isVersionLine(probe) {
			// Too long: the block swallowed the next record(s); read
			// them again.
			r.reread(bs.tail, blockStart+bs.next)
			return fmt.Sprintf("Content-Length %d runs past the end of the record (the next record starts %d bytes into the block); resynchronised there", n, bs.next), nil
		}
	}
	if readErr != nil {
		// Cut short by the end of the file with no record inside it: a
		// truncated file, not a wrong length.
		return "", fmt.Errorf("record %d: truncated block (%d of %d bytes): %w", r.rec, bs.got, n, unexpected(readErr))
	}
	at := r.off
	skipped, err := r.skipToVersionLine()
	if err != nil && err != io.EOF {
		return "", err
	}
	if bs.overflow {
		return fmt.Sprintf("Content-Length %d runs past the end of the record; resynchronised at byte %d (more than max_doc_bytes %d of swallowed data was skipped)", n, at+skipped, r.opt.MaxDocBytes), nil
	}
	if err == io.EOF && skipped == 0 {
		return fmt.Sprintf("Content-Length %d: the file ends without the record terminator (CRLF CRLF)", n), nil
	}
	return fmt.Sprintf("Content-Length %d is not followed by the record terminator (CRLF CRLF) and a next record: the record is longer than declared; resynchronised at the next WARC/ line after %d more bytes", n, skipped), nil
}

// terminated consumes the record terminator when the block is followed by
// it and then by the next record or the end of the file (a lone CRLF CRLF
// is not enough: the header/block separator of a later record looks the
// same). A bare "\n\n" is accepted on the same terms.
func (r *warcReader) terminated() bool {
	const extra = 16 // blank lines tolerated between records
	t, _ := r.br.Peek(len(warcTerminator) + extra + len(warcVersion) + 1)
	var term int
	switch {
	case bytes.HasPrefix(t, warcTerminator):
		term = len(warcTerminator)
	case bytes.HasPrefix(t, []byte("\n\n")):
		term = 2
	default:
		return false
	}
	rest := t[term:]
	for len(rest) > 0 && (rest[0] == '\r' || rest[0] == '\n') && len(t)-len(rest) < term+extra {
		rest = rest[1:]
	}
	complete := len(t) < len(warcTerminator)+extra+len(warcVersion)+1 // Peek stopped at the end
	if !isVersionLine(rest) && !(complete && len(rest) == 0) {
		return false
	}
	r.br.Discard(term)
	r.off += int64(term)
	return true
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
		if !isVersionLine(line) {
			at := r.off - int64(len(line))
			skipped, err := r.skipToVersionLine()
			if err != nil && err != io.EOF {
				return Record{}, err
			}
			return Record{Issue: &ReadIssue{File: r.file, Line: r.rec + 1, Offset: at, Rule: RuleMalformed, Bytes: skipped + int64(len(line)),
				DocID: r.defaultID(r.rec + 1), Msg: fmt.Sprintf("after record %d: want a WARC version line at byte %d, got %.40q; skipped %d bytes to the next one", r.rec, at, line, skipped+int64(len(line)))}}, nil
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
		id := strings.Trim(hdr["warc-record-id"], "<>")
		if id == "" {
			id = r.defaultID(r.rec)
		}
		issue := func(rule, msg string, n int64) Record {
			return Record{Issue: &ReadIssue{File: r.file, Line: r.rec, Offset: start, Rule: rule, Bytes: n, DocID: id,
				Msg: fmt.Sprintf("record %d: %s", r.rec, msg)}}
		}
		n, perr := strconv.ParseInt(hdr["content-length"], 10, 64)
		if perr != nil || n < 0 {
			skipped, err := r.skipToVersionLine()
			if err != nil && err != io.EOF {
				return Record{}, err
			}
			return issue(RuleMalformed, fmt.Sprintf("bad Content-Length %q; skipped %d bytes to the next WARC/ line", hdr["content-length"], skipped), skipped), nil
		}
		typ := strings.ToLower(hdr["warc-type"])
		ctype := strings.ToLower(hdr["content-type"])
		wanted := typ == "conversion" || (typ == "resource" && (ctype == "" || strings.HasPrefix(ctype, "text/")))
		keep := wanted && n <= int64(r.opt.MaxDocBytes)
		blockStart := r.off
		bs, rerr := r.readBlock(n, keep)
		bad, err := r.endRecord(blockStart, n, bs, rerr)
		if err != nil {
			return Record{}, err
		}
		if bad != "" {
			return issue(RuleMalformed, bad, bs.got), nil
		}
		if !wanted {
			r.Skipped++
			continue
		}
		if !keep {
			return issue(RuleOversize, fmt.Sprintf("record of %d bytes exceeds max_doc_bytes %d", n, r.opt.MaxDocBytes), n), nil
		}
		rec := r.textRecord(string(bs.data), false, id, r.rec, nil)
		if u := hdr["warc-target-uri"]; u != "" {
			rec.Doc.SetMeta("url", strings.Trim(u, "<>"))
		}
		if t := hdr["warc-date"]; t != "" {
			rec.Doc.SetMeta("date", t)
		}
		return rec, nil
	}
}

func unexpected(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}
