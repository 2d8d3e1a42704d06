package stages

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/dedup"
	"winnow/stages/synth"
)

func newGlobal(t *testing.T, kind string, params map[string]any, env Env) GlobalStage {
	t.Helper()
	k, ok := LookupKind(kind)
	if !ok || k.NewGlobal == nil {
		t.Fatalf("kind %s not registered as a global stage", kind)
	}
	if env.TempDir == "" {
		env.TempDir = t.TempDir()
	}
	g, err := k.NewGlobal(ParamsFromMap(params), env)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// runGlobal drives a global stage the way the runner does: Scan from
// `workers` goroutines in a shuffled order, Collect in input order,
// Reduce, Apply. It returns each decision rendered as a ledger-like line.
func runGlobal(t *testing.T, g GlobalStage, docs []*Doc, workers int) []string {
	t.Helper()
	reduceGlobal(t, g, docs, workers)
	out := make([]string, len(docs))
	for i, d := range docs {
		out[i] = renderDecision(g.Apply(d))
	}
	return out
}

// reduceGlobal runs Scan on `workers` goroutines in a shuffled order,
// Collect in input order, and Reduce.
func reduceGlobal(t *testing.T, g GlobalStage, docs []*Doc, workers int) {
	t.Helper()
	keys := make([]any, len(docs))
	perm := rand.New(rand.NewPCG(uint64(workers), 17)).Perm(len(docs))
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for j := w; j < len(perm); j += workers {
				keys[perm[j]] = g.Scan(docs[perm[j]])
			}
		}(w)
	}
	wg.Wait()
	for i, d := range docs {
		if err := g.Collect(d.Order, d.ID, keys[i]); err != nil {
			t.Fatal(err)
		}
	}
	if err := g.Reduce(); err != nil {
		t.Fatal(err)
	}
}

func renderDecision(dec Decision) string {
	if dec.Action == Keep {
		return "keep"
	}
	var extra []string
	for k, v := range dec.Extra {
		extra = append(extra, fmt.Sprintf("%s=%v", k, v))
	}
	sort.Strings(extra)
	return fmt.Sprintf("%s %s %v %v %s %v", dec.Action, dec.Rule, dec.Value, dec.Changes, strings.Join(extra, " "), len(dec.Text))
}

func makeDocs(texts []string) []*Doc {
	docs := make([]*Doc, len(texts))
	for i, s := range texts {
		docs[i] = &Doc{ID: fmt.Sprintf("t/%d", i), Text: s, Order: MakeOrderKey(i%3, int64(i))}
	}
	// Order keys must increase in slice order.
	sort.Slice(docs, func(i, j int) bool { return docs[i].Order < docs[j].Order })
	return docs
}

func TestDedupParamErrors(t *testing.T) {
	k, _ := LookupKind("near_dedup")
	_, err := k.NewGlobal(ParamsFromMap(map[string]any{"permutations": 128, "bands": 15}), Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), "bands") || !strings.Contains(err.Error(), "16") {
		t.Fatalf("bands 15 of 128: %v", err)
	}
	_, err = k.NewGlobal(ParamsFromMap(map[string]any{"treshold": 0.7}), Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), "threshold") {
		t.Fatalf("typo: %v", err)
	}
	_, err = k.NewGlobal(ParamsFromMap(map[string]any{"verify": "jaccard"}), Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), "verify") {
		t.Fatalf("verify: %v", err)
	}
	e, _ := LookupKind("exact_dedup")
	_, err = e.NewGlobal(ParamsFromMap(map[string]any{"scope": "line"}), Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), "scope") {
		t.Fatalf("scope: %v", err)
	}
	_, err = e.NewGlobal(ParamsFromMap(map[string]any{"max_repeats": 3}), Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), "max_repeats") {
		t.Fatalf("max_repeats without paragraph scope: %v", err)
	}
}

