package read

import (
	"bytes"
	"io"
	"strconv"
	"strings"
	"testing"
)

// readWARCBytes reads WARC bytes (possibly compressed) with the record
// reader and returns docs, issues and the reader's final error.
func readWARCBytes(t testing.TB, b []byte, maxDoc int) (docs []*Doc, issues []*ReadIssue, skipped int64, err error) {
	dec, err := Decode(bytes.NewReader(b))
	if err != nil {
		return nil, nil, 0, err
	}
	defer dec.Close()
	rr, _, err := NewRecordReader(dec, "crawl.warc", 0, ReadOptions{Source: "crawl", Format: FormatWARC, MaxDocBytes: maxDoc})
	if err != nil {
		return nil, nil, 0, err
	}
	for {
		rec, e := rr.Next()
		if rec.Doc != nil {
			docs = append(docs, rec.Doc)
		}
		if rec.Issue != nil && rec.Doc == nil {
			issues = append(issues, rec.Issue)
		}
		if e != nil {
			if e != io.EOF {
				err = e
			}
			return docs, issues, rr.(*warcReader).Skipped, err
		}
	}
}

// withLength rewrites the Content-Length of one record built by warcRecord.
func withLength(rec string, delta int) string {
	i := strings.Index(rec, "Content-Length: ") + len("Content-Length: ")
	j := i + strings.Index(rec[i:], "\r\n")
	n, _ := strconv.Atoi(rec[i:j])
	return rec[:i] + strconv.Itoa(n+delta) + rec[j:]
}

// A record whose Content-Length is too long or too short costs only that
// record: the reader checks the record terminator (ISO 28500:2017 section
// 4: a record ends with two CRLFs after Content-Length octets of block),
// resynchronises at the next "WARC/" line and reports the record number.
func TestWARCWrongContentLength(t *testing.T) {
	texts := []string{"Haul-out at spring tide.", "Antifouling: two coats.", "Check the cutlass bearing.", "Launch after the paint cures.", "Log the engine hours."}
	build := func(bad, delta int, kind string) []byte {
		var b strings.Builder
		b.WriteString(warcRecord("warcinfo", "urn:uuid:info", "", "application/warc-fields", "software: hand\r\n"))
		for i, tx := range texts {
			rec := warcRecord(kind, "urn:uuid:"+strconv.Itoa(i), "https://yard.example/"+strconv.Itoa(i), "text/plain", tx)
			if kind == "response" && i%2 == 0 {
				rec = warcRecord("conversion", "urn:uuid:"+strconv.Itoa(i), "https://yard.example/"+strconv.Itoa(i), "text/plain", tx)
			}
			if i == bad {
				rec = withLength(rec, delta)
			}
			b.WriteString(rec)
		}
		return []byte(b.String())
	}
	for _, kind := range []string{"conversion", "response"} {
		for _, bad := range []int{0, 2, 3} {
			for _, delta := range []int{-1, -10, 1, 2, 4, 30, 200, 600} {
				raw := build(bad, delta, kind)
				for _, gz := range []bool{false, true} {
					in := raw
					if gz {
						in = gzipBytes(string(raw))
					}
					docs, issues, _, err := readWARCBytes(t, in, 1<<20)
					name := kind + " record " + strconv.Itoa(bad+2) + " length " + strconv.Itoa(delta)
					if err != nil {
						t.Errorf("%s: %v", name, err)
						continue
					}
					var got []string
					for _, d := range docs {
						got = append(got, d.Text)
					}
					var want []string
					for i, tx := range texts {
						if i != bad && (kind == "conversion" || i%2 == 0) {
							want = append(want, tx)
						}
					}
					if strings.Join(got, "|") != strings.Join(want, "|") {
						t.Errorf("%s: docs %q, want %q", name, got, want)
					}
					if len(issues) != 1 || issues[0].Rule != RuleMalformed || issues[0].Line != int64(bad+2) || !strings.Contains(issues[0].Msg, "record "+strconv.Itoa(bad+2)+":") {
						for _, is := range issues {
							t.Logf("%+v", is)
						}
						t.Errorf("%s: want one malformed_record naming record %d", name, bad+2)
					}
				}
			}
		}
	}
	// The same checks hold when the swallowing record is too big to keep
	// (it is streamed, not held).
	raw := build(1, 400, "conversion")
	docs, issues, _, err := readWARCBytes(t, raw, 30)
	if err != nil || len(issues) != 1 || issues[0].Line != 3 || issues[0].Rule != RuleMalformed || len(docs) != 4 {
		t.Fatalf("oversize swallowing record: %v %+v %d docs", err, issues, len(docs))
	}
	for _, d := range docs {
		if d.Text == texts[1] {
			t.Error("damaged record kept")
		}
	}
}

