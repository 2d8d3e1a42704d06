// Package fsio holds the file plumbing every writer of a run shares: files
// that appear only when complete (temp name + rename), zstd-compressed
// JSONL streams, and xxh3 digests of what was written.
package fsio

import (
	"bufio"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/klauspost/compress/zstd"
	"github.com/zeebo/xxh3"
)

// AtomicFile is a file written under a temporary name in the destination
// directory and renamed to its final name by Commit. A reader never sees a
// half-written file; an interrupted run leaves only ".tmp-" files behind,
// which Abort (or the next run) removes.
type AtomicFile struct {
	f     *os.File
	final string
	buf   *bufio.Writer
	hash  *xxh3.Hasher
	n     int64
	done  bool
}

// CreateAtomic opens a temp file next to path.
func CreateAtomic(path string) (*AtomicFile, error) {
	dir := filepath.Dir(path)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	f, err := os.CreateTemp(dir, ".tmp-"+filepath.Base(path)+"-*")
	if err != nil {
		return nil, err
	}
	// CreateTemp makes the file private (0600); a run's outputs are
	// shared like any file the user creates.
	if err := f.Chmod(fileMode()); err != nil {
		f.Close()
		os.Remove(f.Name())
		return nil, err
	}
	return &AtomicFile{f: f, final: path, buf: bufio.NewWriterSize(f, 1<<20), hash: xxh3.New()}, nil
}

// Write writes p to the temp file and to the running digest.
func (a *AtomicFile) Write(p []byte) (int, error) {
	a.hash.Write(p)
	n, err := a.buf.Write(p)
	a.n += int64(n)
	return n, err
}

// Size returns the number of bytes written so far.
func (a *AtomicFile) Size() int64 { return a.n }

// Digest returns the xxh3-64 of the bytes written so far, as 16 hex digits.
func (a *AtomicFile) Digest() string { return fmt.Sprintf("%016x", a.hash.Sum64()) }

// Path returns the final path.
func (a *AtomicFile) Path() string { return a.final }

// Commit flushes, syncs and renames the temp file to its final name.
func (a *AtomicFile) Commit() error {
	if a.done {
		return nil
	}
	a.done = true
	if err := a.buf.Flush(); err != nil {
		a.f.Close()
		os.Remove(a.f.Name())
		return err
	}
	if err := a.f.Sync(); err != nil {
		a.f.Close()
		os.Remove(a.f.Name())
		return err
	}
	if err := a.f.Close(); err != nil {
		os.Remove(a.f.Name())
		return err
	}
	return os.Rename(a.f.Name(), a.final)
}

// Flush makes every byte written so far durable in the temp file.
func (a *AtomicFile) Flush() error {
	if err := a.buf.Flush(); err != nil {
		return err
	}
	return a.f.Sync()
}

// TempPath returns the temporary name the file is written under.
func (a *AtomicFile) TempPath() string { return a.f.Name() }

// Detach closes the temp file and leaves it on disk, unfinished: the
// bytes up to the stream's last checkpoint stay for a resumed run to copy
// (the next run removes what nobody resumes).
func (a *AtomicFile) Detach() {
	if a.done {
		return
	}
	a.done = true
	a.buf.Flush()
	a.f.Close()
}

// Abort removes the temp file.
func (a *AtomicFile) Abort() {
	if a.done {
		return
	}
	a.done = true
	a.f.Close()
	os.Remove(a.f.Name())
}

// WriteFileAtomic writes data to path through a temp file and rename.
func WriteFileAtomic(path string, data []byte) error {
	a, err := CreateAtomic(path)
	if err != nil {
		return err
	}
	if _, err := a.Write(data); err != nil {
		a.Abort()
		return err
	}
	return a.Commit()
}

// ZstdWriter is a zstd stream written atomically. Its Digest is the xxh3 of
// the compressed bytes (what lands on disk, what a user can re-hash).
//
// Compression runs on a goroutine of its own: Write only copies into a
// buffer, so the single goroutine that writes a run's ledger, metrics and
// shards in order is not held up by the encoder, and the encoders of
// different files run in parallel. The compressed bytes depend only on the
// byte sequence written, never on buffer boundaries or timing.
type ZstdWriter struct {
	file *AtomicFile
	enc  *zstd.Encoder
	raw  int64
	buf  []byte
	work chan []byte
	free chan []byte
	done chan error
	err  error
	// open is set while a frame has bytes not yet ended: frames are only
	// ever ended with content, so a file's bytes are the concatenation of
	// one frame per non-empty stretch between EndFrame calls (or a single
	// empty frame for a file that never got a byte).
	open bool
}

// Tuning of the compression hand-off.
const (
	zstdChunk    = 1 << 20 // bytes handed to the encoder goroutine at once
	zstdInFlight = 2       // chunks queued per file: bounds memory at ~3 MiB per open file
	// zstdWindow is the encoder's match window. A run keeps a few dozen
	// streams open (ledger and metrics per stage, shards); the default 8 MiB
	// window costs ~16 MiB per stream, 2 MiB keeps all of them near 100 MiB
	// for a compression ratio within a few percent on JSON lines.
	zstdWindow = 2 << 20
)

// CreateZstd opens an atomic zstd stream at path. Encoding is
// single-threaded per file and at the default level so that output bytes do
// not depend on the machine.
func CreateZstd(path string) (*ZstdWriter, error) {
	a, err := CreateAtomic(path)
	if err != nil {
		return nil, err
	}
	return newZstd(a)
}

