package stages

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/filters/domain"
	"winnow/stages/fsio"
)

// Invented texts of the Larkspur Marine Works scenario (in-domain) and of
// unrelated town life (background), for the stage's plumbing tests; the
// methods' accuracy is checked on real documents in filters/domain.
var (
	domainRepair = []string{
		"Sand the hull down to bare gelcoat before you apply the first coat of epoxy barrier.",
		"Replace the raw-water impeller each season and keep a spare in the engine locker.",
		"Check the zinc anodes on the propeller shaft and replace any that have lost half their mass.",
		"Grease the winches twice a season and strip them down fully once every two years.",
		"Inspect the fuel filter bowl for water after a week of heavy rain in the marina.",
		"Winterize the freshwater system by draining the tanks and running antifreeze through the lines.",
	}
	domainOther = []string{
		"The council approved the new budget for the library after a long debate on Tuesday.",
		"Our bakery sells sourdough loaves, rye rolls and cinnamon buns every morning from seven.",
		"The orchestra rehearsed the symphony twice before the concert in the town hall.",
		"Train tickets are cheaper when booked a month ahead on the regional line.",
		"The museum exhibition shows paintings of the valley from the last two centuries.",
		"Students must hand in the history essay before the end of the spring term.",
	}
)

// writeDomainSets writes the two sets as JSON Lines under dir and returns
// the paths relative to dir.
func writeDomainSets(t testing.TB, dir string) (ex, bg string) {
	t.Helper()
	write := func(name string, texts []string) string {
		var b strings.Builder
		for i, s := range texts {
			fmt.Fprintf(&b, `{"id":"%s-%d","text":%q}`+"\n", name, i, s)
		}
		rel := "seed/" + name + ".jsonl"
		if err := os.MkdirAll(filepath.Join(dir, "seed"), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, rel), []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
		return rel
	}
	return write("repair", domainRepair), write("other", domainOther)
}

func newDomainForTest(t *testing.T, params map[string]any, env Env) (*domainStage, error) {
	t.Helper()
	k, ok := LookupKind("domain")
	if !ok {
		t.Fatal("domain kind not registered")
	}
	g, err := k.NewGlobal(ParamsFromMap(params), env)
	if err != nil {
		return nil, err
	}
	return g.(*domainStage), nil
}

