package shard

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"unsafe"

	"github.com/klauspost/compress/s2"
	"github.com/klauspost/compress/zstd"
)

// Spill files hold documents between Add and Close, because mixing needs
// every document's token count before it can choose. A record is a
// sequence of uvarint-prefixed fields in a zstd stream:
//
//	pos (bucket files only), file, line, id, source, text, meta, tokens, flags
//
// where meta is the document's kept meta keys already encoded as the
// `,"key":value...` tail of a shard line, so writing a shard line never
// decodes JSON again.

// spillWindow is the zstd window of spill and bucket files: small, so that
// many bucket writers can be open at once in little memory.
const spillWindow = 1 << 18

// record is one spilled document (or piece of one).
type record struct {
	pos          uint64 // output position (bucket files)
	file         string
	line         int64
	id, source   string
	text         string
	meta         []byte
	tokens       int
	original     string // the id before pre-splitting ("" when whole)
	piece, total int    // 1-based piece number and count when split
}

type spillWriter struct {
	f   *os.File
	enc io.WriteCloser
	buf []byte
	n   int64 // records
	raw int64 // uncompressed bytes
}

// createSpill creates a spill file named by pattern in dir. A pattern
// ending in ".s2" gets an S2 stream (twice as fast as zstd's fastest level
// to write and read back, for half as many bytes again: the one spill of
// every document, see stages/run BenchmarkSpillCodec); others get zstd
// with a small window (the many bucket files open at once).
func createSpill(dir, pattern string) (*spillWriter, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("spill: %w", err)
	}
	f, err := os.CreateTemp(dir, pattern)
	if err != nil {
		return nil, fmt.Errorf("spill: %w", err)
	}
	if strings.HasSuffix(pattern, ".s2") {
		return &spillWriter{f: f, enc: s2.NewWriter(f, s2.WriterConcurrency(1))}, nil
	}
	enc, err := zstd.NewWriter(f, zstd.WithEncoderConcurrency(1), zstd.WithEncoderLevel(zstd.SpeedFastest), zstd.WithWindowSize(spillWindow))
	if err != nil {
		f.Close()
		os.Remove(f.Name())
		return nil, fmt.Errorf("spill: %w", err)
	}
	return &spillWriter{f: f, enc: enc}, nil
}

func appendField(b []byte, s string) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	return append(b, s...)
}

func (w *spillWriter) put(r *record, withPos bool) error {
	b := appendRecord(w.buf[:0], r, withPos)
	w.buf = b
	w.n++
	w.raw += int64(len(b))
	if _, err := w.enc.Write(b); err != nil {
		return fmt.Errorf("spill %s: %w", w.f.Name(), err)
	}
	return nil
}

// appendRecord encodes one spill record.
func appendRecord(b []byte, r *record, withPos bool) []byte {
	if withPos {
		b = binary.AppendUvarint(b, r.pos)
	}
	b = appendField(b, r.file)
	b = binary.AppendUvarint(b, uint64(r.line))
	b = appendField(b, r.id)
	b = appendField(b, r.source)
	b = appendField(b, r.text)
	b = binary.AppendUvarint(b, uint64(len(r.meta)))
	b = append(b, r.meta...)
	b = binary.AppendUvarint(b, uint64(r.tokens))
	b = appendField(b, r.original)
	b = binary.AppendUvarint(b, uint64(r.piece))
	return binary.AppendUvarint(b, uint64(r.total))
}

// close finishes the stream; the file stays for reading.
func (w *spillWriter) close() error {
	err := w.enc.Close()
	if cerr := w.f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("spill %s: %w", w.f.Name(), err)
	}
	return nil
}

func (w *spillWriter) remove() {
	w.enc.Close()
	w.f.Close()
	os.Remove(w.f.Name())
}

type spillReader struct {
	f    *os.File
	dec  *zstd.Decoder // nil for an S2 spill
	br   *bufio.Reader
	name string
}

func openSpill(path string) (*spillReader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("spill: %w", err)
	}
	if strings.HasSuffix(path, ".s2") {
		return &spillReader{f: f, br: bufio.NewReaderSize(s2.NewReader(f), 1<<16), name: path}, nil
	}
	dec, err := zstd.NewReader(f, zstd.WithDecoderConcurrency(1), zstd.WithDecoderLowmem(true))
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("spill %s: %w", path, err)
	}
	return &spillReader{f: f, dec: dec, br: bufio.NewReaderSize(dec, 1<<16), name: path}, nil
}

