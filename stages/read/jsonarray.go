package read

import (
	"bufio"
	"errors"
	"fmt"
	"io"
)

// A JSON input whose top level is an array of objects ("[{...}, {...}]",
// on one line or pretty-printed over many), as data-frame and API exports
// write it, is read element by element: each element is one record,
// parsed as one JSON Lines line would be, and numbered 1, 2, ... in the
// record's line field. The elements are cut by a small scanner that only
// tracks strings and nesting, so memory stays bounded by max_doc_bytes
// whatever the file's size: a longer element is skipped as oversize. A
// file cut inside the array (no closing "]") is a broken input after the
// elements before the cut.

// jsonArrayReader yields the elements of a top-level JSON array.
type jsonArrayReader struct {
	baseReader
	br      *bufio.Reader
	off     int64 // bytes consumed
	n       int64 // elements returned
	started bool
	done    bool
	elem    []byte
}

func newJSONArrayReader(base baseReader, br *bufio.Reader, skip int) *jsonArrayReader {
	return &jsonArrayReader{baseReader: base, br: br, off: int64(skip)}
}

var errArrayCut = errors.New("JSON array cut short: no closing \"]\"")

func (r *jsonArrayReader) readByte() (byte, error) {
	c, err := r.br.ReadByte()
	if err == nil {
		r.off++
	}
	return c, err
}

// skipSpace reads past JSON white space and returns the next byte.
func (r *jsonArrayReader) skipSpace() (byte, error) {
	for {
		c, err := r.readByte()
		if err != nil {
			return 0, err
		}
		if !isJSONSpace(c) {
			return c, nil
		}
	}
}

func (r *jsonArrayReader) Next() (Record, error) {
	if r.done {
		return Record{}, io.EOF
	}
	if !r.started {
		r.started = true
		c, err := r.skipSpace()
		if err != nil || c != '[' {
			r.done = true
			if err == io.EOF {
				return Record{}, io.EOF
			}
			if err != nil {
				return Record{}, err
			}
			return Record{}, fmt.Errorf("not a JSON array: starts with %q", c)
		}
		c, err = r.skipSpace()
		if err != nil {
			return Record{}, r.cut(err)
		}
		if c == ']' {
			return Record{}, r.end()
		}
		r.br.UnreadByte()
		r.off--
	}
	start := r.off
	last, oversize, size, err := r.element()
	if err != nil {
		return Record{}, r.cut(err)
	}
	r.n++
	var rec Record
	if oversize {
		rec = Record{Issue: &ReadIssue{File: r.file, Line: r.n, Offset: start, Rule: RuleOversize, Bytes: size,
			Msg: fmt.Sprintf("array element of %d bytes exceeds max_doc_bytes %d", size, r.opt.MaxDocBytes), DocID: r.defaultID(r.n)}}
	} else if len(r.elem) == 0 {
		rec = Record{Issue: &ReadIssue{File: r.file, Line: r.n, Offset: start, Rule: RuleMalformed,
			Msg: "empty array element", DocID: r.defaultID(r.n)}}
	} else {
		rec = r.parseJSON(r.elem, r.n, start)
	}
	if last == ']' {
		return rec, r.end()
	}
	return rec, nil
}

// element reads one element into r.elem (at most max_doc_bytes of it,
// white space around it dropped) and the delimiter after it: ',' or ']'.
func (r *jsonArrayReader) element() (delim byte, oversize bool, size int64, err error) {
	r.elem = r.elem[:0]
	depth, inStr, esc := 0, false, false
	c, err := r.skipSpace()
	if err != nil {
		return 0, false, 0, err
	}
	for {
		if !inStr && depth == 0 && (c == ',' || c == ']') {
			for len(r.elem) > 0 && isJSONSpace(r.elem[len(r.elem)-1]) {
				r.elem = r.elem[:len(r.elem)-1]
			}
			if oversize {
				r.elem = r.elem[:0]
			}
			return c, oversize, size, nil
		}
		size++
		if !oversize {
			if len(r.elem) >= r.opt.MaxDocBytes {
				oversize = true
			} else {
				r.elem = append(r.elem, c)
			}
		}
		switch {
		case inStr:
			switch {
			case esc:
				esc = false
			case c == '\\':
				esc = true
			case c == '"':
				inStr = false
			}
		case c == '"':
			inStr = true
		case c == '{' || c == '[':
			depth++
		case (c == '}' || c == ']') && depth > 0:
			depth--
		}
		if c, err = r.readByte(); err != nil {
			return 0, false, size, err
		}
	}
}

func isJSONSpace(c byte) bool { return c == ' ' || c == '\t' || c == '\n' || c == '\r' }

// end checks that only white space follows the closing bracket.
func (r *jsonArrayReader) end() error {
	r.done = true
	c, err := r.skipSpace()
	if err == io.EOF {
		return io.EOF
	}
	if err != nil {
		return err
	}
	return fmt.Errorf("data after the closing \"]\" of the JSON array at byte %d: %q", r.off-1, c)
}

// cut turns the end of the stream inside the array into errArrayCut; a
// broken stream's own error is kept.
func (r *jsonArrayReader) cut(err error) error {
	r.done = true
	if err == io.EOF {
		return errArrayCut
	}
	return err
}
