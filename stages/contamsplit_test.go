package stages

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// newRealContam builds a decontaminate stage over the real eval sets
// (decontamEvalParams) with the given action and max_doc_frequency.
func newRealContam(tb testing.TB, action string, maxDF int) *Decontaminate {
	tb.Helper()
	p := map[string]any{"evals": decontamEvalParams(), "action": action, "max_doc_frequency": maxDF}
	g, err := newDecontaminateKind(ParamsFromMap(p), Env{SpecDir: ".."})
	if err != nil {
		tb.Fatal(err)
	}
	return g.(*Decontaminate)
}

// observeRange decides docs[lo:hi] as the runner does (Process per
// document, or Apply after the counting pass) and observes them in order.
func observeRange(d *Decontaminate, docs []*Doc, lo, hi int) {
	for _, doc := range docs[lo:hi] {
		var dec Decision
		if d.PerDocument() != nil {
			dec = d.Process(doc)
		} else {
			dec = d.Apply(doc)
		}
		d.Observe(doc, &dec)
	}
}

// countPass runs the counting pass over every document, as each process
// of a split run has the reduced counts before it applies the stage.
func countPass(t *testing.T, d *Decontaminate, docs []*Doc) {
	t.Helper()
	if d.PerDocument() != nil {
		return
	}
	for _, doc := range docs {
		if err := d.Collect(doc.Order, doc.ID, d.Scan(doc)); err != nil {
			t.Fatal(err)
		}
	}
	if err := d.Reduce(); err != nil {
		t.Fatal(err)
	}
}

