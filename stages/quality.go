package stages

import (
	"fmt"
	"math"
	"strings"
	"sync"

	"winnow/filters"
)

// qualityStage applies the document-level quality rules of Rae et al.
// 2021 (MassiveWeb, appendix A; thresholds from memory, see package
// filters) to the metrics that filters.MeasureQuality computes. Every
// metric is measured on every document and stored, so what-if can
// recompute any threshold.
//
// Naming: a metric names what is measured (a count ends in _count, a
// fraction in _share, a rate in _per_word); a rule is named after the
// metric it limits, and a metric limited from both sides gives two rules
// named by the direction (words_too_few, words_too_many); a spec key names
// the limit itself (fewest_..., most_..., shortest_..., longest_...,
// lowest_...), in the unit of its metric.
//
// Rules, in the order they are checked (the first failing one drops):
//
//	words_too_few                word_count >= fewest_words (50)
//	words_too_many               word_count <= most_words (100000)
//	words_too_short              average_word_length >= shortest_average_word (3)
//	words_too_long               average_word_length <= longest_average_word (10)
//	symbols_per_word             symbols_per_word <= most_symbols_per_word (0.1):
//	                             the larger of '#' per word and ellipses per word
//	bulleted_lines_share         bulleted_lines_share <= most_bulleted_lines (0.9)
//	ellipsis_ending_lines_share  ellipsis_ending_lines_share <= most_ellipsis_ending_lines (0.3)
//	words_with_letters_share     words_with_letters_share >= fewest_words_with_letters (0.8)
//	stop_word_count              stop_word_count >= fewest_stop_words (2)
//	stop_word_share              stop_word_share >= lowest_stop_word_share (off unless set)
//
// The stop-word metrics depend on the document's language: the spec's
// `language` when set, else d.Meta["lang"] (from the langid stage), else
// "en" (nb and nn use the Norwegian list). Shadow measurement sees the
// language too: a document the langid stage removed still carries its
// detected language here. In English stop_word_count counts the paper's eight words (the,
// be, to, of, and, that, have, with); in another supported language it
// counts occurrences of that language's stopwords-iso list.
// stop_word_share is the share of words that are entries of the
// language's list. For a language without a list both are null and their
// rules do not apply.
type qualityStage struct {
	rules []Rule
	lang  string // forced language, "" = from the document
}

// Metrics measured by the quality stage, in Decision.Metrics order.
var qualityMetrics = []string{"word_count", "average_word_length", "symbols_per_word", "hashes_per_word", "ellipses_per_word",
	"bulleted_lines_share", "ellipsis_ending_lines_share", "words_with_letters_share", "stop_word_count", "stop_word_share"}

func init() {
	Register(Kind{
		Name: "quality",
		Doc:  "document quality rules of Rae et al. 2021 (words, word length, symbols, bullets, ellipses, letters, stop words)",
		New:  newQuality,
	})
}

// ruleSpec is one threshold rule a stage reads from its parameters.
type ruleSpec struct {
	name, key, metric string
	cmp               Cmp
	def, min, max     float64
	off               bool // disabled unless the key is set
}

// readRules builds rules from their spec keys, each overridable, and
// applies the `disable` list (keys of rules to switch off).
func readRules(p *Params, specs []ruleSpec) []Rule {
	rules := make([]Rule, 0, len(specs))
	known := map[string]bool{}
	var keys []string
	for _, rs := range specs {
		enabled := !rs.off || p.Has(rs.key)
		rules = append(rules, Rule{Name: rs.name, Key: rs.key, Metric: rs.metric, Cmp: rs.cmp,
			Limit: p.Float(rs.key, rs.def, rs.min, rs.max), Enabled: enabled})
		if !known[rs.key] {
			known[rs.key] = true
			keys = append(keys, rs.key)
		}
	}
	for _, k := range p.Strings("disable", nil) {
		if !known[k] {
			p.Errorf("disable", "%q is not a rule key (keys: %s)", k, strings.Join(keys, ", "))
			continue
		}
		for i := range rules {
			if rules[i].Key == k {
				rules[i].Enabled = false
			}
		}
	}
	return rules
}

