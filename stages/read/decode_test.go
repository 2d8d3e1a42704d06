package read

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// decodeAll decompresses b with Decode and returns the bytes, the error
// and the warnings.
func decodeAll(b []byte) ([]byte, Codec, []string, error) {
	d, err := Decode(bytes.NewReader(b))
	if err != nil {
		return nil, "", nil, err
	}
	defer d.Close()
	out, err := io.ReadAll(d)
	return out, d.Codec, d.Warnings(), err
}

// skippable builds a zstd skippable frame (RFC 8878 section 3.1.2).
func skippable(magicLow byte, data string) []byte {
	b := []byte{0x50 | magicLow, 0x2a, 0x4d, 0x18, 0, 0, 0, 0}
	binary.LittleEndian.PutUint32(b[4:], uint32(len(data)))
	return append(b, data...)
}

func zstdBytes(t testing.TB, text string, opts ...zstd.EOption) []byte {
	var b bytes.Buffer
	w, err := zstd.NewWriter(&b, opts...)
	if err != nil {
		t.Fatal(err)
	}
	w.Write([]byte(text))
	w.Close()
	return b.Bytes()
}

func gzipBytes(text string) []byte {
	var b bytes.Buffer
	w := gzip.NewWriter(&b)
	w.Write([]byte(text))
	w.Close()
	return b.Bytes()
}

// A zstd file that starts with a skippable frame, as pzstd (the parallel
// zstd command-line tool) writes it, is zstd, not binary data.
func TestZstdSkippableFrameFirst(t *testing.T) {
	pz := needTool(t, "pzstd")
	dir := t.TempDir()
	var want strings.Builder
	for i := 0; i < 3000; i++ {
		want.WriteString(`{"id":"w` + fmtInt(int64(i)) + `","text":"Work order ` + fmtInt(int64(i)) + `: re-bed the stanchion bases."}` + "\n")
	}
	p := writeFile(t, dir, "orders.jsonl", want.String())
	if out, err := exec.Command(pz, "-q", "-p", "2", p, "-o", p+".zst").CombinedOutput(); err != nil {
		t.Fatalf("pzstd: %v %s", err, out)
	}
	raw, _ := os.ReadFile(p + ".zst")
	if !isZstdSkippable(raw) {
		t.Fatalf("pzstd output does not start with a skippable frame: % x", raw[:8])
	}
	recs, err := readAll(t, p+".zst", ReadOptions{Source: "s"})
	if err != nil || len(recs) != 3000 || recs[2999].Doc.ID != "w2999" {
		t.Fatalf("pzstd file: %d records, %v", len(recs), err)
	}
	// Every skippable magic value, and several in a row.
	for low := byte(0); low < 16; low++ {
		b := append(skippable(low, "index"), skippable(15-low, "")...)
		b = append(b, zstdBytes(t, "Sail loft.\n")...)
		out, codec, _, err := decodeAll(b)
		if err != nil || codec != CodecZstd || string(out) != "Sail loft.\n" {
			t.Errorf("magic 0x184D2A5%X: %q %v %v", low, out, codec, err)
		}
	}
}

// Zero bytes after the last complete gzip member or zstd frame are
// padding: the stream's records are all read, a warning names the
// padding, and it is not a broken input. gzip -d likewise ignores trailing
// zeros (gzip 1.12, checked: exit 0). Other trailing data stays an error.
func TestZeroPaddingAfterStream(t *testing.T) {
	dir := t.TempDir()
	text := strings.Repeat("Rudder bearing replaced.\n", 500)
	p := writeFile(t, dir, "log.txt", text)
	gz := compressWith(t, "gzip", p)
	p = writeFile(t, dir, "log.txt", text)
	zs := compressWith(t, "zstd", p)
	for _, f := range []string{gz, zs} {
		b, _ := os.ReadFile(f)
		for _, pad := range []int{1, 4, 512, 70000} {
			padded := append(append([]byte(nil), b...), make([]byte, pad)...)
			out, _, warn, err := decodeAll(padded)
			if err != nil || string(out) != text {
				t.Errorf("%s + %d zeros: %d bytes, %v", filepath.Base(f), pad, len(out), err)
				continue
			}
			if len(warn) != 1 || !strings.Contains(warn[0], fmtInt(int64(pad))+" zero bytes") {
				t.Errorf("%s + %d zeros: warnings %q", filepath.Base(f), pad, warn)
			}
		}
		garbage := append(append(append([]byte(nil), b...), 0, 0), "junk"...)
		if _, _, _, err := decodeAll(garbage); err == nil {
			t.Errorf("%s + garbage: no error", filepath.Base(f))
		}
		out, _, warn, err := decodeAll(b)
		if err != nil || string(out) != text || len(warn) != 0 {
			t.Errorf("%s unpadded: %v %q", filepath.Base(f), err, warn)
		}
	}
	// Several gzip members, then padding.
	two := append(append(gzipBytes("one\n"), gzipBytes("two\n")...), make([]byte, 10)...)
	if out, _, warn, err := decodeAll(two); err != nil || string(out) != "one\ntwo\n" || len(warn) != 1 {
		t.Errorf("members+zeros: %q %v %q", out, err, warn)
	}
	// A truncated stream is still an error, not padding.
	b := zstdBytes(t, text)
	if _, _, _, err := decodeAll(b[:len(b)-3]); err == nil {
		t.Error("truncated zstd: no error")
	}
	var de *DecodeError
	if _, _, _, err := decodeAll(gzipBytes(text)[:40]); !errors.As(err, &de) {
		t.Errorf("truncated gzip: %v", err)
	}
}

