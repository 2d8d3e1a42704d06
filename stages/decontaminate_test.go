package stages

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/dedup"
	"winnow/stages/read"
	"winnow/stages/synth"
)

// Invented eval items in the demo scenario.
const (
	contamQ1 = "During the spring haul-out of the Marrowind, which gelcoat thickness did Odalys Fenwick log at the garboard strake after soda blasting?"
	contamA1 = "Odalys Fenwick logged 412.5 microns at the garboard strake."
	contamQ2 = "Why does the survey sheet tell inspectors to repeat the blister diameter at the skeg root of the Brannoch before the spring relaunch?"
)

func contamWriteFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

func contamJSONL(t *testing.T) []byte {
	t.Helper()
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	for _, rec := range []map[string]any{
		{"id": "hq-1", "question": contamQ1, "answer": contamA1},
		{"id": "hq-2", "question": contamQ2, "answer": "To confirm the first reading."},
		{"id": 3, "question": "Which sealant suits the teak decks of a Larkspur ketch?", "answer": "polysulphide"},
	} {
		if err := enc.Encode(rec); err != nil {
			t.Fatal(err)
		}
	}
	return b.Bytes()
}

func TestLoadEvalSetFormats(t *testing.T) {
	dir := t.TempDir()
	plain := contamJSONL(t)
	contamWriteFile(t, filepath.Join(dir, "evals/qa.jsonl"), plain)
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz) // the standard library's gzip, independent of the reader's
	zw.Write(plain)
	zw.Close()
	contamWriteFile(t, filepath.Join(dir, "evals/qa-gz.data"), gz.Bytes()) // no telling extension: magic bytes decide
	var zs bytes.Buffer
	enc, _ := zstd.NewWriter(&zs)
	enc.Write(plain)
	enc.Close()
	contamWriteFile(t, filepath.Join(dir, "evals/qa.jsonl.zst"), zs.Bytes())
	for _, name := range []string{"evals/qa.jsonl", "evals/qa-gz.data", "evals/qa.jsonl.zst"} {
		set, err := LoadEvalSet(EvalSpec{Name: "qa", Paths: []string{name}, Dir: dir, Fields: []string{"question", "answer"}})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(set.Items) != 3 || set.Items[0].ID != "hq-1" || set.Items[2].ID != "3" ||
			set.Items[0].Text != contamQ1+"\n"+contamA1 || set.Items[1].Line != 2 || set.Files[0] != name {
			t.Errorf("%s: %+v", name, set)
		}
	}

	// Nested fields, lists of strings, lists of objects, default fields.
	contamWriteFile(t, filepath.Join(dir, "arc.jsonl"), []byte(
		`{"uid":"a1","question":{"stem":"Which rig has one mast?","choices":[{"label":"A","text":"sloop"},{"label":"B","text":"ketch"}]},"tags":["rig","mast"],"answerKey":"A"}`+"\n"))
	set, err := LoadEvalSet(EvalSpec{Name: "arc", Paths: []string{"arc.jsonl"}, Dir: dir, IDField: "uid", IDExplicit: true,
		Fields: []string{"question.stem", "question.choices.text", "tags"}})
	if err != nil {
		t.Fatal(err)
	}
	if got := set.Items[0]; got.ID != "a1" || got.Text != "Which rig has one mast?\nsloop\nketch\nrig\nmast" {
		t.Errorf("nested: %+v", got)
	}
	set, err = LoadEvalSet(EvalSpec{Name: "arc", Paths: []string{"arc.jsonl"}, Dir: dir, IDField: "uid"})
	if err != nil {
		t.Fatal(err)
	}
	if got := set.Items[0].Text; got != "Which rig has one mast?\nA\nsloop\nB\nketch\nrig\nmast\nA" {
		t.Errorf("default fields: %q", got)
	}

	// Plain text: one item per line, or per blank-line block.
	contamWriteFile(t, filepath.Join(dir, "lines.txt"), []byte("first item here\n\nsecond item\nthird item\n"))
	contamWriteFile(t, filepath.Join(dir, "blocks.txt"), []byte("\ufeffblock one\ncontinues\n\nblock two\n"))
	set, err = LoadEvalSet(EvalSpec{Name: "l", Paths: []string{"lines.txt"}, Dir: dir, Format: "lines"})
	if err != nil || len(set.Items) != 3 || set.Items[1].ID != "lines.txt:3" {
		t.Errorf("lines: %+v %v", set, err)
	}
	set, err = LoadEvalSet(EvalSpec{Name: "b", Paths: []string{"blocks.txt"}, Dir: dir, Format: "blocks"})
	if err != nil || len(set.Items) != 2 || set.Items[0].Text != "block one\ncontinues" || set.Items[1].ID != "blocks.txt:4" {
		t.Errorf("blocks: %+v %v", set, err)
	}
	set, err = LoadEvalSet(EvalSpec{Name: "g", Paths: []string{"*.txt"}, Dir: dir, Format: "lines"})
	if err != nil || len(set.Files) != 2 || set.Files[0] != "blocks.txt" {
		t.Errorf("glob: %+v %v", set, err)
	}
	// Plain text is never guessed: a text file read as items by accident
	// was how one CSV set became one item.
	_, err = LoadEvalSet(EvalSpec{Name: "b", Paths: []string{"blocks.txt"}, Dir: dir})
	if err == nil || !strings.Contains(err.Error(), "blocks.txt: cannot read as an eval set: plain text") ||
		!strings.Contains(err.Error(), "format: lines or blocks") {
		t.Errorf("auto on plain text: %v", err)
	}
}

