package read

import (
	"bufio"
	"bytes"
	"io"
	"strings"
	"testing"
)

// FuzzLineReader compares the bounded line reader with bytes.Split (the
// standard library's reference): every line comes back in order, with its
// number; a line longer than the limit is reported as oversize with its
// true length and costs nothing but itself. A 16-byte read buffer makes
// short inputs cross buffer boundaries the way long lines do.
func FuzzLineReader(f *testing.F) {
	f.Add([]byte("one\ntwo\r\n\nthree"), uint8(4))
	f.Add([]byte(strings.Repeat("x", 100)+"\nshort\n"+strings.Repeat("y", 40)+"\r\nend\n"), uint8(8))
	f.Add([]byte("\n\n\r\n"), uint8(0))
	f.Add([]byte("no newline at all, longer than the limit"), uint8(3))
	f.Fuzz(func(t *testing.T, data []byte, limit uint8) {
		max := int(limit)
		lr := &lineReader{br: bufio.NewReaderSize(bytes.NewReader(data), 16), max: max}
		want := bytes.SplitAfter(data, []byte("\n"))
		if len(want) > 0 && len(want[len(want)-1]) == 0 {
			want = want[:len(want)-1]
		}
		for i, raw := range want {
			line, n, over, err := lr.next()
			if err != nil && err != io.EOF {
				t.Fatalf("line %d: %v", i+1, err)
			}
			if lr.line != int64(i+1) || n != int64(len(raw)) {
				t.Fatalf("line %d: number %d, length %d, want %d", i+1, lr.line, n, len(raw))
			}
			if wantOver := len(raw) > max+2; over != wantOver {
				t.Fatalf("line %d (%d bytes, limit %d): oversize %v", i+1, len(raw), max, over)
			}
			if !over {
				exp := bytes.TrimSuffix(bytes.TrimSuffix(raw, []byte("\n")), []byte("\r"))
				if !bytes.Equal(line, exp) {
					t.Fatalf("line %d = %q, want %q", i+1, line, exp)
				}
			}
		}
		if _, _, _, err := lr.next(); err != io.EOF {
			t.Fatalf("after %d lines: %v, want EOF", len(want), err)
		}
	})
}
