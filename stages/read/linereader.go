package read

import (
	"bufio"
	"bytes"
	"io"
)

// lineReader returns newline-terminated lines of any length without ever
// holding more than max bytes of one line: a longer line is consumed to its
// end and reported as oversize, with its true length. bufio.Scanner's
// 64 KiB default would reject ordinary web text, and an unbounded
// ReadBytes would let one 100 MiB line cost 100 MiB.
type lineReader struct {
	br   *bufio.Reader
	max  int
	buf  []byte
	line int64 // 1-based number of the line last returned
	off  int64 // decompressed byte offset of the start of the next line
}

func newLineReader(r io.Reader, max int) *lineReader {
	br, ok := r.(*bufio.Reader)
	if !ok || br.Size() < 256<<10 {
		br = bufio.NewReaderSize(r, 256<<10)
	}
	return &lineReader{br: br, max: max}
}

// grow makes room for n more bytes without exceeding the line limit
// (append's doubling alone could reserve up to twice max_doc_bytes).
func (l *lineReader) grow(n int) {
	need := len(l.buf) + n
	if need <= cap(l.buf) {
		return
	}
	c := max(2*cap(l.buf), need, 4096)
	if c > l.max+2 {
		c = l.max + 2
	}
	nb := make([]byte, len(l.buf), c)
	copy(nb, l.buf)
	l.buf = nb
}

// next returns the next line without its line ending. oversize is true
// when the line was longer than max (then line holds nothing and n is its
// length). The returned slice is valid until the next call.
func (l *lineReader) next() (line []byte, n int64, oversize bool, err error) {
	l.buf = l.buf[:0]
	start := l.off
	for {
		frag, e := l.br.ReadSlice('\n')
		l.off += int64(len(frag))
		if !oversize {
			if len(l.buf)+len(frag) > l.max+2 { // +2: room for "\r\n"
				oversize = true
				l.buf = l.buf[:0]
			} else if e == nil && len(l.buf) == 0 {
				// Fast path: the whole line is in the bufio buffer.
				line = frag
			} else {
				l.grow(len(frag))
				l.buf = append(l.buf, frag...)
			}
		}
		if e == bufio.ErrBufferFull {
			continue
		}
		if e != nil && (e != io.EOF || l.off == start) {
			if e == io.EOF {
				return nil, 0, false, io.EOF
			}
			if l.off == start {
				return nil, 0, false, e
			}
			err = e
		}
		break
	}
	l.line++
	n = l.off - start
	if oversize {
		return nil, n, true, err
	}
	if line == nil {
		line = l.buf
	}
	line = bytes.TrimSuffix(line, []byte{'\n'})
	line = bytes.TrimSuffix(line, []byte{'\r'})
	return line, n, false, err
}