func (r *spillReader) close() {
	if r.dec != nil {
		r.dec.Close()
	}
	r.f.Close()
}

func (r *spillReader) uvarint() (uint64, error) { return binary.ReadUvarint(r.br) }

// field reads a length-prefixed string with one copy: the bytes are read
// into a fresh slice that nothing else refers to, so it can back the
// string (a second copy through string(b) was a large part of reading a
// spill).
func (r *spillReader) field() (string, error) {
	b, err := r.bytesField()
	if err != nil || len(b) == 0 {
		return "", err
	}
	return unsafe.String(unsafe.SliceData(b), len(b)), nil
}

// bytesField reads a length-prefixed field into a fresh slice.
func (r *spillReader) bytesField() ([]byte, error) {
	n, err := r.uvarint()
	if err != nil {
		return nil, err
	}
	if n > 1<<40 {
		return nil, fmt.Errorf("field of %d bytes", n)
	}
	b := make([]byte, n)
	if _, err := io.ReadFull(r.br, b); err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF // the length was there: a cut record
		}
		return nil, err
	}
	return b, nil
}

// next reads one record; io.EOF at the clean end of the file.
func (r *spillReader) next(rec *record, withPos bool) error {
	var err error
	if withPos {
		if rec.pos, err = r.uvarint(); err != nil {
			return err // io.EOF at the end
		}
	}
	if rec.file, err = r.field(); err != nil {
		return r.fail(err, withPos)
	}
	var v uint64
	if v, err = r.uvarint(); err != nil {
		return r.fail(err, true)
	}
	rec.line = int64(v)
	if rec.id, err = r.field(); err != nil {
		return r.fail(err, true)
	}
	if rec.source, err = r.field(); err != nil {
		return r.fail(err, true)
	}
	if rec.text, err = r.field(); err != nil {
		return r.fail(err, true)
	}
	if rec.meta, err = r.bytesField(); err != nil {
		return r.fail(err, true)
	}
	if v, err = r.uvarint(); err != nil {
		return r.fail(err, true)
	}
	rec.tokens = int(v)
	if rec.original, err = r.field(); err != nil {
		return r.fail(err, true)
	}
	if v, err = r.uvarint(); err != nil {
		return r.fail(err, true)
	}
	rec.piece = int(v)
	if v, err = r.uvarint(); err != nil {
		return r.fail(err, true)
	}
	rec.total = int(v)
	return nil
}

// fail turns an error inside a record into a corruption error; an EOF
// before the first field of a record is the clean end.
func (r *spillReader) fail(err error, inside bool) error {
	if errors.Is(err, io.EOF) && !inside {
		return io.EOF
	}
	return fmt.Errorf("spill %s: truncated or corrupt record: %w", r.name, err)
}

// skip reads past one record (without position) without keeping it.
func (r *spillReader) skip() error {
	for i := 0; i < 10; i++ {
		// file, line, id, source, text, meta, tokens, original, piece,
		// total: strings are a length and bytes, numbers a uvarint.
		n, err := r.uvarint()
		if err != nil {
			return r.fail(err, i > 0)
		}
		if i == 1 || i == 6 || i == 8 || i == 9 {
			continue
		}
		if _, err := r.br.Discard(int(n)); err != nil {
			return r.fail(err, true)
		}
	}
	return nil
}

// spillChain reads spill files one after the other as one stream.
type spillChain struct {
	files []string
	i     int
	cur   *spillReader
}

func openSpills(files []string) (*spillChain, error) { return &spillChain{files: files}, nil }

func (c *spillChain) step(f func(r *spillReader) error) error {
	for {
		if c.cur == nil {
			if c.i >= len(c.files) {
				return io.EOF
			}
			r, err := openSpill(c.files[c.i])
			if err != nil {
				return err
			}
			c.cur = r
		}
		err := f(c.cur)
		if err != io.EOF {
			return err
		}
		c.cur.close()
		c.cur = nil
		c.i++
	}
}

func (c *spillChain) next(rec *record, withPos bool) error {
	return c.step(func(r *spillReader) error { return r.next(rec, withPos) })
}

func (c *spillChain) skip() error { return c.step(func(r *spillReader) error { return r.skip() }) }

func (c *spillChain) close() {
	if c.cur != nil {
		c.cur.close()
		c.cur = nil
	}
}
