package stages

import (
	"bytes"
	"compress/gzip"
	"encoding/csv"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// evalFixtureDir holds the multiple-choice set written by DuckDB
// (testdata/evalsets, built by build.mjs from the npm package's docs).
const evalFixtureDir = "../testdata/evalsets"

// evalFixtureFields reads every kind of field: a string, the list of
// choices (one part per element), the gold answer by an integer index and
// by a letter, and a nested struct field.
var evalFixtureFields = []string{"question", "choices", "choices[label]", "choices[letter]", "meta.summary"}

// TestEvalSetsWrittenByDuckDB: the same table written by DuckDB (through
// the npm package @duckdb/node-api) as Parquet, JSON lines, CSV (list and
// struct as to_json cells) and TSV (struct as dotted columns) gives item
// for item the same items, also gzip- and zstd-compressed. The gold answer
// chosen with choices[label] and with choices[letter] is checked against
// meta.title, which DuckDB stored separately.
func TestEvalSetsWrittenByDuckDB(t *testing.T) {
	dir := t.TempDir()
	jsonl, err := os.ReadFile(filepath.Join(evalFixtureDir, "npm-mc.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	csvData, err := os.ReadFile(filepath.Join(evalFixtureDir, "npm-mc.csv"))
	if err != nil {
		t.Fatal(err)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz) // the standard library's gzip
	zw.Write(jsonl)
	zw.Close()
	contamWriteFile(t, filepath.Join(dir, "npm-mc.jsonl.gz"), gz.Bytes())
	var zs bytes.Buffer
	enc, _ := zstd.NewWriter(&zs)
	enc.Write(csvData)
	enc.Close()
	contamWriteFile(t, filepath.Join(dir, "npm-mc.csv.zst"), zs.Bytes())

	// The reference: the JSON lines decoded by encoding/json.
	type rec struct {
		ID       string   `json:"id"`
		Question string   `json:"question"`
		Choices  []string `json:"choices"`
		Label    int      `json:"label"`
		Letter   string   `json:"letter"`
		Meta     struct {
			Title   string `json:"title"`
			Summary string `json:"summary"`
		} `json:"meta"`
	}
	var want []rec
	for _, line := range bytes.Split(bytes.TrimSpace(jsonl), []byte("\n")) {
		var r rec
		if err := json.Unmarshal(line, &r); err != nil {
			t.Fatal(err)
		}
		want = append(want, r)
	}
	if len(want) != 48 {
		t.Fatalf("fixture has %d items, want 48", len(want))
	}

	for _, c := range []struct{ path, format string }{
		{filepath.Join(evalFixtureDir, "npm-mc.parquet"), "parquet"},
		{filepath.Join(evalFixtureDir, "npm-mc.jsonl"), "jsonl"},
		{filepath.Join(evalFixtureDir, "npm-mc.csv"), "csv"},
		{filepath.Join(evalFixtureDir, "npm-mc.tsv"), "tsv"},
		{filepath.Join(dir, "npm-mc.jsonl.gz"), "jsonl"},
		{filepath.Join(dir, "npm-mc.csv.zst"), "csv"},
		// The same items as one pretty-printed JSON array, written by
		// Node.js's JSON.stringify (testdata/nodejs-api).
		{filepath.Join("..", "testdata", "nodejs-api", "npm-mc.array.json"), "json"},
	} {
		set, err := LoadEvalSet(EvalSpec{Name: "npm", Paths: []string{c.path}, Fields: evalFixtureFields})
		if err != nil {
			t.Fatalf("%s: %v", c.path, err)
		}
		if len(set.Items) != len(want) || set.Formats[0] != c.format {
			t.Fatalf("%s: %d items, format %v", c.path, len(set.Items), set.Formats)
		}
		for i, it := range set.Items {
			w := want[i]
			gold := w.Choices[w.Label]
			if gold != w.Meta.Title || "ABCD"[w.Label] != w.Letter[0] {
				t.Fatalf("fixture item %s: gold %q, title %q", w.ID, gold, w.Meta.Title)
			}
			parts := append(append([]string{w.Question}, w.Choices...), gold, gold, w.Meta.Summary)
			if it.ID != w.ID || !slices.Equal(it.Parts, parts) || it.Text != strings.Join(parts, "\n") {
				t.Fatalf("%s item %d: %q %q, want %q %q", c.path, i, it.ID, it.Parts, w.ID, parts)
			}
		}
	}
}

// TestEvalSetsTooShort: over the DuckDB-written set, the items whose
// every part is shorter than min_item_words are listed, not matched; a
// question of 8 to 12 words is matched whole; n-grams never span two
// choices. Lengths counted by hand from the npm docs' sentences.
//
// Match unit after Brown et al. 2020, "Language Models are Few-Shot
// Learners", appendix C: an example is dirty when it shares an N-gram
// with the training data, N chosen per benchmark from the 5th percentile
// of example lengths in words (confirmed against a secondary summary
// through the search tool; the paper's own text could not be retrieved),
// at most 13 and at least 8 (the minimum of 8, against spurious
// collisions, from memory). So: 13-grams for texts of 13 words or more,
// the whole text for 8 to 12 words (an N-gram with N in their range),
// nothing below 8.
func TestEvalSetsTooShort(t *testing.T) {
	set, err := LoadEvalSet(EvalSpec{Name: "npm", Paths: []string{filepath.Join(evalFixtureDir, "npm-mc.parquet")},
		Fields: []string{"question", "choices"}})
	if err != nil {
		t.Fatal(err)
	}
	cfg := DefaultDecontamConfig()
	d, err := NewDecontaminate("decontaminate", cfg, []*EvalSet{set})
	if err != nil {
		t.Fatal(err)
	}
	short := d.TooShort()[0]
	// "Enables tab-completion in all npm commands." has 6 or 7 words
	// (however the hyphen splits): too short. "Used to set access controls
	// on private packages." has 8: checked.
	if !slices.Contains(short, "npm-q08") || slices.Contains(short, "npm-q01") {
		t.Errorf("too short: %v", short)
	}
	desc := d.Describe()
	for _, want := range []string{"eval set npm (", "parquet): 48 items; fields question, choices; ",
		"too short to check (< 8 words)", "warning: eval set npm: "} {
		if !strings.Contains(desc, want) {
			t.Errorf("Describe lacks %q:\n%s", want, desc)
		}
	}
	for _, c := range []struct {
		text, item string
	}{
		{"Docs say: Used to set access controls on private packages. See also.", "npm-q01"},                      // 8 words, whole
		{"npm adduser: create a new user in the specified registry, and save the credentials to the", "npm-q02"}, // a 13-gram of its 15 words
		{"Enables tab-completion in all npm commands.", ""},                                                      // too short
		{"npm-access npm-completion npm-docs npm-fund npm-config npm-adduser", ""},                               // choices glued: never one n-gram
	} {
		dec := d.Process(&Doc{ID: "doc", Text: c.text})
		if got, _ := dec.Extra["item"].(string); got != c.item {
			t.Errorf("%q matched %q, want %q", c.text, got, c.item)
		}
	}
	r := d.Report()
	if e := r.Evals[0]; e.ItemsTooShort != len(short) || !slices.Equal(e.TooShort, short) || r.MinItemWords != 8 {
		t.Errorf("report: %d too short %v", e.ItemsTooShort, e.TooShort)
	}
}

// FuzzEvalCSV: rows written by encoding/csv's Writer read back field for
// field (no record lost, cells kept whole), and any input either fails
// with an error naming the file or gives items whose text is their parts.
func FuzzEvalCSV(f *testing.F) {
	f.Add("one two three", "a,b", "x\"y")
	f.Add("", "[\"p\",\"q\"]", "{\"k\":\"v\"}")
	f.Add("line\nbreak", "\ttab", "  spaced  ")
	f.Fuzz(func(t *testing.T, a, b, c string) {
		var buf bytes.Buffer
		w := csv.NewWriter(&buf)
		w.Write([]string{"id", "q", "r"})
		w.Write([]string{"i1", a, b})
		w.Write([]string{"i2", c, a})
		w.Flush()
		items, err := readEvalCSV(bytes.NewReader(buf.Bytes()), "f.csv", "csv", EvalSpec{IDField: "id", Fields: []string{"q", "r"}})
		if err != nil {
			if !strings.HasPrefix(err.Error(), "f.csv") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		if len(items) != 2 || items[0].ID != "i1" || items[1].ID != "i2" {
			t.Fatalf("items %+v", items)
		}
		for _, it := range items {
			if it.Text != strings.Join(it.Parts, "\n") || len(it.Parts) == 0 {
				t.Fatalf("item %+v", it)
			}
		}
		// A plain cell (not JSON, not blank) comes back whole.
		if strings.TrimSpace(a) != "" && !strings.ContainsAny(strings.TrimSpace(a)[:1], "[{") && items[0].Parts[0] != a {
			t.Fatalf("cell %q read as %q", a, items[0].Parts[0])
		}
		// Any bytes: no panic, an error names the file.
		if _, err := readEvalCSV(strings.NewReader(a+"\n"+b+"\n"+c), "g.tsv", "tsv", EvalSpec{IDField: "id"}); err != nil && !strings.HasPrefix(err.Error(), "g.tsv") {
			t.Fatalf("error does not name the file: %v", err)
		}
	})
}

// FuzzEvalJSONLine: a record the loader accepts is one encoding/json
// accepts too, its id is the "id" string, and the gold answer chosen by
// choices[label] is the element encoding/json finds at that index.
func FuzzEvalJSONLine(f *testing.F) {
	f.Add(`{"id":"a","q":"Which rig has one mast?","choices":["sloop","ketch"],"label":0}`)
	f.Add(`{"id":"b","q":"x","choices":["sloop","ketch","yawl"],"label":"C"}`)
	f.Add(`{"id":7,"q":{"stem":"nested"},"choices":[],"label":null}`)
	f.Add(`{"id":"c","q":"x"} trailing`)
	f.Fuzz(func(t *testing.T, line string) {
		spec := EvalSpec{IDField: "id", Fields: []string{"q", "choices[label]"}}
		it, err := parseEvalJSON([]byte(line), "f.jsonl", 1, spec)
		if err != nil {
			return
		}
		var ref map[string]any
		if jerr := json.Unmarshal([]byte(line), &ref); jerr != nil {
			t.Fatalf("accepted %q, encoding/json says %v", line, jerr)
		}
		if it.Text != strings.Join(it.Parts, "\n") || len(it.Parts) == 0 {
			t.Fatalf("item %+v", it)
		}
		if id, ok := ref["id"].(string); ok && id != "" && it.ID != id {
			t.Fatalf("id %q, want %q", it.ID, id)
		}
		choices, _ := ref["choices"].([]any)
		label, ok := ref["label"].(float64)
		if !ok || label != float64(int(label)) || int(label) < 0 || int(label) >= len(choices) {
			return
		}
		if gold, ok := choices[int(label)].(string); ok && strings.TrimSpace(gold) != "" && it.Parts[len(it.Parts)-1] != gold {
			t.Fatalf("choices[label] = %q, want %q (%s)", it.Parts[len(it.Parts)-1], gold, line)
		}
	})
}

// TestEvalArrayErrors: a JSON array of items that is cut short, has data
// after it or holds a non-object names the file and the item.
func TestEvalArrayErrors(t *testing.T) {
	spec := EvalSpec{IDField: "id", Fields: []string{"q"}}
	for _, c := range []struct{ in, want string }{
		{`[{"id":"a","q":"one two three"},{"id":"b","q":"four`, "item 2"},
		{`[{"id":"a","q":"one two three"}`, "not closed"},
		{`[{"id":"a","q":"one two three"}] [`, "data after"},
		{`[{"id":"a","q":"one two three"}, 7]`, "item 2: want a JSON object"},
	} {
		_, err := readEvalArray(strings.NewReader(c.in), "e.json", spec)
		if err == nil || !strings.Contains(err.Error(), "e.json") || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want %q", c.in, err, c.want)
		}
	}
}

// FuzzEvalArray: a JSON array of items gives, when encoding/json accepts
// it as an array, one item per element, in order, each the item the same
// object gives as a JSON line; anything else is refused, never a panic.
func FuzzEvalArray(f *testing.F) {
	f.Add(`[{"id":"a","q":"Which rig has one mast?"},{"id":"b","q":"How deep is the keel?"}]`)
	f.Add("[\n  {\"q\": \"x y\"}\n]")
	f.Add(`[]`)
	f.Add(`[{"q":"a"},`)
	f.Fuzz(func(t *testing.T, in string) {
		spec := EvalSpec{IDField: "id", Fields: []string{"q"}}
		items, err := readEvalArray(strings.NewReader(in), "f.json", spec)
		if err != nil {
			return
		}
		var elems []json.RawMessage
		if jerr := json.Unmarshal([]byte(in), &elems); jerr != nil {
			t.Fatalf("accepted %q, encoding/json says %v", in, jerr)
		}
		if len(items) != len(elems) {
			t.Fatalf("%d items for %d elements", len(items), len(elems))
		}
		for i, e := range elems {
			want, err := parseEvalJSON(e, "f.json", int64(i+1), spec)
			if err != nil {
				t.Fatalf("element %d %s: item from the array, refused as a line: %v", i, e, err)
			}
			want.File = "f.json"
			if !reflect.DeepEqual(items[i], want) {
				t.Fatalf("element %d: %+v, as a line %+v", i, items[i], want)
			}
		}
	})
}