func TestLoadEvalSetErrors(t *testing.T) {
	dir := t.TempDir()
	contamWriteFile(t, filepath.Join(dir, "bad.jsonl"), []byte(`{"id":"a","question":"ok"}`+"\n"+`{"id":"b","question":`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "dup.jsonl"), []byte(`{"id":"a","question":"one"}`+"\n"+`{"id":"a","question":"two"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "nofield.jsonl"), []byte(`{"id":"a","prompt":"one"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "noid.jsonl"), []byte(`{"key":"a","question":"one"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "empty.jsonl"), []byte(`{"id":"a","question":"?!"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "mc.jsonl"), []byte(`{"id":"a","question":"one two","choices":["x","y"],"label":1}`+"\n"+
		`{"id":"b","question":"one two","choices":["x","y"],"label":"E"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "ragged.csv"), []byte("id,question\na,one two\nb,three,four\n"))
	contamWriteFile(t, filepath.Join(dir, "arr.json"), []byte(`[{"id":"a","question":"one"}, ["not", "an", "item"]]`))
	contamWriteFile(t, filepath.Join(dir, "bin.dat"), []byte("\x00\x01\x02PK"))
	contamWriteFile(t, filepath.Join(dir, "fake.parquet"), []byte(`{"id":"a","question":"one"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "numfield.jsonl"), []byte(`{"id":"a","question":"Which cleat?","answer":"horn"}`+"\n"+`{"id":"b","question":"How many bolts?","answer":12}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "emptyfield.jsonl"), []byte(`{"id":"a","question":"Which cleat?","answer":"horn"}`+"\n"+`{"id":"b","question":"","answer":"twelve"}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "allnum.jsonl"), []byte(`{"id":"a","label":3,"score":0.5}`+"\n"))
	contamWriteFile(t, filepath.Join(dir, "allempty.jsonl"), []byte(`{"id":"a","question":"Which cleat?"}`+"\n"+`{"id":"b","question":" ","answer":""}`+"\n"))
	for _, c := range []struct {
		spec EvalSpec
		want string
	}{
		{EvalSpec{Paths: []string{"bad.jsonl"}}, "bad.jsonl:2: invalid JSON"},
		{EvalSpec{Paths: []string{"dup.jsonl"}}, `dup.jsonl:2: duplicate item id "a" (first at dup.jsonl:1)`},
		{EvalSpec{Paths: []string{"nofield.jsonl"}, Fields: []string{"question"}}, `nofield.jsonl:1: item "a" has none of the fields question`},
		{EvalSpec{Paths: []string{"noid.jsonl"}, IDField: "id", IDExplicit: true}, `noid.jsonl:1: no id field "id"`},
		{EvalSpec{Paths: []string{"empty.jsonl"}}, `empty.jsonl:1: item "a" has no words`},
		{EvalSpec{Paths: []string{"missing.jsonl"}}, `path "missing.jsonl"`},
		{EvalSpec{Paths: []string{"mc.jsonl"}, Fields: []string{"choices[label]"}}, `mc.jsonl:2: item "b": field choices[label]: label "E" is out of range for 2 elements`},
		{EvalSpec{Paths: []string{"mc.jsonl"}, Fields: []string{"question[label]"}}, `mc.jsonl:1: item "a": field question[label]: "question" is not a list`},
		{EvalSpec{Paths: []string{"ragged.csv"}}, `ragged.csv: record on line 3: wrong number of fields`},
		{EvalSpec{Paths: []string{"arr.json"}}, `arr.json: item 2: want a JSON object`},
		{EvalSpec{Paths: []string{"bin.dat"}}, `bin.dat: cannot read as an eval set: binary data`},
		{EvalSpec{Paths: []string{"fake.parquet"}, Format: "parquet"}, `fake.parquet: not a Parquet file`},
		// A field of the wrong type or an empty one is named with its line,
		// not counted as a short item.
		{EvalSpec{Paths: []string{"numfield.jsonl"}, Fields: []string{"question", "answer"}}, `numfield.jsonl:2: item "b": field "answer" is a number (12), want text`},
		{EvalSpec{Paths: []string{"emptyfield.jsonl"}, Fields: []string{"question", "answer"}}, `emptyfield.jsonl:2: item "b": field "question" is an empty string`},
		{EvalSpec{Paths: []string{"allnum.jsonl"}}, `allnum.jsonl:1: item "a" has no text: field(s) "label" (3), "score" (0.5) are numbers`},
		{EvalSpec{Paths: []string{"allempty.jsonl"}}, `allempty.jsonl:2: item "b" has no text: field(s) "question", "answer" are empty strings`},
	} {
		c.spec.Name, c.spec.Dir = "qa", dir
		_, err := LoadEvalSet(c.spec)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want %q", c.spec.Paths, err, c.want)
		}
	}
	// Without an explicit id field, records without ids are numbered.
	set, err := LoadEvalSet(EvalSpec{Name: "qa", Dir: dir, Paths: []string{"noid.jsonl"}})
	if err != nil || set.Items[0].ID != "noid.jsonl:1" {
		t.Errorf("default id: %+v %v", set, err)
	}
}

func newContamStage(t *testing.T, dir string, params map[string]any) *Decontaminate {
	t.Helper()
	contamWriteFile(t, filepath.Join(dir, "evals/qa.jsonl"), contamJSONL(t))
	p := map[string]any{"evals": []any{map[string]any{"name": "hull-qa", "paths": []any{"evals/qa.jsonl"}, "fields": []any{"question", "answer"}}}}
	for k, v := range params {
		p[k] = v
	}
	g, err := newDecontaminateKind(ParamsFromMap(p), Env{SpecDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	return g.(*Decontaminate)
}

func TestDecontaminateParams(t *testing.T) {
	dir := t.TempDir()
	contamWriteFile(t, filepath.Join(dir, "evals/qa.jsonl"), contamJSONL(t))
	for _, c := range []struct {
		p    map[string]any
		want string
	}{
		{map[string]any{"ngram": 13}, "evals: missing"},
		{map[string]any{"evals": []any{map[string]any{"name": "x", "paths": "evals/qa.jsonl", "feilds": []any{"a"}}}}, `unknown key (did you mean "fields"?)`},
		{map[string]any{"evals": []any{map[string]any{"paths": "evals/qa.jsonl"}}}, "each eval set needs a name"},
		{map[string]any{"evals": []any{map[string]any{"name": "x", "paths": "evals/qa.jsonl"}}, "action": "remove"}, `"remove" is not one of drop | cut | flag`},
		{map[string]any{"evals": []any{map[string]any{"name": "x", "paths": "evals/nope.jsonl"}}}, `eval set "x": path "evals/nope.jsonl"`},
	} {
		_, err := newDecontaminateKind(ParamsFromMap(c.p), Env{SpecDir: dir})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want %q", c.p, err, c.want)
		}
	}
	d := newContamStage(t, dir, nil)
	if d.PerDocument() == nil {
		t.Error("max_doc_frequency 0 should run per document")
	}
	if !strings.Contains(d.Describe(), "13-gram index of 3 items in 1 eval sets") {
		t.Errorf("describe: %s", d.Describe())
	}
	if g := newContamStage(t, dir, map[string]any{"max_doc_frequency": 5}); g.PerDocument() != nil {
		t.Error("max_doc_frequency > 0 needs the global phases")
	}
}

func contamFiller(n int) string {
	words := strings.Fields("the yard crane lifted the cruiser onto its cradle while the crew checked the anodes and cleaned the sea strainers before lunch")
	var sb strings.Builder
	for i := 0; sb.Len() < n; i++ {
		if i > 0 {
			sb.WriteByte(' ')
		}
		sb.WriteString(words[i%len(words)])
	}
	return sb.String()[:n]
}

func TestDecontaminateActions(t *testing.T) {
	dir := t.TempDir()
	leak := strings.ToUpper(contamQ1) // re-cased
	doc := &Doc{ID: "forum/1", Text: contamFiller(1000) + " " + leak + " " + contamFiller(1000), Order: MakeOrderKey(0, 1)}
	clean := &Doc{ID: "forum/2", Text: contamFiller(3000), Order: MakeOrderKey(0, 2)}

	drop := newContamStage(t, dir, map[string]any{"action": "drop"})
	dec := drop.Process(doc)
	words := len(strings.Fields(dedup.NormalizeWords(contamQ1)))
	if dec.Action != Drop || dec.Rule != "contaminated" || dec.Extra["eval"] != "hull-qa" || dec.Extra["item"] != "hq-1" ||
		dec.Extra["matches"] != words-12 || dec.Extra["items"] != nil {
		t.Errorf("drop: %+v", dec)
	}
	if dec := drop.Process(clean); dec.Action != Keep || dec.Extra != nil || dec.Metrics[0] != 0 {
		t.Errorf("clean doc: %+v", dec)
	}

	// Cut (Brown et al. 2020, appendix C, from memory: 200 characters
	// either side, pieces under 200 dropped, more than 10 pieces dropped).
	cut := newContamStage(t, dir, map[string]any{"action": "cut"})
	dec = cut.Process(doc)
	if dec.Action != Edit || dec.Rule != "contaminated" || dec.Changes["pieces"] != 2 {
		t.Fatalf("cut: %+v", dec)
	}
	// The matched span runs from the first to the last matched word (the
	// final "?" is not part of a word); 200 characters go on either side.
	a := strings.Index(doc.Text, leak)
	b := a + len(leak) - 1
	left, right := strings.TrimSpace(doc.Text[:a-200]), strings.TrimSpace(doc.Text[b+200:])
	wantRemoved := len(doc.Text) - len(left) - len(right)
	if dec.Changes["chars_removed"] != wantRemoved || wantRemoved < len(leak)+400 || dec.Text != left+"\n\n"+right {
		t.Errorf("cut removed %d chars (want %d): %q", dec.Changes["chars_removed"], wantRemoved, dec.Text)
	}
	short := &Doc{ID: "forum/3", Text: contamFiller(300) + " " + leak + " " + contamFiller(300), Order: MakeOrderKey(0, 3)}
	if dec := cut.Process(short); dec.Action != Drop || dec.Rule != "contaminated" || dec.Changes["pieces"] != 0 {
		t.Errorf("all pieces short: %+v", dec)
	}
	var sb strings.Builder
	for i := 0; i < 11; i++ {
		sb.WriteString(contamFiller(600) + " " + contamQ1 + " ")
	}
	many := &Doc{ID: "forum/4", Text: sb.String(), Order: MakeOrderKey(0, 4)}
	if dec := cut.Process(many); dec.Action != Drop || dec.Rule != "too_many_pieces" || dec.Value != 11 || dec.Limit != 10 {
		t.Errorf("11 pieces: %+v", dec)
	}

	flag := newContamStage(t, dir, map[string]any{"action": "flag"})
	two := &Doc{ID: "forum/5", Text: contamQ2 + " and also " + contamQ1 + " " + contamQ1, Order: MakeOrderKey(0, 5)}
	dec = flag.Process(two)
	if dec.Action != Keep || dec.Rule != "contaminated" || dec.Extra["item"] != "hq-1" ||
		strings.Join(dec.Extra["items"].([]string), ",") != "hull-qa/hq-1,hull-qa/hq-2" ||
		strings.Join(dec.Meta["contaminated"].([]string), ",") != "hull-qa/hq-1,hull-qa/hq-2" {
		t.Errorf("flag: %+v", dec)
	}

	// The short question (10 words: between min_item_words and ngram) is
	// matched as an exact word sequence; its one-word answer is too short
	// to be matched at all, so it neither matches nor glues onto the
	// question.
	shortItem := &Doc{ID: "forum/6", Text: "Q: which sealant suits the teak decks of a Larkspur ketch? Thanks.", Order: MakeOrderKey(0, 6)}
	if dec := drop.Process(shortItem); dec.Action != Drop || dec.Extra["item"] != "3" {
		t.Errorf("short item: %+v", dec)
	}
	for _, text := range []string{"which sealant suits the teak decks", "we used polysulphide on deck"} {
		if dec := drop.Process(&Doc{ID: "x", Text: text}); dec.Action != Keep {
			t.Errorf("part of a short item matched %q: %+v", text, dec)
		}
	}
}

// Brown et al. 2020 (appendix C, from memory) ignored 13-grams frequent in
// the training data. With max_doc_frequency 1, a question found in two
// documents is ignored; one found in a single document is not.
func TestDecontaminateDocFrequency(t *testing.T) {
	dir := t.TempDir()
	g := newContamStage(t, dir, map[string]any{"max_doc_frequency": 1})
	docs := []*Doc{
		{ID: "a", Text: "first " + contamQ2, Order: MakeOrderKey(0, 0)},
		{ID: "b", Text: "second " + contamQ2, Order: MakeOrderKey(0, 1)},
		{ID: "c", Text: "third " + contamQ1, Order: MakeOrderKey(0, 2)},
		{ID: "d", Text: "nothing to see", Order: MakeOrderKey(0, 3)},
	}
	for _, d := range docs {
		if err := g.Collect(d.Order, d.ID, g.Scan(d)); err != nil {
			t.Fatal(err)
		}
	}
	if err := g.Reduce(); err != nil {
		t.Fatal(err)
	}
	want := []Action{Keep, Keep, Drop, Keep}
	for i, d := range docs {
		dec := g.Apply(d)
		if dec.Action != want[i] {
			t.Errorf("%s: %v, want %v", d.ID, dec.Action, want[i])
		}
		g.Observe(d, &dec)
	}
	r := g.Report()
	if r.IgnoredNgrams != len(strings.Fields(dedup.NormalizeWords(contamQ2)))-12 || r.DocsAffected != 1 || r.Evals[0].Contaminated[0].Item != "hq-1" {
		t.Errorf("report: %+v", r)
	}
}

func TestContaminationReport(t *testing.T) {
	dir := t.TempDir()
	d := newContamStage(t, dir, map[string]any{"action": "drop"})
	docs := []*Doc{
		{ID: "forum/a:1", Text: "intro " + contamQ1 + " outro", Order: MakeOrderKey(0, 1)},
		{ID: "forum/a:2", Text: "nothing here", Order: MakeOrderKey(0, 2)},
		{ID: "forum/a:3", Text: strings.ToLower(contamQ1) + " and " + contamQ2, Order: MakeOrderKey(0, 3)},
	}
	for _, doc := range docs {
		dec := d.Process(doc)
		d.Observe(doc, &dec)
	}
	out := t.TempDir()
	if err := d.Finish(out); err != nil {
		t.Fatal(err)
	}
	r, err := ReadContamReport(filepath.Join(out, "contamination.json"))
	if err != nil {
		t.Fatal(err)
	}
	e := r.Evals[0]
	if r.DocsScanned != 3 || r.DocsAffected != 2 || r.DocsDropped != 2 || e.Items != 3 || e.ShortItems != 1 ||
		e.ItemsContaminated != 2 || e.Percent != 66.666667 || e.DocsAffected != 2 || len(e.Contaminated) != 2 {
		t.Fatalf("report %+v", r)
	}
	if c := e.Contaminated[0]; c.Item != "hq-1" || strings.Join(c.Docs, ",") != "forum/a:1,forum/a:3" || c.DocCount != 2 ||
		!strings.HasPrefix(c.Text, "during the spring haul out of the marrowind") {
		t.Errorf("item report %+v", c)
	}
	var table bytes.Buffer
	if err := PrintContamination(&table, out, false); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"hull-qa", "66.7%", "hq-2", "forum/a:3", "3 documents scanned, 2 affected"} {
		if !strings.Contains(table.String(), want) {
			t.Errorf("table lacks %q:\n%s", want, table.String())
		}
	}
	var js bytes.Buffer
	if err := PrintContamination(&js, filepath.Join(out, "contamination.json"), true); err != nil || !json.Valid(js.Bytes()) {
		t.Errorf("json output: %v", err)
	}
	// Same input, same bytes.
	d2 := newContamStage(t, dir, map[string]any{"action": "drop"})
	for _, doc := range docs {
		dec := d2.Process(doc)
		d2.Observe(doc, &dec)
	}
	out2 := t.TempDir()
	if err := d2.Finish(out2); err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(filepath.Join(out, "contamination.json"))
	b, _ := os.ReadFile(filepath.Join(out2, "contamination.json"))
	if !bytes.Equal(a, b) {
		t.Error("report not deterministic")
	}
}

// On a generated corpus (stages/synth: eval items planted verbatim,
// re-cased and re-punctuated, and paraphrased at ~80% word overlap), the
// method of Brown et al. 2020 (13-gram overlap, appendix C, from memory)
// must find every verbatim and re-cased plant, and flag no document that
// is neither a plant nor a copy of one (truth file).
func TestDecontaminateSynthCorpus(t *testing.T) {
	dir := t.TempDir()
	truth, err := synth.Generate(synth.Options{Dir: dir, Docs: 1200, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	set, err := LoadEvalSet(EvalSpec{Name: synth.EvalName, Paths: []string{truth.EvalPath}, Fields: []string{"question", "answer"}})
	if err != nil {
		t.Fatal(err)
	}
	d, err := NewDecontaminate("decontaminate", DecontamConfig{Ngram: 13, Action: "flag"}, []*EvalSet{set})
	if err != nil {
		t.Fatal(err)
	}
	byID := map[string]*synth.TruthDoc{}
	for i := range truth.Docs {
		byID[truth.Docs[i].ID] = &truth.Docs[i]
	}
	planted := func(td *synth.TruthDoc) *synth.TruthDoc {
		for td != nil && len(td.EvalItems) == 0 && td.CopyOf != "" {
			td = byID[td.CopyOf]
		}
		if td != nil && len(td.EvalItems) > 0 {
			return td
		}
		return nil
	}
	found := map[string]map[string]bool{}
	var files []string
	for _, src := range synth.Sources {
		files = append(files, truth.Files[src]...)
	}
	seen := 0
	for fi, path := range files {
		f, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		dec, err := read.Decode(f)
		if err != nil {
			t.Fatal(err)
		}
		rr, _, err := read.NewRecordReader(dec, path, fi, read.ReadOptions{Source: "synth", TextField: "text", IDField: "id"})
		if err != nil {
			t.Fatal(err)
		}
		for {
			rec, err := rr.Next()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			if rec.Doc == nil {
				continue
			}
			seen++
			doc := DocFromRead(rec.Doc)
			res := d.Process(doc)
			d.Observe(doc, &res)
			td := byID[doc.ID]
			if td == nil {
				t.Fatalf("doc %s not in truth", doc.ID)
			}
			p := planted(td)
			if res.Rule != "" && p == nil {
				t.Errorf("false positive: %s (%s) matched %v", td.ID, td.Kind, res.Extra)
			}
			if res.Rule != "" {
				found[td.ID] = map[string]bool{}
				for _, l := range res.Meta["contaminated"].([]string) {
					found[td.ID][strings.TrimPrefix(l, synth.EvalName+"/")] = true
				}
			}
		}
		dec.Close()
		f.Close()
	}
	if seen != len(truth.Docs) {
		t.Fatalf("read %d docs, truth has %d", seen, len(truth.Docs))
	}
	total, hit := map[string]int{}, map[string]int{}
	for i := range truth.Docs {
		td := &truth.Docs[i]
		for _, it := range td.EvalItems {
			total[td.Leak]++
			if found[td.ID][it] {
				hit[td.Leak]++
			}
		}
	}
	for _, k := range []string{synth.LeakVerbatim, synth.LeakRecased} {
		if total[k] == 0 || hit[k] != total[k] {
			t.Errorf("%s recall %d/%d", k, hit[k], total[k])
		}
	}
	t.Logf("recall: verbatim %d/%d, recased %d/%d, paraphrase %d/%d", hit["verbatim"], total["verbatim"],
		hit["recased"], total["recased"], hit["paraphrase"], total["paraphrase"])
	r := d.Report()
	if r.Evals[0].ItemsContaminated == 0 || r.Evals[0].Items != len(set.Items) {
		t.Errorf("report: %+v", r.Evals[0])
	}
}

// Matches of documents that are measured but never observed (shadow
// measurements after an earlier stage dropped them) must not pile up.
func TestDecontaminatePendingBounded(t *testing.T) {
	d := newContamStage(t, t.TempDir(), map[string]any{"action": "drop"})
	for i := 0; i < 3*contamPendingSweep; i++ {
		d.Process(&Doc{ID: "shadow", Text: contamQ1, Order: MakeOrderKey(0, int64(i))})
	}
	for i := 3 * contamPendingSweep; i < 5*contamPendingSweep; i++ {
		doc := &Doc{ID: "kept", Text: "clean text", Order: MakeOrderKey(0, int64(i))}
		dec := d.Process(doc)
		d.Observe(doc, &dec)
	}
	if n := d.npend.Load(); n > contamPendingSweep {
		t.Errorf("%d match records still pending", n)
	}
	if r := d.Report(); r.DocsScanned != 2*contamPendingSweep || r.DocsAffected != 0 {
		t.Errorf("report counted shadow documents: %+v", r)
	}
}