func TestNearDedupDescribe(t *testing.T) {
	k, _ := LookupKind("near_dedup")
	g, err := k.NewGlobal(ParamsFromMap(map[string]any{"permutations": 100, "bands": 20}), Env{Checking: true})
	if err != nil {
		t.Fatal(err)
	}
	d := g.(Describer).Describe()
	// b=20, r=5: P(0.5) = 1-(1-1/32)^20 = 0.4701, P(0.8) = 0.9996.
	for _, want := range []string{"20 bands x 5 rows", "s=0.5  P=0.4701", "s=0.8  P=0.9996", "s=1.0  P=1.0000"} {
		if !strings.Contains(d, want) {
			t.Errorf("Describe lacks %q:\n%s", want, d)
		}
	}
}

func TestExactDedupStage(t *testing.T) {
	texts := []string{"Fresh bottom paint.", "Rigging check.", "fresh  BOTTOM paint.", "", "Rigging check."}
	docs := makeDocs(texts)
	g := newGlobal(t, "exact_dedup", nil, Env{})
	defer g.Close()
	got := runGlobal(t, g, docs, 2)
	want := []string{"keep", "keep", "drop exact_duplicate <nil> map[] of=t/0 0", "keep", "drop exact_duplicate <nil> map[] of=t/1 0"}
	byID := map[string]string{}
	for i, d := range docs {
		byID[d.ID] = got[i]
	}
	for i, w := range want {
		if byID[fmt.Sprintf("t/%d", i)] != w {
			t.Errorf("t/%d: %q, want %q", i, byID[fmt.Sprintf("t/%d", i)], w)
		}
	}
}

func TestParagraphScopeStage(t *testing.T) {
	var texts []string
	for i := 0; i < 8; i++ {
		texts = append(texts, fmt.Sprintf("Work order %d for the yard.\n\nCall the office at the harbor.", i))
	}
	texts = append(texts, "Call the office at the harbor.")
	g := newGlobal(t, "exact_dedup", map[string]any{"scope": "paragraph", "max_repeats": 5}, Env{MemoryBudget: 32})
	defer g.Close()
	got := runGlobal(t, g, makeDocs(texts), 2)
	edits, drops := 0, 0
	for _, s := range got {
		switch {
		case strings.HasPrefix(s, "edit repeated_paragraph 1 map[paragraphs_removed:1]"): // value: paragraphs removed, as for the drop
			edits++
		case strings.HasPrefix(s, "drop repeated_paragraph 1 map[paragraphs_removed:1]"):
			drops++
		default:
			t.Errorf("unexpected decision %q", s)
		}
	}
	if edits != 8 || drops != 1 {
		t.Errorf("edits %d drops %d", edits, drops)
	}
}

// Results do not depend on the number of Scan goroutines or their order,
// nor on whether the memory budget forces spilled runs.
func TestDedupStagesDeterministic(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	words := strings.Fields("hull keel mast boom sail rudder tiller winch cleat deck hatch bilge pump anchor chain teak varnish epoxy resin")
	var texts []string
	for i := 0; i < 400; i++ {
		if i > 5 && rng.IntN(4) == 0 {
			w := strings.Fields(texts[rng.IntN(len(texts))])
			w[rng.IntN(len(w))] = "changed"
			texts = append(texts, strings.Join(w, " "))
			continue
		}
		var b strings.Builder
		for j := 0; j < 80+rng.IntN(80); j++ {
			b.WriteString(words[rng.IntN(len(words))] + " ")
		}
		texts = append(texts, b.String())
	}
	docs := makeDocs(texts)
	for _, kind := range []string{"exact_dedup", "near_dedup"} {
		var base []string
		for _, c := range []struct {
			workers int
			budget  int64
		}{{1, 1 << 30}, {4, 1 << 30}, {3, 100}} {
			g := newGlobal(t, kind, map[string]any{}, Env{MemoryBudget: c.budget, Seed: 11})
			got := runGlobal(t, g, docs, c.workers)
			g.Close()
			if base == nil {
				base = got
				continue
			}
			for i := range got {
				if got[i] != base[i] {
					t.Fatalf("%s workers=%d budget=%d: doc %s %q, want %q", kind, c.workers, c.budget, docs[i].ID, got[i], base[i])
				}
			}
		}
		removed := 0
		for _, s := range base {
			if s != "keep" {
				removed++
			}
		}
		if kind == "near_dedup" && removed < 50 {
			t.Errorf("near_dedup removed only %d planted copies", removed)
		}
	}
}