func finishBytes(t *testing.T, d *Decontaminate) []byte {
	t.Helper()
	dir := t.TempDir()
	if err := d.Finish(dir); err != nil {
		t.Fatal(err)
	}
	entries, err := os.ReadDir(dir)
	if err != nil || len(entries) != 1 || entries[0].Name() != "contamination.json" {
		t.Fatalf("Finish wrote %v (%v), want contamination.json alone", entries, err)
	}
	b, err := os.ReadFile(filepath.Join(dir, "contamination.json"))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestContamReportSplit: observing real documents in one stage and
// Finish, versus observing them in 3 consecutive ranges on 3 stage
// objects (the middle one saving twice), merging the parts in order into
// a 4th that observed nothing and did not count, and Finish, give
// byte-identical contamination.json, for each action and with the
// counting pass. The documents are real (testdata/realdocs, mail-python)
// with real eval questions pasted in (contamDocs): one item is in more
// documents than the report lists, in every range.
func TestContamReportSplit(t *testing.T) {
	docs := makeDocs(contamDocs(t))
	n := len(docs)
	cuts := []int{0, n / 4, 2 * n / 3, n}
	for _, c := range []struct {
		action string
		maxDF  int
	}{{"drop", 0}, {"cut", 0}, {"flag", 0}, {"drop", 2}, {"cut", 5}} {
		single := newRealContam(t, c.action, c.maxDF)
		countPass(t, single, docs)
		observeRange(single, docs, 0, n)
		want := finishBytes(t, single)

		var parts [][]byte
		for i := 0; i < 3; i++ {
			d := newRealContam(t, c.action, c.maxDF)
			countPass(t, d, docs)
			lo, hi := cuts[i], cuts[i+1]
			if i == 1 { // a unit that saves twice: the second part starts empty
				mid := (lo + hi) / 2
				observeRange(d, docs, lo, mid)
				p, err := d.SaveReport()
				if err != nil {
					t.Fatal(err)
				}
				parts = append(parts, p)
				lo = mid
			}
			observeRange(d, docs, lo, hi)
			p, err := d.SaveReport()
			if err != nil {
				t.Fatal(err)
			}
			parts = append(parts, p)
			// Saving resets: the next part is empty, and merging it
			// changes nothing.
			empty, err := d.SaveReport()
			if err != nil || bytes.Contains(empty, []byte(`"docs":1`)) || !bytes.Contains(empty, []byte(`"items":[]`)) {
				t.Fatalf("part after a save is not empty: %s (%v)", empty, err)
			}
			parts = append(parts, empty)
		}
		merged := newRealContam(t, c.action, c.maxDF)
		for _, p := range parts {
			if err := merged.MergeReport(p); err != nil {
				t.Fatal(err)
			}
		}
		got := finishBytes(t, merged)
		if !bytes.Equal(got, want) {
			t.Errorf("action %s max_doc_frequency %d: merged report differs from the single one:\n%s\nwant\n%s", c.action, c.maxDF, got, want)
		}

		// The report is not trivial: documents affected by both sets,
		// and (without the counting pass, which ignores the question
		// pasted everywhere) an item whose document list was capped.
		var r ContamReport
		if err := json.Unmarshal(want, &r); err != nil {
			t.Fatal(err)
		}
		if r.DocsScanned != int64(n) || r.DocsAffected == 0 || r.Evals[0].DocsAffected == 0 || r.Evals[1].DocsAffected == 0 {
			t.Errorf("action %s: report %+v", c.action, r)
		}
		capped := false
		for _, it := range r.Evals[1].Contaminated {
			capped = capped || it.DocCount > int64(len(it.Docs))
		}
		if capped != (c.maxDF == 0) {
			t.Errorf("action %s max_doc_frequency %d: a capped document list: %v", c.action, c.maxDF, capped)
		}
		if (r.IgnoredNgrams > 0) != (c.maxDF > 0) {
			t.Errorf("action %s max_doc_frequency %d: %d n-grams ignored", c.action, c.maxDF, r.IgnoredNgrams)
		}
		t.Logf("action %s max_doc_frequency %d: %d of %d documents affected, %d n-grams ignored, parts of %d bytes in all",
			c.action, c.maxDF, r.DocsAffected, n, r.IgnoredNgrams, len(bytes.Join(parts, nil)))
	}
}

// TestContamReportMergeErrors: a part that is garbage, from a stage with
// another action or n-gram, or with an item out of range is an error and
// leaves the report as it was.
func TestContamReportMergeErrors(t *testing.T) {
	docs := makeDocs(contamDocs(t))
	src := newRealContam(t, "drop", 0)
	observeRange(src, docs, 0, len(docs))
	good, err := src.SaveReport()
	if err != nil {
		t.Fatal(err)
	}
	other := newRealContam(t, "flag", 0)
	observeRange(other, docs, 0, 10)
	flagPart, _ := other.SaveReport()
	d := newRealContam(t, "drop", 0)
	observeRange(d, docs, 0, 30)
	before := d.Report()
	for _, c := range []struct {
		name string
		part []byte
		want string
	}{
		{"garbage", []byte("{not json"), "contamination report part"},
		{"truncated", good[:len(good)/2], "contamination report part"},
		{"other action", flagPart, `action "flag"`},
		{"unknown field", []byte(strings.Replace(string(good), `"docs":`, `"dcos":0,"docs":`, 1)), "unknown field"},
		{"index", []byte(strings.Replace(string(good), `"items":[{"index":`, `"items":[{"index":9999`, 1)), "out of range"},
		{"negative", []byte(strings.Replace(string(good), `"affected":`, `"affected":-`, 1)), "negative"},
		{"two parts", append(append([]byte{}, good...), good...), "after the part"},
	} {
		err := d.MergeReport(c.part)
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "decontaminate") {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
		after, _ := json.Marshal(d.Report())
		was, _ := json.Marshal(before)
		if !bytes.Equal(after, was) {
			t.Errorf("%s: a failed merge changed the report", c.name)
		}
	}
}

// FuzzContamReportPart: merging arbitrary bytes never panics; a part that
// merges into a fresh stage saves to a part that merges into another
// fresh stage and saves to the same bytes (idempotence); a part that does
// not merge leaves the stage empty.
func FuzzContamReportPart(f *testing.F) {
	docs := makeDocs(contamDocs(f))
	for _, action := range []string{"drop", "cut", "flag"} {
		d := newRealContam(f, action, 0)
		for i := 0; i < len(docs); i += 60 {
			observeRange(d, docs, i, min(i+60, len(docs)))
			p, err := d.SaveReport()
			if err != nil {
				f.Fatal(err)
			}
			f.Add(action, p)
		}
	}
	f.Add("drop", []byte(`{}`))
	f.Add("drop", []byte(`null`))
	fresh := map[string]func() *Decontaminate{}
	for _, action := range []string{"drop", "cut", "flag"} {
		proto := newRealContam(f, action, 0)
		sets, cfg := proto.sets, proto.cfg
		fresh[action] = func() *Decontaminate {
			d, err := NewDecontaminate("decontaminate", cfg, sets)
			if err != nil {
				panic(err)
			}
			return d
		}
	}
	f.Fuzz(func(t *testing.T, action string, part []byte) {
		mk := fresh[action]
		if mk == nil {
			mk = fresh["drop"]
		}
		d := mk()
		emptyPart, _ := mk().SaveReport()
		if err := d.MergeReport(part); err != nil {
			if p, _ := d.SaveReport(); !bytes.Equal(p, emptyPart) {
				t.Fatalf("failed merge (%v) changed the stage: %s", err, p)
			}
			return
		}
		p1, err := d.SaveReport()
		if err != nil {
			t.Fatal(err)
		}
		d2 := mk()
		if err := d2.MergeReport(p1); err != nil {
			t.Fatalf("saved part does not merge: %v\n%s", err, p1)
		}
		p2, err := d2.SaveReport()
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(p1, p2) {
			t.Fatalf("part changed on a second merge:\n%s\n%s", p1, p2)
		}
		if _, err := json.Marshal(d2.Report()); err != nil {
			t.Fatal(err)
		}
	})
}
