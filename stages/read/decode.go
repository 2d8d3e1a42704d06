package read

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"

	"github.com/klauspost/compress/zstd"
	"github.com/zeebo/xxh3"
)

// Codec names a compression format detected from magic bytes.
type Codec string

// Codecs recognised by Decode.
const (
	CodecNone Codec = "none"
	CodecGzip Codec = "gzip"
	CodecZstd Codec = "zstd"
)

var (
	magicGzip = []byte{0x1f, 0x8b}
	magicZstd = []byte{0x28, 0xb5, 0x2f, 0xfd}
)

// sniffCodec reports the codec whose magic bytes start head.
func sniffCodec(head []byte) Codec {
	switch {
	case bytes.HasPrefix(head, magicZstd):
		return CodecZstd
	case bytes.HasPrefix(head, magicGzip):
		return CodecGzip
	}
	return CodecNone
}

// RawCounter counts and hashes the bytes read from the underlying file, so
// the manifest can name every input's size and xxh3 without a second read,
// and a decode error can name the compressed byte offset it happened at.
type RawCounter struct {
	r    io.Reader
	n    int64
	hash *xxh3.Hasher
}

// NewRawCounter wraps r.
func NewRawCounter(r io.Reader) *RawCounter { return &RawCounter{r: r, hash: xxh3.New()} }

func (c *RawCounter) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	c.hash.Write(p[:n])
	return n, err
}

// N returns the bytes read so far.
func (c *RawCounter) N() int64 { return c.n }

// Drain reads the rest of the underlying stream (so the digest covers the
// whole file) and returns the final size and xxh3-64 as 16 hex digits.
func (c *RawCounter) Drain() (int64, string) {
	io.Copy(io.Discard, c)
	return c.n, fmt.Sprintf("%016x", c.hash.Sum64())
}

// Decoded is a decompressed view of an input stream.
type Decoded struct {
	io.Reader
	Codec Codec
	Raw   *RawCounter
	close func()
}

// Close releases decoder resources (not the underlying file).
func (d *Decoded) Close() {
	if d.close != nil {
		d.close()
	}
}

// Decode sniffs the magic bytes of r and returns a reader of the
// decompressed bytes: gzip (including multi-member files such as
// per-record-compressed WARC) and zstd are detected by content, never by
// file name. A corrupt or truncated stream surfaces as a read error
// (wrapped in *DecodeError) after every byte before the damage.
func Decode(r io.Reader) (*Decoded, error) {
	raw := NewRawCounter(r)
	br := bufio.NewReaderSize(raw, 256<<10)
	head, err := br.Peek(4)
	if err != nil && err != io.EOF && !errors.Is(err, bufio.ErrBufferFull) {
		return nil, err
	}
	d := &Decoded{Codec: sniffCodec(head), Raw: raw}
	switch d.Codec {
	case CodecGzip:
		zr, err := gzip.NewReader(br)
		if err != nil {
			return nil, &DecodeError{Codec: d.Codec, Offset: raw.N(), Err: err}
		}
		d.Reader = &errWrap{r: zr, codec: d.Codec, raw: raw}
		d.close = func() { zr.Close() }
	case CodecZstd:
		zr, err := zstd.NewReader(br, zstd.WithDecoderConcurrency(1), zstd.WithDecoderMaxMemory(1<<31))
		if err != nil {
			return nil, &DecodeError{Codec: d.Codec, Offset: raw.N(), Err: err}
		}
		d.Reader = &errWrap{r: zr, codec: d.Codec, raw: raw}
		d.close = zr.Close
	default:
		d.Reader = br
	}
	return d, nil
}

// DecodeError is a failure inside a compressed stream.
type DecodeError struct {
	Codec Codec
	// Offset is the number of compressed bytes consumed when the error
	// surfaced (the damage is at or before it).
	Offset int64
	// Decoded is the number of decompressed bytes delivered before it.
	Decoded int64
	Err     error
}

func (e *DecodeError) Error() string {
	return fmt.Sprintf("%s stream broken near compressed byte %d (after %d decompressed bytes): %v", e.Codec, e.Offset, e.Decoded, e.Err)
}

func (e *DecodeError) Unwrap() error { return e.Err }

type errWrap struct {
	r     io.Reader
	codec Codec
	raw   *RawCounter
	out   int64
}

func (w *errWrap) Read(p []byte) (int, error) {
	n, err := w.r.Read(p)
	w.out += int64(n)
	if err != nil && err != io.EOF {
		return n, &DecodeError{Codec: w.codec, Offset: w.raw.N(), Decoded: w.out, Err: err}
	}
	return n, err
}