// An incremental run drops documents that duplicate the previous run's
// kept documents and names that run in "against".
func TestDedupStagesAgainst(t *testing.T) {
	run1 := t.TempDir()
	texts := []string{
		"Survey of the hull before launch found soft spots near the transom and the keel joint on the port side.",
		"The diesel filter and impeller were replaced during the spring haulout of the yard boat this season.",
		"Survey of the hull before launch found soft spots near the transom and the keel joint on the port side.",
	}
	for _, kind := range []string{"exact_dedup", "near_dedup"} {
		g := newGlobal(t, kind, nil, Env{RunDir: run1, Seed: 4})
		runGlobal(t, g, makeDocs(texts), 1)
		g.Close()
		matches, _ := filepath.Glob(filepath.Join(run1, "keys", kind+".*"))
		if len(matches) == 0 {
			t.Fatalf("%s wrote no keys under %s/keys", kind, run1)
		}
	}
	next := []string{
		"survey of the HULL  before launch found soft spots near the transom and the keel joint on the port side.",
		"A new page about mooring lines and chafe guards for the winter storms in the north harbor of the yard.",
	}
	docs := makeDocs(next)
	for i := range docs {
		docs[i].ID = fmt.Sprintf("new/%d", i)
	}
	for _, kind := range []string{"exact_dedup", "near_dedup"} {
		g := newGlobal(t, kind, nil, Env{RunDir: t.TempDir(), Against: run1, Seed: 4})
		got := runGlobal(t, g, docs, 2)
		g.Close()
		if !strings.Contains(got[0], "against="+run1) || !strings.Contains(got[0], "of=t/0") || got[1] != "keep" {
			t.Errorf("%s against: %q", kind, got)
		}
	}
	// A mismatched seed cannot compare signatures: a clear error.
	k, _ := LookupKind("near_dedup")
	if _, err := k.NewGlobal(ParamsFromMap(nil), Env{TempDir: t.TempDir(), Against: run1, Seed: 5}); err == nil || !strings.Contains(err.Error(), "seed") {
		t.Errorf("seed mismatch: %v", err)
	}
}

// readSynthDocs reads a generated corpus in a fixed file order: sources
// sorted by name, files in the listed order, lines in order.
func readSynthDocs(t *testing.T, dir string, tr *synth.Truth) []*Doc {
	t.Helper()
	var sources []string
	for s := range tr.Files {
		sources = append(sources, s)
	}
	sort.Strings(sources)
	var docs []*Doc
	fileNo := 0
	for _, s := range sources {
		for _, rel := range tr.Files[s] {
			path := rel
			if !filepath.IsAbs(path) {
				path = filepath.Join(dir, rel)
			}
			f, err := os.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			zr, err := zstd.NewReader(f)
			if err != nil {
				t.Fatal(err)
			}
			sc := bufio.NewScanner(zr)
			sc.Buffer(make([]byte, 1<<20), 64<<20)
			line := int64(0)
			for sc.Scan() {
				var rec struct {
					ID   string `json:"id"`
					Text string `json:"text"`
				}
				if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
					t.Fatalf("%s:%d: %v", path, line+1, err)
				}
				docs = append(docs, &Doc{ID: rec.ID, Text: rec.Text, Source: s, File: path, Line: line + 1, Order: MakeOrderKey(fileNo, line)})
				line++
			}
			if err := sc.Err(); err != nil {
				t.Fatal(err)
			}
			zr.Close()
			f.Close()
			fileNo++
		}
	}
	return docs
}