func newQuality(p *Params, env Env) (Stage, error) {
	big := float64(math.MaxInt32)
	s := &qualityStage{rules: readRules(p, []ruleSpec{
		{"words_too_few", "fewest_words", "word_count", AtLeast, filters.GopherFewestWords, 0, big, false},
		{"words_too_many", "most_words", "word_count", AtMost, filters.GopherMostWords, 0, big, false},
		{"words_too_short", "shortest_average_word", "average_word_length", AtLeast, filters.GopherShortestAverageWord, 0, big, false},
		{"words_too_long", "longest_average_word", "average_word_length", AtMost, filters.GopherLongestAverageWord, 0, big, false},
		{"symbols_per_word", "most_symbols_per_word", "symbols_per_word", AtMost, filters.GopherMostSymbolsPerWord, 0, big, false},
		{"bulleted_lines_share", "most_bulleted_lines", "bulleted_lines_share", AtMost, filters.GopherMostBulletedLines, 0, 1, false},
		{"ellipsis_ending_lines_share", "most_ellipsis_ending_lines", "ellipsis_ending_lines_share", AtMost, filters.GopherMostEllipsisEndingLines, 0, 1, false},
		{"words_with_letters_share", "fewest_words_with_letters", "words_with_letters_share", AtLeast, filters.GopherFewestWordsWithLetters, 0, 1, false},
		{"stop_word_count", "fewest_stop_words", "stop_word_count", AtLeast, filters.GopherFewestStopWords, 0, big, false},
		{"stop_word_share", "lowest_stop_word_share", "stop_word_share", AtLeast, 0, 0, 1, true},
	})}
	s.lang = p.String("language", "", filters.StopwordCodes()...)
	return s, p.Done()
}

func (s *qualityStage) Name() string          { return "quality" }
func (s *qualityStage) Kind() string          { return "quality" }
func (s *qualityStage) MetricNames() []string { return qualityMetrics }
func (s *qualityStage) Rules() []Rule         { return s.rules }

// scratchPool holds the per-goroutine buffers of the metric stages. The
// quality and repetition stages share it, so a document measured by both
// on one worker is split once (filters.Scratch remembers its last text).
var scratchPool = sync.Pool{New: func() any { return new(filters.Scratch) }}

func getScratch() *filters.Scratch { return scratchPool.Get().(*filters.Scratch) }

func putScratch(s *filters.Scratch) {
	s.Release()
	scratchPool.Put(s)
}

// docLang returns the document's language code from meta "lang", or "en".
func docLang(d *Doc) string {
	if v, ok := d.Meta["lang"].(string); ok && v != "" {
		return v
	}
	return "en"
}

// Process measures every quality metric and applies the rules.
func (s *qualityStage) Process(d *Doc) Decision {
	lang := s.lang
	if lang == "" {
		lang = docLang(d)
	}
	sw, err := filters.StopwordsFor(lang)
	if err != nil {
		sw = nil // no list: the stop-word metrics do not apply
	}
	sc := getScratch()
	q := filters.MeasureQuality(sc, d.Text, sw)
	putScratch(sc)
	stop, density := math.NaN(), math.NaN()
	switch {
	case sw == nil:
	case lang == "en":
		stop, density = float64(q.Stop.Gopher), q.Stop.Density()
	default:
		stop, density = float64(q.Stop.Matches), q.Stop.Density()
	}
	m := []float64{float64(q.Words), q.AverageWordLength, q.SymbolsPerWord, q.HashesPerWord, q.EllipsesPerWord,
		q.BulletedLinesShare, q.EllipsisEndingLinesShare, q.WordsWithLettersShare, stop, density}
	return ApplyRules(s.rules, qualityMetrics, m)
}

// Describe lists the stop-word languages the stage supports.
func (s *qualityStage) Describe() string {
	lang := s.lang
	if lang == "" {
		lang = `meta "lang", default en`
	}
	return fmt.Sprintf("stop words: %s (lists for %s)", lang, strings.Join(filters.StopwordLanguages(), " "))
}