// Junk after a record's terminator cannot be told from a record whose
// Content-Length is too short, so that record is reported; the next record
// is read.
func TestWARCJunk(t *testing.T) {
	rec1 := warcRecord("conversion", "urn:uuid:a", "u", "text/plain", "First.")
	rec2 := warcRecord("conversion", "urn:uuid:b", "u", "text/plain", "Second.")
	docs, issues, _, err := readWARCBytes(t, []byte(rec1+"garbage line\r\nmore\r\n"+rec2), 1<<20)
	if err != nil || len(docs) != 1 || docs[0].Text != "Second." || len(issues) != 1 || issues[0].Line != 1 {
		t.Errorf("junk between: docs %v issues %+v err %v", docs, issues, err)
	}
}

// FuzzWARCReader writes records with the ISO 28500 record layout (the
// test's writer, warcRecord) and checks that the reader returns every one:
// conversion records as documents with the same text, the others counted as
// skipped. With one record's Content-Length changed, that record alone is
// reported and every other record is still returned.
func FuzzWARCReader(f *testing.F) {
	f.Add("Deck log.\x1fRigging check.\x1f\x1fEngine hours.", uint8(1), int16(7))
	f.Add("a\x1fb", uint8(0), int16(-1))
	f.Add("x\r\n\r\nWARZ\x1fy", uint8(3), int16(300))
	f.Add("only one", uint8(0), int16(0))
	f.Fuzz(func(t *testing.T, joined string, bad uint8, delta int16) {
		texts := strings.Split(joined, "\x1f")
		var b strings.Builder
		kinds := make([]string, len(texts))
		for i, tx := range texts {
			kinds[i] = "conversion"
			if i%3 == 2 {
				kinds[i] = "response"
			}
			rec := warcRecord(kinds[i], "urn:uuid:"+strconv.Itoa(i), "u", "text/plain", tx)
			if delta != 0 && int(bad) == i {
				if strings.Contains(joined, "WARC/") || int(delta) < -len(tx) {
					return // text that holds a version line is ambiguous after a wrong length
				}
				rec = withLength(rec, int(delta))
			}
			b.WriteString(rec)
		}
		if delta > 0 && int(bad) < len(texts) {
			// When the bytes after the claimed end are a terminator and
			// the start of a record (or the end), the damaged file is a
			// valid WARC file under the claimed length: no reader can
			// tell, so such inputs say nothing.
			raw := b.String()
			end := 0
			for i := 0; i <= int(bad); i++ {
				end = strings.Index(raw[end:], "Content-Length: ") + end
				end = strings.Index(raw[end:], "\r\n\r\n") + end + 4
				if i < int(bad) {
					end += len(texts[i]) + 4
				}
			}
			end += len(texts[bad]) + int(delta)
			if end <= len(raw) {
				rest := raw[end:]
				after := strings.TrimLeft(strings.TrimPrefix(rest, "\r\n\r\n"), "\r\n")
				if strings.HasPrefix(rest, "\r\n\r\n") && (after == "" || strings.HasPrefix(after, "WARC/")) {
					return
				}
			}
		}
		docs, issues, skipped, err := readWARCBytes(t, []byte(b.String()), 1<<20)
		damaged := -1
		if delta != 0 && int(bad) < len(texts) {
			damaged = int(bad)
		}
		if err != nil {
			// A record made too long at the end of the file is a
			// truncated file: only that record may be lost.
			if damaged != len(texts)-1 || delta < 0 {
				t.Fatalf("error %v (damaged record %d of %d)", err, damaged, len(texts))
			}
		}
		var want []string
		wantSkip := int64(0)
		for i, tx := range texts {
			if i == damaged {
				continue
			}
			if kinds[i] == "conversion" {
				fixed, _, _ := repairText(tx, false)
				want = append(want, fixed)
			} else {
				wantSkip++
			}
		}
		var got []string
		for _, d := range docs {
			got = append(got, d.Text)
		}
		if strings.Join(got, "\x1f") != strings.Join(want, "\x1f") || skipped != wantSkip {
			t.Fatalf("docs %q skipped %d, want %q skipped %d (damaged %d, delta %d)", got, skipped, want, wantSkip, damaged, delta)
		}
		if damaged >= 0 && err == nil {
			if len(issues) != 1 || issues[0].Line != int64(damaged+1) {
				t.Fatalf("issues %+v, want one for record %d", issues, damaged+1)
			}
		}
		if damaged < 0 && len(issues) != 0 {
			t.Fatalf("issues on an intact file: %+v", issues)
		}
	})
}
