package read

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// needTool returns the path of an external program the test relies on to
// write files independently of winnow's own code.
func needTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		t.Fatalf("%s not installed (scripts/test.sh installs it): %v", name, err)
	}
	return p
}

// compressWith compresses path in place with an external tool and returns
// the new path.
func compressWith(t *testing.T, tool, path string) string {
	t.Helper()
	needTool(t, tool)
	var cmd *exec.Cmd
	switch tool {
	case "zstd":
		cmd = exec.Command("zstd", "-q", "--rm", path, "-o", path+".zst")
		path += ".zst"
	case "gzip":
		cmd = exec.Command("gzip", "-n", path)
		path += ".gz"
	}
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("%s: %v: %s", tool, err, out)
	}
	return path
}

// readAll reads every record of a file through the decoder and parser.
func readAll(t *testing.T, path string, opt ReadOptions) ([]Record, error) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	dec, err := Decode(f)
	if err != nil {
		return nil, err
	}
	defer dec.Close()
	if opt.TextField == "" {
		opt.TextField = "text"
	}
	if opt.IDField == "" {
		opt.IDField = "id"
	}
	rr, _, err := NewRecordReader(dec, filepath.Base(path), 0, opt)
	if err != nil {
		return nil, err
	}
	return drainRecords(rr)
}

// drainRecords reads rr to its end and returns every record that holds a
// document or an issue, and the error that ended it (nil at io.EOF).
func drainRecords(rr RecordReader) ([]Record, error) {
	var recs []Record
	for {
		r, err := rr.Next()
		if r.Doc != nil || r.Issue != nil {
			recs = append(recs, r)
		}
		if err == io.EOF {
			return recs, nil
		}
		if err != nil {
			return recs, err
		}
	}
}