// Check against the generator's truth file (planted copies): exact dedup
// finds every exact copy; near dedup at threshold 0.8 puts >= 95% of
// planted pairs with J >= 0.9 in one cluster and < 1% of pairs with
// J <= 0.5 (issue 4 acceptance values).
func TestDedupAgainstSynthTruth(t *testing.T) {
	dir := t.TempDir()
	tr, err := synth.Generate(synth.Options{Dir: dir, Docs: 3000, Seed: 21})
	if err != nil {
		t.Fatal(err)
	}
	docs := readSynthDocs(t, dir, tr)
	if len(docs) != len(tr.Docs) {
		t.Fatalf("read %d docs, truth has %d", len(docs), len(tr.Docs))
	}
	// canonical maps a doc id to the id its cluster kept.
	canonical := func(kind string, params map[string]any) map[string]string {
		g := newGlobal(t, kind, params, Env{Seed: 21, MemoryBudget: 1 << 16})
		defer g.Close()
		reduceGlobal(t, g, docs, 2)
		c := map[string]string{}
		for _, d := range docs {
			c[d.ID] = d.ID
			if dec := g.Apply(d); dec.Action == Drop {
				c[d.ID] = dec.Extra["of"].(string)
			}
		}
		return c
	}
	exact := canonical("exact_dedup", nil)
	text := map[string]string{}
	for _, d := range docs {
		text[d.ID] = d.Text
	}
	exactCopies := 0
	for _, td := range tr.Docs {
		if td.Kind == synth.KindExactCopy {
			exactCopies++
			if exact[td.ID] != exact[td.CopyOf] {
				t.Errorf("exact copy %s of %s not found", td.ID, td.CopyOf)
			}
		}
	}
	norm := dedup.Normalization{}
	for id, kept := range exact {
		if id != kept && string(norm.Append(nil, text[id])) != string(norm.Append(nil, text[kept])) {
			t.Errorf("exact dedup removed %s of %s, texts differ", id, kept)
		}
	}
	if exactCopies < 50 {
		t.Fatalf("corpus has only %d exact copies", exactCopies)
	}

	near := canonical("near_dedup", map[string]any{"threshold": 0.8})
	var hiPairs, hiFound, loPairs, loFlagged int
	for _, td := range tr.Docs {
		if td.Kind != synth.KindNearCopy {
			continue
		}
		same := near[td.ID] == near[td.CopyOf]
		switch {
		case td.Jaccard >= 0.9:
			hiPairs++
			if same {
				hiFound++
			}
		case td.Jaccard <= 0.5:
			loPairs++
			if same {
				loFlagged++
			}
		}
	}
	t.Logf("near: %d/%d pairs with J>=0.9 found, %d/%d pairs with J<=0.5 flagged", hiFound, hiPairs, loFlagged, loPairs)
	if hiPairs < 30 || loPairs < 10 {
		t.Fatalf("corpus has too few planted near pairs: %d high, %d low", hiPairs, loPairs)
	}
	if float64(hiFound) < 0.95*float64(hiPairs) {
		t.Errorf("near dedup found %d of %d pairs with J >= 0.9 (< 95%%)", hiFound, hiPairs)
	}
	if float64(loFlagged) >= 0.01*float64(loPairs) && loFlagged > 0 {
		t.Errorf("near dedup flagged %d of %d pairs with J <= 0.5 (>= 1%%)", loFlagged, loPairs)
	}
}

