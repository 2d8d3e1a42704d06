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
type ZstdWriter struct {
	file *AtomicFile
	enc  *zstd.Encoder
	raw  int64
}

// CreateZstd opens an atomic zstd stream at path. Encoding is
// single-threaded and at the default level so that output bytes do not
// depend on the machine.
func CreateZstd(path string) (*ZstdWriter, error) {
	a, err := CreateAtomic(path)
	if err != nil {
		return nil, err
	}
	enc, err := zstd.NewWriter(a, zstd.WithEncoderConcurrency(1), zstd.WithEncoderLevel(zstd.SpeedDefault))
	if err != nil {
		a.Abort()
		return nil, err
	}
	return &ZstdWriter{file: a, enc: enc}, nil
}

// Write compresses p into the stream.
func (z *ZstdWriter) Write(p []byte) (int, error) {
	z.raw += int64(len(p))
	return z.enc.Write(p)
}

// RawBytes returns the uncompressed bytes written so far.
func (z *ZstdWriter) RawBytes() int64 { return z.raw }

// Commit finishes the stream and renames the file into place.
func (z *ZstdWriter) Commit() error {
	if err := z.enc.Close(); err != nil {
		z.file.Abort()
		return err
	}
	return z.file.Commit()
}

// Abort drops the stream.
func (z *ZstdWriter) Abort() { z.enc.Close(); z.file.Abort() }

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