// TestDomainStageTrainsScoresAndStores: the stage trains from the spec's
// files, scores every document into domain_score, drops under min_score,
// writes RUN/keys/domain.model whose bytes hash to the stage's hash, and a
// stage built with model: PATH scores exactly the same.
func TestDomainStageTrainsScoresAndStores(t *testing.T) {
	dir := t.TempDir()
	ex, bg := writeDomainSets(t, dir)
	run := filepath.Join(dir, "run")
	s, err := newDomainForTest(t, map[string]any{"examples": []string{ex}, "background": []string{bg}, "min_score": 0.5},
		Env{SpecDir: dir, RunDir: run, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	for _, text := range domainRepair {
		dec := s.Process(&Doc{Text: text})
		if dec.Action != Keep || len(dec.Metrics) != 1 || dec.Metrics[0] < 0.5 {
			t.Errorf("repair text: %+v", dec)
		}
	}
	for _, text := range domainOther {
		dec := s.Process(&Doc{Text: text})
		if dec.Action != Drop || dec.Rule != "domain_score" || dec.Metrics[0] >= 0.5 {
			t.Errorf("other text: %+v", dec)
		}
	}
	files := s.StageFiles()
	if len(files) != 1 || files[0].Path != "keys/domain.model" {
		t.Fatalf("stage files %+v", files)
	}
	file := files[0].Path
	b, err := os.ReadFile(filepath.Join(run, file))
	if err != nil {
		t.Fatal(err)
	}
	var m domain.Model
	if err := m.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	// The recorded hash is the file's, as fsio.HashFile computes it for
	// every other file of the manifest.
	n, fileHash, err := fsio.HashFile(filepath.Join(run, file))
	if err != nil {
		t.Fatal(err)
	}
	if h, _ := m.Hash(); h != files[0].XXH3 || fileHash != h || n != files[0].Bytes || len(b) != 16+m.SizeBytes() {
		t.Fatalf("stored model hash %s (file %s, %d bytes), stage says %+v", h, fileHash, n, files[0])
	}
	reuse, err := newDomainForTest(t, map[string]any{"model": filepath.Join("run", file)}, Env{SpecDir: dir, Seed: 99})
	if err != nil {
		t.Fatal(err)
	}
	for _, text := range append(append([]string{}, domainRepair...), domainOther...) {
		if a, b := s.Process(&Doc{Text: text}).Metrics[0], reuse.Process(&Doc{Text: text}).Metrics[0]; a != b {
			t.Fatalf("reused model scores %v, trained %v", b, a)
		}
	}
	// sources: only documents of the listed sources are scored; the
	// others pass with a null score, which ApplyRules (and so what-if)
	// keeps.
	only, err := newDomainForTest(t, map[string]any{"model": filepath.Join("run", file), "sources": []string{"web"}}, Env{SpecDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	if dec := only.Process(&Doc{Text: domainOther[0], Source: "manuals"}); dec.Action != Keep || len(dec.Metrics) != 1 || !math.IsNaN(dec.Metrics[0]) {
		t.Errorf("other source: %+v", dec)
	}
	if dec := only.Process(&Doc{Text: domainOther[0], Source: "web"}); dec.Action != Drop {
		t.Errorf("listed source: %+v", dec)
	}
	if dec := ApplyRules(only.Rules(), domainMetrics, []float64{math.NaN()}); dec.Action != Keep {
		t.Errorf("null score removed: %+v", dec)
	}
	// min_score is a threshold rule what-if can move.
	if r := s.Rules(); len(r) != 1 || r[0].Key != "min_score" || r[0].Metric != "domain_score" || r[0].Limit != 0.5 {
		t.Fatalf("rules %+v", r)
	}
}

// TestDomainStageCheck: under `winnow check` the stage reports k-fold
// cross-validated accuracy and AUC; bad specs fail with the key named.
func TestDomainStageCheck(t *testing.T) {
	dir := t.TempDir()
	ex, bg := writeDomainSets(t, dir)
	s, err := newDomainForTest(t, map[string]any{"examples": ex, "background": bg, "method": "importance", "folds": 3},
		Env{SpecDir: dir, Checking: true})
	if err != nil {
		t.Fatal(err)
	}
	desc := s.Describe()
	if !strings.Contains(desc, "importance on 6 examples and 6 background documents, 10000 buckets (model 40000 bytes)") ||
		!strings.Contains(desc, "3-fold cross-validation: accuracy ") || !strings.Contains(desc, "AUC ") {
		t.Fatalf("describe: %s", desc)
	}
	for _, c := range []struct {
		p    map[string]any
		want string
	}{
		{map[string]any{"background": bg}, "examples"},
		{map[string]any{"examples": "seed/missing.jsonl", "background": bg}, "missing.jsonl"},
		{map[string]any{"examples": ex, "background": bg, "method": "fasttext"}, "method"},
		{map[string]any{"examples": ex, "background": bg, "min_score": 1.5}, "min_score"},
		{map[string]any{"examples": ex, "background": bg, "keep_fraction": 0.2, "min_score": 0.5}, "keep_fraction"},
		{map[string]any{"examples": ex, "background": bg, "keep_fraction": 0}, "keep_fraction"},
		{map[string]any{"model": "nope.model"}, "nope.model"},
	} {
		_, err := newDomainForTest(t, c.p, Env{SpecDir: dir, Checking: true})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want one naming %q", c.p, err, c.want)
		}
	}
	// A malformed training record is an error naming its file and line.
	if err := os.WriteFile(filepath.Join(dir, "seed", "bad.jsonl"), []byte(`{"text":"fine"}`+"\n"+`{"text": nope}`+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = newDomainForTest(t, map[string]any{"examples": "seed/bad.jsonl", "background": bg}, Env{SpecDir: dir})
	if err == nil || !strings.Contains(err.Error(), "bad.jsonl:2") || !strings.Contains(err.Error(), "examples") {
		t.Fatalf("malformed example: %v", err)
	}
	// A stored model of the other method is refused.
	run := filepath.Join(dir, "run")
	if _, err := newDomainForTest(t, map[string]any{"examples": ex, "background": bg}, Env{SpecDir: dir, RunDir: run}); err != nil {
		t.Fatal(err)
	}
	_, err = newDomainForTest(t, map[string]any{"model": "run/keys/domain.model", "method": "importance"}, Env{SpecDir: dir})
	if err == nil || !strings.Contains(err.Error(), "classifier") {
		t.Fatalf("method mismatch: %v", err)
	}
}

// TestDomainKeepFraction: with keep_fraction the stage is global and keeps
// exactly round(f·n) of the documents reaching it: the classifier the
// highest scores, the importance method a Gumbel top-k sample that depends
// on the seed and the document ids only. Documents outside `sources` are
// neither ranked nor removed.
func TestDomainKeepFraction(t *testing.T) {
	dir := t.TempDir()
	ex, bg := writeDomainSets(t, dir)
	var docs []*Doc
	for i, text := range append(append([]string{}, domainRepair...), domainOther...) {
		docs = append(docs, &Doc{ID: fmt.Sprintf("d%d", i), Text: text, Source: "web", Order: OrderKey(i + 1)})
	}
	docs = append(docs, &Doc{ID: "m", Text: domainOther[0], Source: "manuals", Order: 100})
	run := func(params map[string]any, seed uint64) map[string]bool {
		s, err := newDomainForTest(t, params, Env{SpecDir: dir, Seed: seed})
		if err != nil {
			t.Fatal(err)
		}
		if s.PerDocument() != nil || s.Rules() != nil {
			t.Fatal("keep_fraction stage runs per document")
		}
		for _, d := range docs {
			if err := s.Collect(d.Order, d.ID, s.Scan(d)); err != nil {
				t.Fatal(err)
			}
		}
		if err := s.Reduce(); err != nil {
			t.Fatal(err)
		}
		kept := map[string]bool{}
		for _, d := range docs {
			dec := s.Apply(d)
			if len(dec.Metrics) != 1 {
				t.Fatalf("no domain_score: %+v", dec)
			}
			if dec.Action == Keep {
				kept[d.ID] = true
			} else if dec.Rule != "keep_fraction" {
				t.Fatalf("rule %q", dec.Rule)
			}
		}
		return kept
	}
	base := map[string]any{"examples": ex, "background": bg, "keep_fraction": 0.5, "sources": []string{"web"}}
	kept := run(base, 1)
	if len(kept) != 7 || !kept["m"] {
		t.Fatalf("kept %v, want the 6 best of 12 web documents and the manuals one", kept)
	}
	for i := range domainRepair {
		if !kept[fmt.Sprintf("d%d", i)] {
			t.Errorf("classifier dropped repair text %d", i)
		}
	}
	imp := map[string]any{"examples": ex, "background": bg, "keep_fraction": 0.25, "sources": []string{"web"}, "method": "importance"}
	a, b := run(imp, 1), run(imp, 1)
	if len(a) != 4 || fmt.Sprint(a) != fmt.Sprint(b) {
		t.Fatalf("importance sample %v then %v, want 3 web documents + manuals, twice the same", a, b)
	}
	differ := false
	for seed := uint64(2); seed < 12 && !differ; seed++ {
		differ = fmt.Sprint(run(imp, seed)) != fmt.Sprint(a)
	}
	if !differ {
		t.Error("the importance sample does not depend on the seed")
	}
}
