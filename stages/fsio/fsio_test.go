package fsio

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// A file appears under its final name only after Commit; Abort leaves
// nothing behind.
func TestAtomicFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "manifest.json")
	a, err := CreateAtomic(p)
	if err != nil {
		t.Fatal(err)
	}
	a.Write([]byte("{}"))
	if _, err := os.Stat(p); err == nil {
		t.Fatal("final name visible before Commit")
	}
	if err := a.Commit(); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(p); string(b) != "{}" {
		t.Errorf("content %q", b)
	}
	b, _ := CreateAtomic(filepath.Join(dir, "other"))
	b.Write([]byte("x"))
	b.Abort()
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("left behind: %v", entries)
	}
}

// The compressed bytes depend only on the bytes written, not on how the
// writes were split (the encoder runs on its own goroutine), and decode
// back to the input with the zstd reference decoder of the same library.
func TestZstdWriterDeterministic(t *testing.T) {
	var data bytes.Buffer
	for i := 0; i < 200000; i++ {
		fmt.Fprintf(&data, `{"doc":"d%d","rule":"fewest_words","value":%d}`+"\n", i, i%97)
	}
	dir := t.TempDir()
	var digests []string
	for k, split := range []int{1 << 20, 4096, 7} {
		z, err := CreateZstd(filepath.Join(dir, fmt.Sprintf("f%d.zst", k)))
		if err != nil {
			t.Fatal(err)
		}
		b := data.Bytes()
		for len(b) > 0 {
			n := min(split, len(b))
			z.Write(b[:n])
			b = b[n:]
		}
		if err := z.Commit(); err != nil {
			t.Fatal(err)
		}
		if z.RawBytes() != int64(data.Len()) {
			t.Errorf("raw bytes %d", z.RawBytes())
		}
		digests = append(digests, z.Digest())
		n, h, err := HashFile(z.Path())
		if err != nil || n != z.Size() || h != z.Digest() {
			t.Errorf("HashFile %d %s, writer %d %s", n, h, z.Size(), z.Digest())
		}
		f, _ := os.Open(z.Path())
		d, _ := zstd.NewReader(f)
		got, err := io.ReadAll(d)
		d.Close()
		f.Close()
		if err != nil || !bytes.Equal(got, data.Bytes()) {
			t.Fatalf("split %d: round trip failed: %v", split, err)
		}
	}
	if digests[0] != digests[1] || digests[1] != digests[2] {
		t.Errorf("digests differ by write pattern: %v", digests)
	}
}

// A stream resumed from a checkpoint is byte for byte the stream written
// without interruption, whatever was written after the checkpoint.
func TestZstdCheckpointResume(t *testing.T) {
	dir := t.TempDir()
	a := bytes.Repeat([]byte(`{"doc":"a","rule":"fewest_words"}`+"\n"), 5000)
	b := bytes.Repeat([]byte(`{"doc":"b","rule":"near_duplicate"}`+"\n"), 7000)
	whole, _ := CreateZstd(filepath.Join(dir, "whole.zst"))
	whole.Write(a)
	if _, _, err := whole.Checkpoint(); err != nil {
		t.Fatal(err)
	}
	whole.Write(b)
	whole.Commit()

	cut, _ := CreateZstd(filepath.Join(dir, "cut.zst"))
	cut.Write(a)
	tmp, size, err := cut.Checkpoint()
	if err != nil {
		t.Fatal(err)
	}
	cut.Write([]byte("lost after the checkpoint\n")) // never committed: a crash
	resumed, err := ResumeZstd(filepath.Join(dir, "resumed.zst"), tmp, size)
	if err != nil {
		t.Fatal(err)
	}
	resumed.Write(b)
	if err := resumed.Commit(); err != nil {
		t.Fatal(err)
	}
	x, _ := os.ReadFile(whole.Path())
	y, _ := os.ReadFile(resumed.Path())
	if !bytes.Equal(x, y) || whole.Digest() != resumed.Digest() {
		t.Fatalf("resumed stream differs: %d vs %d bytes", len(x), len(y))
	}
	d, _ := zstd.NewReader(bytes.NewReader(y))
	got, _ := io.ReadAll(d)
	if !bytes.Equal(got, append(append([]byte{}, a...), b...)) {
		t.Error("resumed stream does not decode to both parts")
	}
}

// Sizes in decimal and binary units, as disk and memory sizes are written
// (IEC 80000-13 prefixes: KiB = 1024 bytes, kB = 1000 bytes).
func TestParseSize(t *testing.T) {
	for in, want := range map[string]int64{
		"500MB": 500e6, "2GiB": 2 << 30, "1.5G": 1.5e9, "4096": 4096, "64 KiB": 64 << 10, "10kb": 10e3, "3b": 3,
	} {
		got, err := ParseSize(in)
		if err != nil || got != want {
			t.Errorf("ParseSize(%q) = %d, %v; want %d", in, got, err, want)
		}
	}
	for _, in := range []string{"", "MB", "-5MB", "five", "1e400"} {
		if _, err := ParseSize(in); err == nil {
			t.Errorf("ParseSize(%q): no error", in)
		}
	}
}

// A stream whose frames end between stretches is the byte concatenation
// of streams written one stretch each; ending a frame with nothing new
// writes nothing; a stream that never got a byte is one empty frame,
// which a zstd reader (klauspost/compress, a general-purpose library)
// reads as empty. A split run relies on the concatenation.
func TestZstdEndFrameConcatenates(t *testing.T) {
	stretches := []string{strings.Repeat(`{"doc":"a","rule":"fewest_words"}`+"\n", 5000), "", `{"doc":"b"}` + "\n",
		strings.Repeat("x", 3<<20)}
	dir := t.TempDir()
	whole, err := CreateZstd(filepath.Join(dir, "whole.zst"))
	if err != nil {
		t.Fatal(err)
	}
	var parts []byte
	var all string
	for i, s := range stretches {
		whole.Write([]byte(s))
		if err := whole.EndFrame(); err != nil {
			t.Fatal(err)
		}
		if err := whole.EndFrame(); err != nil { // nothing new: no frame
			t.Fatal(err)
		}
		p, err := CreateZstd(filepath.Join(dir, fmt.Sprintf("part%d.zst", i)))
		if err != nil {
			t.Fatal(err)
		}
		p.Write([]byte(s))
		if err := p.Commit(); err != nil {
			t.Fatal(err)
		}
		if s != "" {
			b, _ := os.ReadFile(p.Path())
			parts = append(parts, b...)
		}
		all += s
	}
	if err := whole.Commit(); err != nil {
		t.Fatal(err)
	}
	got, _ := os.ReadFile(whole.Path())
	if !bytes.Equal(got, parts) {
		t.Errorf("stream with ended frames (%d bytes) is not the concatenation of its parts (%d bytes)", len(got), len(parts))
	}
	d, _ := zstd.NewReader(bytes.NewReader(got))
	text, err := io.ReadAll(d)
	d.Close()
	if err != nil || string(text) != all {
		t.Errorf("concatenation does not read back: %v", err)
	}
	empty, err := CreateZstd(filepath.Join(dir, "empty.zst"))
	if err != nil {
		t.Fatal(err)
	}
	empty.EndFrame()
	if err := empty.Commit(); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(empty.Path())
	d, _ = zstd.NewReader(bytes.NewReader(b))
	text, err = io.ReadAll(d)
	d.Close()
	if len(b) == 0 || err != nil || len(text) != 0 {
		t.Errorf("empty stream: %d bytes, %q, %v", len(b), text, err)
	}
}
