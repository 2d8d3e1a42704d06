package stages

import (
	"fmt"

	"winnow/filters"
)

// repetitionStage applies the repetition rules of Rae et al. 2021
// (MassiveWeb, appendix A, table A1; thresholds from memory) to the
// metrics that filters.MeasureRepetition computes in one pass over the
// words. Each rule is named like its metric and its spec key, and drops a
// document whose fraction exceeds the limit:
//
//	dup_line_frac       duplicate lines / lines                        0.30
//	dup_para_frac       duplicate paragraphs / paragraphs              0.30
//	dup_line_char_frac  characters in duplicate lines / characters     0.20
//	dup_para_char_frac  characters in duplicate paragraphs / chars     0.20
//	top_2gram_frac      characters of the most frequent 2-gram         0.20
//	top_3gram_frac      ... 3-gram                                     0.18
//	top_4gram_frac      ... 4-gram                                     0.16
//	dup_5gram_frac      characters in repeated 5-grams                 0.15
//	dup_6gram_frac ... dup_10gram_frac                                 0.14 ... 0.10
type repetitionStage struct {
	rules []Rule
}

// Metrics measured by the repetition stage, in Decision.Metrics order.
var repetitionMetrics = []string{"dup_line_frac", "dup_para_frac", "dup_line_char_frac", "dup_para_char_frac",
	"top_2gram_frac", "top_3gram_frac", "top_4gram_frac",
	"dup_5gram_frac", "dup_6gram_frac", "dup_7gram_frac", "dup_8gram_frac", "dup_9gram_frac", "dup_10gram_frac"}

func init() {
	Register(Kind{
		Name: "repetition",
		Doc:  "repetition rules of Rae et al. 2021 (duplicate lines and paragraphs, top and duplicate word n-grams)",
		New:  newRepetition,
	})
}

func newRepetition(p *Params, env Env) (Stage, error) {
	defaults := []float64{filters.GopherDupLineFrac, filters.GopherDupParaFrac,
		filters.GopherDupLineCharFrac, filters.GopherDupParaCharFrac}
	defaults = append(defaults, filters.GopherTopNgramFrac[:]...)
	defaults = append(defaults, filters.GopherDupNgramFrac[:]...)
	specs := make([]ruleSpec, len(repetitionMetrics))
	for i, m := range repetitionMetrics {
		specs[i] = ruleSpec{name: m, key: m, metric: m, cmp: AtMost, def: defaults[i], min: 0, max: 1}
	}
	if len(defaults) != len(repetitionMetrics) {
		panic(fmt.Sprintf("repetition: %d defaults for %d metrics", len(defaults), len(repetitionMetrics)))
	}
	s := &repetitionStage{rules: readRules(p, specs)}
	return s, p.Done()
}

func (s *repetitionStage) Name() string          { return "repetition" }
func (s *repetitionStage) Kind() string          { return "repetition" }
func (s *repetitionStage) MetricNames() []string { return repetitionMetrics }
func (s *repetitionStage) Rules() []Rule         { return s.rules }

// Process measures every repetition metric and applies the rules.
func (s *repetitionStage) Process(d *Doc) Decision {
	sc := getScratch()
	r := filters.MeasureRepetition(sc, d.Text)
	putScratch(sc)
	m := make([]float64, 0, len(repetitionMetrics))
	m = append(m, r.DupLineFrac, r.DupParaFrac, r.DupLineCharFrac, r.DupParaCharFrac)
	m = append(m, r.TopNgram[:]...)
	m = append(m, r.DupNgram[:]...)
	return ApplyRules(s.rules, repetitionMetrics, m)
}
