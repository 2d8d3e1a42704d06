package stages

import (
	"fmt"
	"strings"

	"winnow/filters"
)

// repetitionStage applies the repetition rules of Rae et al. 2021
// (MassiveWeb, appendix A, table A1; thresholds from memory) to the
// metrics that filters.MeasureRepetition computes in one pass over the
// words. Each rule is named like its metric (a share, see the naming note
// of qualityStage); its spec key names the limit: "most_" and the
// metric's name without "_share" (most_repeated_lines limits
// repeated_lines_share). A document whose share exceeds the limit is
// dropped:
//
//	repeated_lines_share                 lines that repeat an earlier line / lines        0.30
//	repeated_paragraphs_share            the same for paragraphs                          0.30
//	repeated_line_chars_share            characters in repeated lines / characters        0.20
//	repeated_paragraph_chars_share       characters in repeated paragraphs / characters   0.20
//	top_2word_phrase_chars_share         characters of the most frequent 2-word phrase    0.20
//	top_3word_phrase_chars_share         ... 3-word phrase                                0.18
//	top_4word_phrase_chars_share         ... 4-word phrase                                0.16
//	repeated_5word_phrase_chars_share    characters in repeated 5-word phrases            0.15
//	repeated_6word_phrase_chars_share ... repeated_10word_phrase_chars_share          0.14 ... 0.10
//
// (A word phrase is the paper's word n-gram.)
type repetitionStage struct {
	rules []Rule
}

// Metrics measured by the repetition stage, in Decision.Metrics order.
var repetitionMetrics = []string{"repeated_lines_share", "repeated_paragraphs_share", "repeated_line_chars_share", "repeated_paragraph_chars_share",
	"top_2word_phrase_chars_share", "top_3word_phrase_chars_share", "top_4word_phrase_chars_share",
	"repeated_5word_phrase_chars_share", "repeated_6word_phrase_chars_share", "repeated_7word_phrase_chars_share", "repeated_8word_phrase_chars_share", "repeated_9word_phrase_chars_share", "repeated_10word_phrase_chars_share"}

func init() {
	Register(Kind{
		Name: "repetition",
		Doc:  "repetition rules of Rae et al. 2021 (duplicate lines and paragraphs, top and duplicate word n-grams)",
		New:  newRepetition,
	})
}

func newRepetition(p *Params, env Env) (Stage, error) {
	defaults := []float64{filters.GopherMostRepeatedLines, filters.GopherMostRepeatedParagraphs,
		filters.GopherMostRepeatedLineChars, filters.GopherMostRepeatedParagraphChars}
	defaults = append(defaults, filters.GopherMostTopPhraseChars[:]...)
	defaults = append(defaults, filters.GopherMostRepeatedPhraseChars[:]...)
	specs := make([]ruleSpec, len(repetitionMetrics))
	for i, m := range repetitionMetrics {
		specs[i] = ruleSpec{name: m, key: "most_" + strings.TrimSuffix(m, "_share"), metric: m, cmp: AtMost, def: defaults[i], min: 0, max: 1}
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
	m = append(m, r.RepeatedLinesShare, r.RepeatedParagraphsShare, r.RepeatedLineCharsShare, r.RepeatedParagraphCharsShare)
	m = append(m, r.TopPhraseCharsShare[:]...)
	m = append(m, r.RepeatedPhraseCharsShare[:]...)
	return ApplyRules(s.rules, repetitionMetrics, m)
}
