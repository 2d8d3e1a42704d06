package read

import (
	"bytes"
	"encoding/json"
	"reflect"
	"strings"
	"testing"

	"winnow/stages/jsonl"
)

// parseLine runs the JSONL record parser on one line.
func parseLine(line string, opt ReadOptions) Record {
	if opt.TextField == "" {
		opt.TextField = "text"
	}
	r := &baseReader{file: "f.jsonl", opt: opt}
	return r.parseJSON([]byte(line), 1, 0)
}

// Numbers with leading zeros are not JSON (RFC 8259 section 6: "Leading
// zeros are not allowed"); encoding/json rejects them too, and so must the
// scanner, or they are copied into shards that strict parsers then refuse.
func TestLeadingZeroNumbersMalformed(t *testing.T) {
	for _, num := range []string{"00", "01", "-01.5", "-00", "007e1", "01.0"} {
		line := `{"text":"Hull survey.","n":` + num + `}`
		if json.Valid([]byte(line)) {
			t.Fatalf("%s: encoding/json accepts it; the test premise is wrong", num)
		}
		rec := parseLine(line, ReadOptions{})
		if rec.Doc != nil || rec.Issue == nil || rec.Issue.Rule != RuleMalformed {
			t.Errorf("%s: got doc=%v issue=%+v, want malformed_record", num, rec.Doc, rec.Issue)
		}
	}
	for _, num := range []string{"0", "-0", "0.5", "-0.5e-3", "10", "0e7", "100"} {
		line := `{"text":"Hull survey.","n":` + num + `}`
		rec := parseLine(line, ReadOptions{})
		if rec.Doc == nil || rec.Issue != nil {
			t.Errorf("%s: valid number refused: %+v", num, rec.Issue)
		}
	}
}

// Escaped keys name the same field as their plain spelling (RFC 8259
// section 7: any character may be escaped; encoding/json unescapes keys):
// "te\u0078t" is the text field, and an escaped meta key is written back
// under its real name, not re-escaped into a new one.
func TestEscapedKeys(t *testing.T) {
	line := `{"te\u0078t":"Antifouling schedule.","\u0069d":"k1","r\u00e9gion":"nord","a\"b":1,"tab\tkey":2}`
	rec := parseLine(line, ReadOptions{IDField: "id"})
	if rec.Doc == nil {
		t.Fatalf("escaped text key not matched: %+v", rec.Issue)
	}
	if rec.Doc.Text != "Antifouling schedule." || rec.Doc.ID != "k1" {
		t.Errorf("doc = %q %q", rec.Doc.ID, rec.Doc.Text)
	}
	var want map[string]any
	json.Unmarshal([]byte(line), &want)
	out := jsonl.AppendMeta(nil, rec.Doc.Meta, nil)
	var got map[string]any
	if err := json.Unmarshal([]byte("{"+strings.TrimPrefix(string(out), ",")+"}"), &got); err != nil {
		t.Fatalf("meta written back is not JSON: %s: %v", out, err)
	}
	delete(want, "text")
	delete(want, "id")
	if !reflect.DeepEqual(got, want) {
		t.Errorf("meta after round trip = %v, want %v", got, want)
	}
}

// A raw NUL byte is a control character, which JSON does not allow
// unescaped (RFC 8259 section 7): the line is malformed and costs only
// itself; the same character written as \u0000 is valid JSON and is
// repaired like invalid UTF-8 (replaced with U+FFFD, document kept).
func TestNULInJSONLRecord(t *testing.T) {
	rec := parseLine("{\"text\":\"Keel\x00bolts.\"}", ReadOptions{})
	if rec.Doc != nil || rec.Issue == nil || rec.Issue.Rule != RuleMalformed || !strings.Contains(rec.Issue.Msg, "NUL") {
		t.Errorf("raw NUL: doc=%v issue=%+v", rec.Doc, rec.Issue)
	}
	rec = parseLine(`{"text":"Keel\u0000bolts."}`, ReadOptions{})
	if rec.Doc == nil || rec.Doc.Text != "Keel\uFFFDbolts." || rec.Issue == nil || rec.Issue.Rule != RuleNULByte || !rec.Issue.Repair() {
		t.Errorf("escaped NUL: doc=%+v issue=%+v", rec.Doc, rec.Issue)
	}
}