func TestDedupKeepParamErrors(t *testing.T) {
	for _, c := range []struct {
		kind   string
		params map[string]any
		want   string
	}{
		{"near_dedup", map[string]any{"keep": "newest"}, `want first, longest, {sources: [a, b, ...]} or {metric: STAGE.METRIC, prefer: max|min}, got "newest"`},
		{"near_dedup", map[string]any{"keep": "sources"}, `got "sources"`},
		{"exact_dedup", map[string]any{"keep": map[string]any{"sources": []string{}}}, "at least one source"},
		{"exact_dedup", map[string]any{"keep": map[string]any{"sources": []string{"web", "web"}}}, "listed twice"},
		{"near_dedup", map[string]any{"keep": map[string]any{"sources": []string{"a"}, "metric": "quality.word_count"}}, "not both"},
		{"near_dedup", map[string]any{"keep": map[string]any{"metric": "words"}}, "STAGE.METRIC"},
		{"near_dedup", map[string]any{"keep": map[string]any{"metric": "quality.word_count", "prefer": "high"}}, "prefer"},
		{"near_dedup", map[string]any{"keep": map[string]any{"metrc": "quality.word_count"}}, `did you mean "metric"`},
		{"exact_dedup", map[string]any{"scope": "paragraph", "keep": "longest"}, "keep applies only to scope: document"},
	} {
		k, _ := LookupKind(c.kind)
		_, err := k.NewGlobal(ParamsFromMap(c.params), Env{Checking: true})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s %v: error %v, want it to mention %q", c.kind, c.params, err, c.want)
		}
	}
}

// The keep rule chooses the survivor at stage level too: by source, by
// length, and by a metric an earlier stage measured (Doc.Measured).
func TestDedupKeepStage(t *testing.T) {
	base := "Haul out the ketch, pressure wash the hull below the waterline, sand the old antifouling back to a sound layer, " +
		"fair the keel with epoxy filler, apply two coats of primer and three of antifouling paint, then relaunch at high tide."
	longer := base + " Check the seacocks first."
	docs := []*Doc{
		{ID: "mirror/1", Source: "mirror", Text: base, Order: MakeOrderKey(0, 1), Measured: map[string]float64{"quality.word_count": 40}},
		{ID: "docs/1", Source: "docs", Text: longer, Order: MakeOrderKey(0, 2), Measured: map[string]float64{"quality.word_count": 45}},
		{ID: "docs/2", Source: "docs", Text: strings.ToUpper(base), Order: MakeOrderKey(0, 3)},
	}
	for _, c := range []struct {
		kind string
		keep any
		want []string // survivor of each doc ("" when kept)
	}{
		{"near_dedup", nil, []string{"", "mirror/1", "mirror/1"}},
		{"near_dedup", "longest", []string{"docs/1", "", "docs/1"}},
		{"near_dedup", map[string]any{"sources": []string{"docs"}}, []string{"docs/1", "", "docs/1"}},
		{"near_dedup", map[string]any{"metric": "quality.word_count", "prefer": "min"}, []string{"", "mirror/1", "mirror/1"}},
		{"near_dedup", map[string]any{"metric": "quality.word_count", "prefer": "max"}, []string{"docs/1", "", "docs/1"}},
		{"exact_dedup", nil, []string{"", "", "mirror/1"}},
		{"exact_dedup", map[string]any{"sources": []string{"docs"}}, []string{"docs/2", "", ""}},
	} {
		params := map[string]any{}
		if c.keep != nil {
			params["keep"] = c.keep
		}
		g := newGlobal(t, c.kind, params, Env{})
		reduceGlobal(t, g, docs, 2)
		for i, d := range docs {
			dec := g.Apply(d)
			of, _ := dec.Extra["of"].(string)
			if (dec.Action == Drop) != (c.want[i] != "") || of != c.want[i] {
				t.Errorf("%s keep %v: %s: %s, want removed of %q", c.kind, c.keep, d.ID, renderDecision(dec), c.want[i])
			}
		}
		m, _ := c.keep.(map[string]any)
		if uses := g.(MetricUser).UsesMetrics(); (len(uses) == 1 && uses[0] == "quality.word_count") != (m["metric"] != nil) {
			t.Errorf("%s keep %v: UsesMetrics %v", c.kind, c.keep, uses)
		}
		g.Close()
	}
}
