package read

import (
	"bytes"
	"encoding/json"
	"errors"
	"path/filepath"
	"strings"
	"testing"
)

// readArray reads b as a JSON input and returns its records and the error
// that ended it (nil at a clean end).
func readArray(t *testing.T, b []byte, opt ReadOptions) ([]Record, error) {
	t.Helper()
	if opt.TextField == "" {
		opt.TextField = "text"
	}
	if opt.IDField == "" {
		opt.IDField = "id"
	}
	opt.Source, opt.Format = "s", FormatJSONL
	rr, _, err := NewRecordReader(bytes.NewReader(b), "a.json", 0, opt)
	if err != nil {
		return nil, err
	}
	return drainRecords(rr)
}

// recordLine is the line (element number) of a document or an issue.
func recordLine(r Record) int64 {
	if r.Doc != nil {
		return r.Doc.Line
	}
	return r.Issue.Line
}

// TestJSONArrayMatchesJSONLines: the eval set of testdata/evalsets as a
// pretty-printed JSON array written by Node.js's JSON.stringify (a JSON
// writer independent of winnow, testdata/nodejs-api) reads as the same
// records, in the same order, as its JSON Lines file.
func TestJSONArrayMatchesJSONLines(t *testing.T) {
	opt := ReadOptions{Source: "s", TextField: "question", IDField: "id"}
	lines, err := readAll(t, filepath.Join("..", "..", "testdata", "evalsets", "npm-mc.jsonl"), opt)
	if err != nil {
		t.Fatal(err)
	}
	arr, err := readAll(t, filepath.Join("..", "..", "testdata", "nodejs-api", "npm-mc.array.json"), opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(lines) != 48 || len(arr) != len(lines) {
		t.Fatalf("%d records from the array, %d from the lines (want 48)", len(arr), len(lines))
	}
	for i := range lines {
		a, l := arr[i].Doc, lines[i].Doc
		if a == nil || l == nil || a.ID != l.ID || a.Text != l.Text || a.Line != int64(i+1) {
			t.Fatalf("record %d: array %+v, lines %+v", i, arr[i], lines[i])
		}
	}
}

func TestJSONArrayCases(t *testing.T) {
	for _, c := range []struct {
		name, in string
		want     []string // per record: text, or "!" + rule
		err      string   // substring of the ending error
	}{
		{"compact", `[{"id":"1","text":"a"},{"id":"2","text":"b"}]`, []string{"a", "b"}, ""},
		{"pretty", "[\n  {\n    \"text\": \"a ] } [ {\"\n  },\n  {\"text\": \"q\\\"]\"}\n]\n", []string{"a ] } [ {", `q"]`}, ""},
		{"empty", " [ ] \n", nil, ""},
		{"nested", `[{"text":"x","meta":{"a":[1,[2]],"b":{}}}, [1,2], 7, "s", null]`, []string{"x", "!" + RuleMalformed, "!" + RuleMalformed, "!" + RuleMalformed, "!" + RuleMalformed}, ""},
		{"no text", `[{"body":"x"},{"text":"y"}]`, []string{"!" + RuleMissingText, "y"}, ""},
		{"empty element", `[{"text":"a"},,{"text":"b"}]`, []string{"a", "!" + RuleMalformed, "b"}, ""},
		{"cut", `[{"text":"a"},{"text":"b"},{"text":"c`, []string{"a", "b"}, "cut short"},
		{"cut after comma", `[{"text":"a"},`, []string{"a"}, "cut short"},
		{"trailing data", `[{"text":"a"}] {"text":"b"}`, []string{"a"}, "after the closing"},
		{"oversize", `[{"text":"a"},{"text":"` + strings.Repeat("x", 200) + `"},{"text":"c"}]`, []string{"a", "!" + RuleOversize, "c"}, ""},
	} {
		recs, err := readArray(t, []byte(c.in), ReadOptions{MaxDocBytes: 100})
		var got []string
		for _, r := range recs {
			if r.Doc != nil {
				got = append(got, r.Doc.Text)
			} else {
				got = append(got, "!"+r.Issue.Rule)
			}
		}
		if strings.Join(got, "|") != strings.Join(c.want, "|") {
			t.Errorf("%s: records %q, want %q", c.name, got, c.want)
		}
		if c.err == "" && err != nil || c.err != "" && (err == nil || !strings.Contains(err.Error(), c.err)) {
			t.Errorf("%s: error %v, want %q", c.name, err, c.err)
		}
		for i, r := range recs {
			if line := recordLine(r); line != int64(i+1) {
				t.Errorf("%s: record %d numbered %d", c.name, i, line)
			}
		}
	}
	if _, err := readArray(t, []byte(`[{"text":"a"}`), ReadOptions{}); !errors.Is(err, errArrayCut) {
		t.Errorf("unclosed array: %v", err)
	}
}

// FuzzJSONArray: any bytes starting with "[" end (no hang, no panic) with
// records numbered 1, 2, ...; for a valid JSON array (encoding/json's
// verdict) there is one record per element, and an element that is an
// object with a string "text" gives exactly encoding/json's text.
func FuzzJSONArray(f *testing.F) {
	for _, s := range []string{`[{"text":"a"},{"text":"b"}]`, "[\n {\"text\": \"x\\\"]\"}\n]", `[]`, `[1,[2,{"a":"]"}],"s"]`, `[{"text":"a"`, `[{"text":"\u00e9\ud800"}]`, `[,]`, `[{"text":""}] x`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		if firstJSONByte(b) != '[' || looksBinary(b[:min(len(b), 4096)]) {
			return
		}
		recs, err := readArray(t, b, ReadOptions{MaxDocBytes: 1 << 20})
		for i, r := range recs {
			if line := recordLine(r); line != int64(i+1) {
				t.Fatalf("record %d numbered %d", i, line)
			}
		}
		var elems []json.RawMessage
		if json.Unmarshal(b, &elems) != nil {
			return
		}
		if err != nil {
			t.Fatalf("valid array ended with %v", err)
		}
		if len(recs) != len(elems) {
			t.Fatalf("%d records for %d elements", len(recs), len(elems))
		}
		for i, e := range elems {
			var o map[string]json.RawMessage
			if json.Unmarshal(e, &o) != nil {
				continue
			}
			var text string
			if raw, ok := o["text"]; !ok || json.Unmarshal(raw, &text) != nil {
				continue
			}
			if recs[i].Doc == nil {
				t.Fatalf("element %d %s: no document (%+v)", i, e, recs[i].Issue)
			}
			if want := strings.ToValidUTF8(text, "\uFFFD"); recs[i].Doc.Text != want && recs[i].Doc.Text != text {
				t.Fatalf("element %d: text %q, encoding/json %q", i, recs[i].Doc.Text, text)
			}
		}
	})
}
