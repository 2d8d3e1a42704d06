package read

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// wgetMembers returns the records of the wget-written fixture, one per
// gzip member, split with the standard library's gzip reader (not the
// WARC parser under test).
func wgetMembers(t testing.TB) [][]byte {
	raw, err := os.ReadFile(filepath.Join("..", "..", "testdata", "warc", "crawl.warc.gz"))
	if err != nil {
		t.Fatal(err)
	}
	br := bufio.NewReader(bytes.NewReader(raw))
	var members [][]byte
	for {
		if _, err := br.Peek(1); err == io.EOF {
			return members
		}
		zr, err := gzip.NewReader(br)
		if err != nil {
			t.Fatal(err)
		}
		zr.Multistream(false)
		m, err := io.ReadAll(zr)
		if err != nil {
			t.Fatal(err)
		}
		members = append(members, m)
	}
}

// Every record wget wrote is returned: documents (its log, a text/plain
// resource) plus skipped records add up to the number of gzip members.
func TestWARCWrittenByWget(t *testing.T) {
	members := wgetMembers(t)
	raw, _ := os.ReadFile(filepath.Join("..", "..", "testdata", "warc", "crawl.warc.gz"))
	docs, issues, skipped, err := readWARCBytes(t, raw, 1<<20)
	if err != nil || len(issues) != 0 {
		t.Fatalf("%v %+v", err, issues)
	}
	if int(skipped)+len(docs) != len(members) || len(docs) != 1 || !strings.Contains(docs[0].Text, "127.0.0.1") {
		t.Errorf("%d docs + %d skipped, wget wrote %d records", len(docs), skipped, len(members))
	}
}

// FuzzWARCRealBytes changes the Content-Length of one record of the wget
// fixture: that record alone is reported (by number) and every other
// record wget wrote is still returned. Its seeds run every record with
// lengths too short and too long.
func FuzzWARCRealBytes(f *testing.F) {
	members := wgetMembers(f)
	for i := range members {
		for _, d := range []int16{-1, -100, 1, 3, 4, 5, 250} {
			f.Add(uint8(i), d, false)
		}
		f.Add(uint8(i), int16(7), true)
	}
	f.Fuzz(func(t *testing.T, which uint8, delta int16, gz bool) {
		k := int(which) % len(members)
		rec := members[k]
		hdrEnd := bytes.Index(rec, []byte("\r\n\r\n")) + 4
		blockLen := len(rec) - hdrEnd - 4
		if int(delta) < -blockLen || delta == 0 {
			return
		}
		var file, plain bytes.Buffer
		end := 0
		for i, m := range members {
			if i == k {
				m = []byte(withLength(string(m), int(delta)))
				end = plain.Len() + hdrEnd + len(m) - len(rec) + blockLen + int(delta)
			}
			plain.Write(m)
			if gz {
				file.Write(gzipBytes(string(m)))
			} else {
				file.Write(m)
			}
		}
		// A claimed end that lands on a terminator followed by a record
		// start makes a valid file: nobody can tell (see FuzzWARCReader).
		if end <= plain.Len() {
			rest := plain.Bytes()[end:]
			after := bytes.TrimLeft(bytes.TrimPrefix(rest, warcTerminator), "\r\n")
			if bytes.HasPrefix(rest, warcTerminator) && (len(after) == 0 || bytes.HasPrefix(after, warcVersion)) {
				return
			}
		}
		docs, issues, skipped, err := readWARCBytes(t, file.Bytes(), 1<<20)
		if err != nil {
			if k == len(members)-1 && delta > 0 {
				return // the last record made longer than the file: truncated
			}
			t.Fatalf("record %d %+d: %v", k+1, delta, err)
		}
		if len(issues) != 1 || issues[0].Line != int64(k+1) || issues[0].Rule != RuleMalformed {
			t.Fatalf("record %d %+d: issues %+v", k+1, delta, issues)
		}
		if int(skipped)+len(docs) != len(members)-1 {
			t.Fatalf("record %d %+d: %d docs + %d skipped, want %d other records", k+1, delta, len(docs), skipped, len(members)-1)
		}
	})
}
