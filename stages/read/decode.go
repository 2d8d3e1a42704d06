package read

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"encoding/binary"
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

// isZstdSkippable reports whether head starts with a zstd skippable frame
// (RFC 8878 section 3.1.2: magic 0x184D2A50 to 0x184D2A5F, little-endian),
// which parallel writers such as pzstd put before the data frames.
func isZstdSkippable(head []byte) bool {
	return len(head) >= 4 && head[0]&0xf0 == 0x50 && head[1] == 0x2a && head[2] == 0x4d && head[3] == 0x18
}

// sniffCodec reports the codec whose magic bytes start head.
func sniffCodec(head []byte) Codec {
	switch {
	case bytes.HasPrefix(head, magicZstd), isZstdSkippable(head):
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

// newRawCounter wraps r.
func newRawCounter(r io.Reader) *RawCounter { return &RawCounter{r: r, hash: xxh3.New()} }

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
	warn  []string
}

// Warnings returns what the decoder tolerated (zero padding after the
// last compressed stream), one sentence each; complete once the reader
// has returned io.EOF.
func (d *Decoded) Warnings() []string { return d.warn }

func (d *Decoded) warnf(format string, args ...any) {
	d.warn = append(d.warn, fmt.Sprintf(format, args...))
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
	raw := newRawCounter(r)
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
		zr.Multistream(false)
		d.Reader = &errWrap{r: &gzipMembers{br: br, zr: zr, d: d}, codec: d.Codec, raw: raw}
		d.close = func() { zr.Close() }
	case CodecZstd:
		fr := &zstdFramer{br: br, d: d}
		zr, err := zstd.NewReader(fr, zstd.WithDecoderConcurrency(1), zstd.WithDecoderMaxMemory(1<<31))
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

// skipZeros consumes a run of zero bytes from br and returns its length
// and whether the stream ended right after it.
func skipZeros(br *bufio.Reader) (n int64, atEOF bool) {
	for {
		if br.Buffered() == 0 {
			if _, err := br.Peek(1); err != nil {
				return n, true
			}
		}
		b, _ := br.Peek(br.Buffered())
		i := 0
		for i < len(b) && b[i] == 0 {
			i++
		}
		br.Discard(i)
		n += int64(i)
		if i < len(b) {
			return n, false
		}
	}
}

// gzipMembers reads a gzip file member by member (RFC 1952 section 2.2:
// a file is a series of members), so that what follows the last member can
// be judged: zero bytes (the padding some tape and block writers add, which
// gzip -d also ignores) are reported as a warning; anything else that is
// not a member is an error, as before.
type gzipMembers struct {
	br  *bufio.Reader
	zr  *gzip.Reader
	d   *Decoded
	off int64 // compressed bytes before the current member's end
}

func (g *gzipMembers) Read(p []byte) (int, error) {
	for {
		n, err := g.zr.Read(p)
		if err != io.EOF {
			return n, err
		}
		b, _ := g.br.Peek(2)
		switch {
		case len(b) == 0:
			return n, io.EOF
		case b[0] == 0:
			z, eof := skipZeros(g.br)
			if eof {
				g.d.warnf("%d zero bytes of padding after the last gzip member ignored", z)
				return n, io.EOF
			}
			return n, fmt.Errorf("%d zero bytes followed by data that is not a gzip member: %w", z, gzip.ErrHeader)
		case bytes.HasPrefix(b, magicGzip):
			if err := g.zr.Reset(g.br); err != nil {
				return n, err
			}
			g.zr.Multistream(false)
			if n > 0 {
				return n, nil
			}
		default:
			return n, fmt.Errorf("data after a gzip member is not a gzip member: %w", gzip.ErrHeader)
		}
	}
}

// zstdFramer passes a zstd stream through to the decoder while following
// its frame layout (RFC 8878 section 3.1: frame header, blocks with 3-byte
// headers, optional checksum; skippable frames with a 4-byte size), so it
// knows where each frame ends. Zero bytes where the next frame should
// start and running to the end of the file are padding: they are dropped
// with a warning instead of failing as a bad magic number. Anything it does
// not recognise is passed through untouched for the decoder to judge.
type zstdFramer struct {
	br       *bufio.Reader
	d        *Decoded
	left     int64 // bytes of the current section still to pass through
	state    int
	checksum bool
	frames   int
}

const (
	zfBoundary    = iota // next: a frame (or the end)
	zfBlock              // next: a block header
	zfChecksum           // next: the frame's optional checksum
	zfPassthrough        // layout not followed any more
)

func (z *zstdFramer) Read(p []byte) (int, error) {
	for z.left == 0 && z.state != zfPassthrough {
		if !z.next() {
			return 0, io.EOF
		}
	}
	if z.state == zfPassthrough {
		return z.br.Read(p)
	}
	if int64(len(p)) > z.left {
		p = p[:z.left]
	}
	n, err := z.br.Read(p)
	z.left -= int64(n)
	return n, err
}

// next sets up the next section; false means the stream ends here.
func (z *zstdFramer) next() bool {
	switch z.state {
	case zfBoundary:
		h, _ := z.br.Peek(8)
		if len(h) == 0 {
			return false
		}
		if z.frames > 0 && h[0] == 0 {
			n, eof := skipZeros(z.br)
			if eof {
				z.d.warnf("%d zero bytes of padding after the last zstd frame ignored", n)
				return false
			}
			z.state = zfPassthrough // data after zeros: let the decoder report it
			return true
		}
		switch {
		case len(h) >= 5 && bytes.HasPrefix(h, magicZstd):
			fhd := h[4]
			size := int64(5)
			single := fhd&0x20 != 0
			if !single {
				size++ // window descriptor
			}
			size += [4]int64{0, 1, 2, 4}[fhd&3] // dictionary id
			fcs := [4]int64{0, 2, 4, 8}[fhd>>6]
			if fcs == 0 && single {
				fcs = 1
			}
			z.left = size + fcs
			z.checksum = fhd&4 != 0
			z.state = zfBlock
		case len(h) == 8 && isZstdSkippable(h):
			z.left = 8 + int64(binary.LittleEndian.Uint32(h[4:]))
			z.frames++
		default:
			z.state = zfPassthrough
		}
	case zfBlock:
		h, _ := z.br.Peek(3)
		if len(h) < 3 {
			z.state = zfPassthrough
			return true
		}
		v := uint32(h[0]) | uint32(h[1])<<8 | uint32(h[2])<<16
		size := int64(v >> 3)
		switch (v >> 1) & 3 {
		case 1: // RLE block: one byte repeated size times
			size = 1
		case 3: // reserved
			z.state = zfPassthrough
			return true
		}
		z.left = 3 + size
		if v&1 != 0 {
			z.state = zfChecksum
		}
	case zfChecksum:
		if z.checksum {
			z.left = 4
		}
		z.state = zfBoundary
		z.frames++
	}
	return true
}