func writeFile(t *testing.T, dir, name, content string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

const sampleJSONL = `{"id":"m1","text":"Drain the raw-water strainer before winter.","url":"https://larkspur.example/m1"}
{"id":"m2","text":"Check the \"impeller\" vanes\nfor cracks.\u00e9","n":3,"tags":["a","b"]}
{"id":7,"text":"Numeric ids keep their literal."}
`

// Compressed files written by the zstd and gzip command-line tools (not by
// winnow's own encoder) decode to the same records as the plain file.
func TestReadJSONLCompressedByExternalTools(t *testing.T) {
	for _, tool := range []string{"", "zstd", "gzip"} {
		dir := t.TempDir()
		p := writeFile(t, dir, "manuals.jsonl", sampleJSONL)
		if tool != "" {
			p = compressWith(t, tool, p)
			// Name the file without extension: detection is by magic bytes.
			np := filepath.Join(dir, "noext")
			os.Rename(p, np)
			p = np
		}
		recs, err := readAll(t, p, ReadOptions{Source: "manuals", Format: FormatJSONL})
		if err != nil {
			t.Fatalf("%s: %v", tool, err)
		}
		if len(recs) != 3 {
			t.Fatalf("%s: got %d records, want 3", tool, len(recs))
		}
		d := recs[1].Doc
		if d.ID != "m2" || d.Text != "Check the \"impeller\" vanes\nfor cracks.é" {
			t.Errorf("%s: doc 2 = %q %q", tool, d.ID, d.Text)
		}
		if string(d.Meta["n"].(RawJSON)) != "3" || string(d.Meta["tags"].(RawJSON)) != `["a","b"]` {
			t.Errorf("%s: meta = %v", tool, d.Meta)
		}
		if recs[2].Doc.ID != "7" || recs[0].Doc.Input != 0 || recs[0].Doc.Line != 1 || recs[2].Doc.Line != 3 {
			t.Errorf("%s: id/position of doc 3 = %q %d", tool, recs[2].Doc.ID, recs[2].Doc.Line)
		}
	}
}

// A malformed line in the middle costs only that line.
func TestMalformedLineKeepsNeighbours(t *testing.T) {
	dir := t.TempDir()
	p := writeFile(t, dir, "a.jsonl", `{"id":"1","text":"first"}
{"id":"2","text":"unterminated}
{"id":"3","text":"third"}
[1,2]
{"id":"5","text":"fifth"} trailing
{"id":"6","text":"sixth"}
`)
	recs, err := readAll(t, p, ReadOptions{Source: "s"})
	if err != nil {
		t.Fatal(err)
	}
	var ids, issues []string
	for _, r := range recs {
		if r.Doc != nil {
			ids = append(ids, r.Doc.ID)
		}
		if r.Issue != nil {
			issues = append(issues, r.Issue.Rule+"@"+fmtInt(r.Issue.Line))
		}
	}
	if strings.Join(ids, ",") != "1,3,6" {
		t.Errorf("kept %v, want 1,3,6", ids)
	}
	if strings.Join(issues, ",") != "malformed_record@2,malformed_record@4,malformed_record@5" {
		t.Errorf("issues %v", issues)
	}
}

func fmtInt(n int64) string { return strconv.FormatInt(n, 10) }

// Invalid UTF-8 is replaced with U+FFFD and counted, and the document kept.
func TestInvalidUTF8Repaired(t *testing.T) {
	dir := t.TempDir()
	p := writeFile(t, dir, "a.jsonl", "{\"id\":\"u\",\"text\":\"bad \xff\xfe byte\"}\n")
	recs, err := readAll(t, p, ReadOptions{Source: "s"})
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 1 || recs[0].Doc == nil || recs[0].Issue == nil || recs[0].Issue.Rule != RuleInvalidUTF8 {
		t.Fatalf("got %+v", recs)
	}
	if recs[0].Doc.Text != "bad \uFFFD\uFFFD byte" {
		t.Errorf("text %q", recs[0].Doc.Text)
	}
}

// A truncated zstd or gzip file yields every document before the break,
// then an error naming the byte offset.
func TestTruncatedCompressedFile(t *testing.T) {
	var sb strings.Builder
	for i := 0; i < 3000; i++ {
		sb.WriteString(`{"id":"d` + fmtInt(int64(i)) + `","text":"Replace the sacrificial anode when it is half gone, lot ` + strconv.FormatUint(uint64(i)*0x9E3779B97F4A7C15, 36) + `."}` + "\n")
	}
	for _, tool := range []string{"zstd", "gzip"} {
		dir := t.TempDir()
		p := compressWith(t, tool, writeFile(t, dir, "big.jsonl", sb.String()))
		data, _ := os.ReadFile(p)
		cut := filepath.Join(dir, "cut")
		os.WriteFile(cut, data[:len(data)*2/3], 0o644)
		recs, err := readAll(t, cut, ReadOptions{Source: "s"})
		var de *DecodeError
		if !errors.As(err, &de) {
			t.Fatalf("%s: want a DecodeError, got %v", tool, err)
		}
		if de.Offset <= 0 || de.Offset > int64(len(data)) {
			t.Errorf("%s: offset %d", tool, de.Offset)
		}
		if len(recs) < 1000 || len(recs) >= 3000 {
			t.Errorf("%s: kept %d documents before the break", tool, len(recs))
		}
		for i, r := range recs {
			if r.Doc == nil || r.Doc.ID != "d"+fmtInt(int64(i)) {
				t.Fatalf("%s: record %d = %+v", tool, i, r)
			}
		}
	}
}

// A 100 MiB line is consumed without being held, reported as oversize, and
// the lines around it are kept.
func TestHugeLineOversize(t *testing.T) {
	var buf bytes.Buffer
	buf.WriteString(`{"id":"before","text":"ok"}` + "\n")
	buf.WriteString(`{"id":"huge","text":"`)
	chunk := bytes.Repeat([]byte("a"), 1<<20)
	for i := 0; i < 100; i++ {
		buf.Write(chunk)
	}
	buf.WriteString("\"}\n")
	buf.WriteString(`{"id":"after","text":"ok"}` + "\n")
	rr, _, err := NewRecordReader(&buf, "huge.jsonl", 0, ReadOptions{Source: "s", Format: FormatJSONL, TextField: "text", IDField: "id", MaxDocBytes: 8 << 20})
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for {
		r, err := rr.Next()
		if r.Doc != nil {
			got = append(got, r.Doc.ID)
		}
		if r.Issue != nil {
			got = append(got, r.Issue.Rule)
			if r.Issue.Bytes < 100<<20 || r.Issue.Line != 2 || !strings.Contains(r.Issue.Msg, "exceeds max_doc_bytes 8388608") {
				t.Errorf("oversize issue %+v", r.Issue)
			}
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if strings.Join(got, ",") != "before,oversize,after" {
		t.Errorf("got %v", got)
	}
	lr := rr.(*jsonlReader).lr
	if cap(lr.buf) > 9<<20 {
		t.Errorf("line buffer grew to %d bytes, want <= max_doc_bytes", cap(lr.buf))
	}
}

func TestEmptyAndBinaryInput(t *testing.T) {
	dir := t.TempDir()
	empty := writeFile(t, dir, "empty.jsonl", "")
	recs, err := readAll(t, empty, ReadOptions{Source: "s"})
	if err != nil || len(recs) != 0 {
		t.Errorf("empty: %v %v", recs, err)
	}
	bin := writeFile(t, dir, "blob.jsonl", string([]byte{0x7f, 'E', 'L', 'F', 0, 0, 1, 2, 3, 0, 0, 0}))
	if _, err := readAll(t, bin, ReadOptions{Source: "s"}); !errors.Is(err, ErrBinary) {
		t.Errorf("binary: got %v, want ErrBinary", err)
	}
}

// TestMultilineJSONIsOneError: a pretty-printed JSON document (real:
// the API documentation the nodejs package ships, testdata/nodejs-api)
// named .json is one error for the file, not a malformed record per line,
// whether the format was guessed or given; read as text it is text; JSON
// Lines after blank lines, or starting with a whole object, stay JSON Lines.
func TestMultilineJSONIsOneError(t *testing.T) {
	real := filepath.Join("..", "..", "testdata", "nodejs-api", "string_decoder.json.gz")
	for _, f := range []Format{FormatAuto, FormatJSONL} {
		if _, err := readAll(t, real, ReadOptions{Source: "s", Format: f}); !errors.Is(err, ErrMultilineJSON) {
			t.Errorf("format %s: got %v, want ErrMultilineJSON", f, err)
		}
	}
	recs, err := readAll(t, real, ReadOptions{Source: "s", Format: FormatText, TextMode: "file"})
	if err != nil || len(recs) != 1 || !strings.Contains(recs[0].Doc.Text, `"type": "module"`) {
		t.Errorf("as text: %d records, %v", len(recs), err)
	}
	dir := t.TempDir()
	for name, c := range map[string]struct {
		text  string
		multi bool
	}{
		"indented.json": {"\n\n   {  \n\"text\": \"a\"}\n", true},
		"crlf.json":     {"{\r\n\"text\": \"a\"}\r\n", true},
		"blank.jsonl":   {"\n\n{\"text\": \"a\"}\n{\"text\": \"b\"}\n", false},
		"compact.json":  {"{\"text\": \"a\"}\n", false},
		"opens.json":    {"{\"text\":\n\"a\"}\n", false}, // malformed records, judged per line
	} {
		p := writeFile(t, dir, name, c.text)
		_, err := readAll(t, p, ReadOptions{Source: "s"})
		if got := errors.Is(err, ErrMultilineJSON); got != c.multi {
			t.Errorf("%s: multi-line %v (%v), want %v", name, got, err, c.multi)
		}
	}
}

// FuzzLooksMultilineJSON: a head is called multi-line JSON only when its
// first non-blank line is a lone bracket, so a file whose first line is a
// whole JSON value (checked with encoding/json) is never refused.
func FuzzLooksMultilineJSON(f *testing.F) {
	for _, s := range []string{"{\n", "[\n", "\n  {  \n\"a\": 1}", "{\"a\":1}\n{", "{}\n", "{", "", "\n\n", " [ \r\n"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, head []byte) {
		got := looksMultilineJSON(head)
		var first []byte
		rest, found := head, false
		for {
			i := bytes.IndexByte(rest, '\n')
			if i < 0 {
				break
			}
			if l := bytes.TrimSpace(rest[:i]); len(l) > 0 {
				first, found = l, true
				break
			}
			rest = rest[i+1:]
		}
		want := found && (string(first) == "{" || string(first) == "[")
		if got != want {
			t.Fatalf("looksMultilineJSON(%q) = %v, want %v", head, got, want)
		}
		if got && json.Valid(first) {
			t.Fatalf("refused a head whose first line %q is a whole JSON value", first)
		}
	})
}

func TestTextBlocksAndFile(t *testing.T) {
	dir := t.TempDir()
	p := writeFile(t, dir, "notes.txt", "First block line one.\nline two.\n\n\n\nSecond block.\r\n\nThird.")
	recs, err := readAll(t, p, ReadOptions{Source: "notes", Format: FormatText, TextMode: "blocks"})
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 3 || recs[0].Doc.Text != "First block line one.\nline two." || recs[1].Doc.Line != 6 || recs[2].Doc.Text != "Third." {
		for _, r := range recs {
			t.Logf("%d %q", r.Doc.Line, r.Doc.Text)
		}
		t.Fatalf("blocks wrong")
	}
	if recs[1].Doc.ID != "notes/notes.txt:6" {
		t.Errorf("id %q", recs[1].Doc.ID)
	}
	recs, err = readAll(t, p, ReadOptions{Source: "notes", Format: FormatText, TextMode: "file"})
	if err != nil || len(recs) != 1 || !strings.HasPrefix(recs[0].Doc.Text, "First") || !strings.HasSuffix(recs[0].Doc.Text, "Third.") {
		t.Fatalf("file mode: %v %v", recs, err)
	}
}

// warcRecord builds one record to the ISO 28500 grammar:
// version CRLF, fields CRLF, CRLF, block, CRLF CRLF.
func warcRecord(typ, id, uri, ctype, block string) string {
	return "WARC/1.1\r\nWARC-Type: " + typ + "\r\nWARC-Record-ID: <" + id + ">\r\nWARC-Date: 2026-03-04T05:06:07Z\r\n" +
		"WARC-Target-URI: " + uri + "\r\nContent-Type: " + ctype + "\r\nContent-Length: " + fmtInt(int64(len(block))) + "\r\n\r\n" + block + "\r\n\r\n"
}

func TestReadWARC(t *testing.T) {
	dir := t.TempDir()
	content := warcRecord("warcinfo", "urn:uuid:0", "", "application/warc-fields", "software: hand\r\n") +
		warcRecord("response", "urn:uuid:1", "https://dock.example/a", "application/http", "HTTP/1.1 200 OK\r\n\r\n<html>x</html>") +
		warcRecord("conversion", "urn:uuid:2", "https://dock.example/a", "text/plain", "Winter layup checklist.\nFlush the engine.") +
		warcRecord("resource", "urn:uuid:3", "https://dock.example/b", "text/plain; charset=utf-8", "Bilge pump notes.")
	p := writeFile(t, dir, "crawl.warc", content)
	gz := compressWith(t, "gzip", p)
	for _, path := range []string{gz} {
		recs, err := readAll(t, path, ReadOptions{Source: "crawl", Format: FormatAuto})
		if err != nil {
			t.Fatal(err)
		}
		if len(recs) != 3 {
			t.Fatalf("got %d records, want 3 (a skipped page, 2 text records)", len(recs))
		}
		// The response holds a page with no text: skipped by rule.
		if iss := recs[0].Issue; recs[0].Doc != nil || iss == nil || !iss.Skip || iss.Rule != "no_text" || iss.DocID != "urn:uuid:1" {
			t.Errorf("response record: %+v %+v", recs[0].Doc, recs[0].Issue)
		}
		recs = recs[1:]
		d := recs[0].Doc
		if d.ID != "urn:uuid:2" || d.Text != "Winter layup checklist.\nFlush the engine." || d.Meta["url"] != "https://dock.example/a" || d.Meta["date"] != "2026-03-04T05:06:07Z" {
			t.Errorf("doc %+v", d)
		}
		if recs[1].Doc.Text != "Bilge pump notes." {
			t.Errorf("resource doc %q", recs[1].Doc.Text)
		}
	}
	// Per-record gzip members, as WARC files are usually written.
	var members bytes.Buffer
	for _, rec := range []string{warcRecord("conversion", "urn:uuid:a", "u", "text/plain", "one"), warcRecord("conversion", "urn:uuid:b", "u", "text/plain", "two")} {
		f := writeFile(t, dir, "m.warc", rec)
		g := compressWith(t, "gzip", f)
		b, _ := os.ReadFile(g)
		members.Write(b)
		os.Remove(g)
	}
	p2 := writeFile(t, dir, "multi.warc.gz", members.String())
	recs, err := readAll(t, p2, ReadOptions{Source: "crawl"})
	if err != nil || len(recs) != 2 || recs[1].Doc.Text != "two" {
		t.Fatalf("multi-member: %v %v", recs, err)
	}
}

func TestSniffIgnoresExtension(t *testing.T) {
	var b bytes.Buffer
	w, _ := zstd.NewWriter(&b)
	w.Write([]byte(`{"text":"hi"}` + "\n"))
	w.Close()
	d, err := Decode(bufio.NewReader(&b))
	if err != nil || d.Codec != CodecZstd {
		t.Fatalf("codec %v %v", d, err)
	}
	out, _ := io.ReadAll(d)
	if string(out) != `{"text":"hi"}`+"\n" {
		t.Errorf("got %q", out)
	}
}

// A file outside the spec's directory keeps its absolute path as its
// Display (manifest, ledger), and its default ids join source and path
// with one "/" (no "docs//abs/path:1"); a file inside keeps its relative
// path. Both stay distinct and the same on every run.
func TestDefaultIDOutsideSpecDir(t *testing.T) {
	specDir := t.TempDir()
	writeFile(t, specDir, "raw/a.txt", "Inside the yard.")
	outside := writeFile(t, t.TempDir(), "b.txt", "Outside the yard.")
	opt := &ReadOptions{Source: "docs", Format: FormatText, TextMode: "file"}
	files, err := ResolveInputs("spec.yaml", specDir, []Group{{Options: opt, Paths: []string{"raw/a.txt", outside}}})
	if err != nil || len(files) != 2 {
		t.Fatalf("%v %v", files, err)
	}
	want := []string{"docs/raw/a.txt:1", "docs/" + strings.TrimPrefix(filepath.ToSlash(outside), "/") + ":1"}
	for i, f := range files {
		if i == 1 && f.Display != outside {
			t.Errorf("display %q, want the absolute path %q", f.Display, outside)
		}
		in, err := os.Open(f.Path)
		if err != nil {
			t.Fatal(err)
		}
		dec, err := Decode(in)
		if err != nil {
			t.Fatal(err)
		}
		rr, _, err := NewRecordReader(dec, f.Display, 0, *opt)
		if err != nil {
			t.Fatal(err)
		}
		recs, err := drainRecords(rr)
		dec.Close()
		in.Close()
		if err != nil || len(recs) != 1 || recs[0].Doc == nil {
			t.Fatalf("%s: %v %v", f.Path, recs, err)
		}
		if id := recs[0].Doc.ID; id != want[i] || strings.Contains(id, "//") {
			t.Errorf("%s: id %q, want %q", f.Path, id, want[i])
		}
	}
}