// ResumeZstd opens an atomic zstd stream at path whose first size bytes are
// copied from prefix, the file (temporary or committed) of a stream that
// Checkpoint reported at that size; writing then continues with a new
// frame. The result is byte for byte the stream an uninterrupted writer
// would have produced.
func ResumeZstd(path, prefix string, size int64) (*ZstdWriter, error) {
	a, err := CreateAtomic(path)
	if err != nil {
		return nil, err
	}
	f, err := os.Open(prefix)
	if err != nil {
		a.Abort()
		return nil, err
	}
	defer f.Close()
	if n, err := io.CopyN(a, f, size); err != nil {
		a.Abort()
		return nil, fmt.Errorf("resume %s from %s: %d of %d bytes: %w", path, prefix, n, size, err)
	}
	return newZstd(a)
}

func newZstd(a *AtomicFile) (*ZstdWriter, error) {
	enc, err := zstd.NewWriter(a, zstd.WithEncoderConcurrency(1), zstd.WithEncoderLevel(zstd.SpeedDefault),
		zstd.WithWindowSize(zstdWindow), zstd.WithLowerEncoderMem(true))
	if err != nil {
		a.Abort()
		return nil, err
	}
	z := &ZstdWriter{file: a, enc: enc}
	z.start()
	return z, nil
}

func (z *ZstdWriter) start() {
	z.work = make(chan []byte, zstdInFlight)
	if z.free == nil {
		z.free = make(chan []byte, zstdInFlight+1)
	}
	z.done = make(chan error, 1)
	go z.compress(z.work)
}

// Checkpoint ends the current zstd frame and makes everything written so
// far durable in the temp file. It returns the temp file's path and size;
// ResumeZstd continues from there. Writing may go on (in a new frame).
func (z *ZstdWriter) Checkpoint() (string, int64, error) {
	if err := z.EndFrame(); err != nil {
		return "", 0, err
	}
	if err := z.file.Flush(); err != nil {
		return "", 0, err
	}
	return z.file.TempPath(), z.file.Size(), nil
}

// EndFrame ends the current zstd frame when it holds any byte (an empty
// stretch writes nothing). The frame's bytes depend only on what was
// written since the previous EndFrame, so a file whose frames end at the
// same places is the byte-for-byte concatenation of files written one
// stretch each: a run split into units of work relies on it.
func (z *ZstdWriter) EndFrame() error {
	if !z.open {
		return z.err
	}
	if err := z.finish(); err != nil {
		return err
	}
	if err := z.enc.Close(); err != nil {
		return err
	}
	z.enc.Reset(z.file)
	z.open = false
	z.start()
	return nil
}

func (z *ZstdWriter) compress(work <-chan []byte) {
	var err error
	for chunk := range work {
		if err == nil {
			_, err = z.enc.Write(chunk)
		}
		select {
		case z.free <- chunk[:0]:
		default:
		}
	}
	z.done <- err
}

// Write queues p for compression.
func (z *ZstdWriter) Write(p []byte) (int, error) {
	if z.err != nil {
		return 0, z.err
	}
	z.raw += int64(len(p))
	if len(p) > 0 {
		z.open = true
	}
	if z.buf == nil {
		select {
		case z.buf = <-z.free:
		default:
			z.buf = make([]byte, 0, zstdChunk+64<<10)
		}
	}
	z.buf = append(z.buf, p...)
	if len(z.buf) >= zstdChunk {
		z.work <- z.buf
		z.buf = nil
	}
	return len(p), nil
}

// finish drains the queue and stops the goroutine.
func (z *ZstdWriter) finish() error {
	if z.work == nil {
		return z.err
	}
	if len(z.buf) > 0 {
		z.work <- z.buf
		z.buf = nil
	}
	close(z.work)
	z.work = nil
	if err := <-z.done; err != nil && z.err == nil {
		z.err = err
	}
	return z.err
}

// Detach stops the stream and leaves its temp file on disk (see
// AtomicFile.Detach).
func (z *ZstdWriter) Detach() { z.finish(); z.enc.Close(); z.file.Detach() }

// TempPath returns the temporary name the stream is written under.
func (z *ZstdWriter) TempPath() string { return z.file.TempPath() }

// Commit finishes the stream and renames the file into place.
func (z *ZstdWriter) Commit() error {
	if err := z.finish(); err != nil {
		z.enc.Close()
		z.file.Abort()
		return err
	}
	if !z.open && z.file.Size() > 0 {
		// The last frame ended already: close the encoder without a
		// trailing empty frame.
		z.enc.Reset(io.Discard)
	}
	if err := z.enc.Close(); err != nil {
		z.file.Abort()
		return err
	}
	return z.file.Commit()
}

// Abort drops the stream.
func (z *ZstdWriter) Abort() { z.finish(); z.enc.Close(); z.file.Abort() }

// RawBytes returns the uncompressed bytes written so far.
func (z *ZstdWriter) RawBytes() int64 { return z.raw }

// Size returns the compressed bytes on disk (valid after Commit).
func (z *ZstdWriter) Size() int64 { return z.file.Size() }

// Digest returns the xxh3-64 of the compressed bytes (valid after Commit).
func (z *ZstdWriter) Digest() string { return z.file.Digest() }

// Path returns the final path.
func (z *ZstdWriter) Path() string { return z.file.Path() }

// HashFile returns the size and xxh3-64 (16 hex digits) of a file's bytes.
func HashFile(path string) (int64, string, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, "", err
	}
	defer f.Close()
	h := xxh3.New()
	n, err := io.Copy(h, bufio.NewReaderSize(f, 1<<20))
	if err != nil {
		return n, "", err
	}
	return n, fmt.Sprintf("%016x", h.Sum64()), nil
}

// Hex128 formats a 128-bit xxh3 digest as 32 hex digits.
func Hex128(h xxh3.Uint128) string {
	b := h.Bytes()
	return hex.EncodeToString(b[:])
}