// FuzzJSONLFields checks the record parser against encoding/json, the
// standard library's reference decoder: a line is accepted exactly when
// encoding/json finds it a valid object; the text and id fields decode to
// the same strings (after the reader's U+FFFD and NUL repair); and the meta
// fields written back by the shard writer parse to the same values.
func FuzzJSONLFields(f *testing.F) {
	for _, s := range []string{
		`{"id":"m1","text":"Drain the strainer.","url":"https://larkspur.example/m1"}`,
		`{"text":"a","n":00}`, `{"text":"a","n":-01.5}`, `{"text":"a","n":01}`, `{"text":"a","n":-0.0e+1}`,
		`{"te\u0078t":"x","\u006eote":"y"}`, `{"text":"\ud83d\ude00 \ud800 \udc00x"}`,
		`{"text":"a","text":"b"}`, `{"text":"a","m":{"k":[1,2,{"z":null}]}}`,
		"{\"text\":\"a\x00\"}", `{"text":"a\u0000b"}`, "{\"text\":\"\xff\xfe\"}", `{"text":"a"} x`,
		`{"text":1}`, `{}`, `[]`, ` {"text" : "sp" } `, `{"text":"a",}`, `{"a\"b":true,"text":""}`,
		`{"text":"x","k":1e5,"k2":-0,"k3":1.5E-7,"k4":[]}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		rec := parseLine(string(line), ReadOptions{IDField: "id"})
		var ref map[string]json.RawMessage
		refErr := json.Unmarshal(line, &ref)
		isObj := refErr == nil && ref != nil
		if rec.Issue != nil && rec.Issue.Rule == RuleMalformed {
			if isObj && !strings.Contains(rec.Issue.Msg, "nesting too deep") {
				t.Fatalf("valid object refused: %s: %s", line, rec.Issue.Msg)
			}
			return
		}
		if !isObj {
			t.Fatalf("encoding/json refuses (%v) but the scanner accepted %q", refErr, line)
		}
		refText, hasText := ref["text"]
		var want string
		if hasText && json.Unmarshal(refText, &want) == nil {
			if rec.Doc == nil {
				t.Fatalf("string text not found in %q: %+v", line, rec.Issue)
			}
			want = strings.ReplaceAll(want, "\x00", "\uFFFD")
			if rec.Doc.Text != want {
				t.Fatalf("text %q, encoding/json %q", rec.Doc.Text, want)
			}
		} else if rec.Doc != nil {
			t.Fatalf("document from a line without a string text: %q", line)
		}
		if rec.Doc == nil {
			return
		}
		if raw, ok := ref["id"]; ok {
			var id string
			if json.Unmarshal(raw, &id) == nil && id != "" && rec.Doc.ID != id {
				t.Fatalf("id %q, encoding/json %q", rec.Doc.ID, id)
			}
		}
		wantMeta := map[string]any{}
		for k, v := range ref {
			switch k {
			case "id", "text", "source", "tokens":
				continue
			}
			var x any
			json.Unmarshal(v, &x)
			wantMeta[k] = x
		}
		out := jsonl.AppendMeta(nil, rec.Doc.Meta, nil)
		gotMeta := map[string]any{}
		obj := append(append([]byte("{"), bytes.TrimPrefix(out, []byte(","))...), '}')
		if err := json.Unmarshal(obj, &gotMeta); err != nil {
			t.Fatalf("meta written back is not JSON: %s: %v", obj, err)
		}
		if !reflect.DeepEqual(gotMeta, wantMeta) {
			t.Fatalf("meta after round trip %v, encoding/json %v", gotMeta, wantMeta)
		}
	})
}