var fuzzEncoders = map[[2]bool]*zstd.Encoder{}

// fuzzEncoder returns a cached encoder (making one per input would
// dominate the fuzzing time).
func fuzzEncoder(t *testing.T, crc, single bool) *zstd.Encoder {
	k := [2]bool{crc, single}
	if e := fuzzEncoders[k]; e != nil {
		return e
	}
	e, err := zstd.NewWriter(nil, zstd.WithEncoderCRC(crc), zstd.WithSingleSegment(single), zstd.WithEncoderConcurrency(1))
	if err != nil {
		t.Fatal(err)
	}
	fuzzEncoders[k] = e
	return e
}

// FuzzDecode checks the magic-byte sniffer and decoders against
// independent writers (klauspost/compress's zstd encoder, the standard
// library's gzip writer): whatever the data, split into frames or members,
// with or without checksums, a leading skippable frame or trailing zero
// padding, Decode returns exactly the bytes that were written, so no record
// is lost, and uncompressed text passes through unchanged.
func FuzzDecode(f *testing.F) {
	f.Add([]byte(`{"text":"Bilge pump."}`+"\n"), uint8(0), uint8(0))
	f.Add([]byte(strings.Repeat("a", 70000)), uint8(7), uint8(3))
	f.Add([]byte("WARC/1.1\r\n\r\n"), uint8(0x1f), uint8(0xff))
	f.Add([]byte{}, uint8(2), uint8(1))
	f.Add([]byte("x\x00\x00\x00\x00y"), uint8(0x0e), uint8(4))
	f.Fuzz(func(t *testing.T, data []byte, mode, split uint8) {
		parts := [][]byte{data}
		if n := int(split); n > 0 && len(data) > 1 {
			cut := n % len(data)
			parts = [][]byte{data[:cut], data[cut:]}
		}
		var b []byte
		switch mode & 3 {
		case 0:
			if len(data) > 0 && (data[0] == 0x1f || data[0] == 0x28 || data[0]&0xf0 == 0x50) {
				return // plain data that starts like a magic number is not plain
			}
			b = append(b, data...)
		case 1:
			for _, p := range parts {
				b = append(b, gzipBytes(string(p))...)
			}
		case 2, 3:
			enc := fuzzEncoder(t, mode&4 != 0, mode&8 != 0)
			if mode&16 != 0 {
				b = append(b, skippable(mode>>5, string(data[:len(data)/2]))...)
			}
			for _, p := range parts {
				b = enc.EncodeAll(p, b)
			}
			if mode&3 == 3 { // streaming writer: multi-block frames
				var w bytes.Buffer
				enc.Reset(&w)
				enc.Write(data)
				enc.Close()
				b = append(b, w.Bytes()...)
				data = append(append([]byte(nil), data...), data...)
			}
		}
		pad := 0
		if mode&3 != 0 && split&0x80 != 0 {
			pad = int(split&0x7f) + 1
			b = append(b, make([]byte, pad)...)
		}
		out, _, warn, err := decodeAll(b)
		if err != nil {
			t.Fatalf("mode %d split %d: %v", mode, split, err)
		}
		if !bytes.Equal(out, data) {
			t.Fatalf("mode %d split %d: got %d bytes, wrote %d", mode, split, len(out), len(data))
		}
		if (pad > 0) != (len(warn) > 0) {
			t.Fatalf("padding %d, warnings %q", pad, warn)
		}
	})
}
