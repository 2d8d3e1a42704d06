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
// Rules, in the order they are checked (the first failing one drops):
//
//	too_few_words     words >= min_words (50)
//	too_many_words    words <= max_words (100000)
//	short_words       mean_word_len >= min_mean_word_len (3)
//	long_words        mean_word_len <= max_mean_word_len (10)
//	symbol_ratio      symbol_ratio <= max_symbol_ratio (0.1): the larger of
//	                  '#' per word and ellipses per word
//	bullet_lines      bullet_lines <= max_bullet_lines (0.9)
//	ellipsis_lines    ellipsis_lines <= max_ellipsis_lines (0.3)
//	alpha_words       alpha_words >= min_alpha_words (0.8)
//	stopwords         stopwords >= min_stopwords (2)
//	stopword_density  stopword_density >= min_stopword_density (off unless set)
//
// The stop-word metrics depend on the document's language: the spec's
// `language` when set, else d.Meta["lang"] (from the langid stage), else
// "en". In English `stopwords` counts the paper's eight words (the, be,
// to, of, and, that, have, with); in another supported language it counts
// occurrences of that language's stopwords-iso list. stopword_density is
// the share of words that are entries of the language's list. For a
// language without a list both are null and their rules do not apply.
type qualityStage struct {
	rules []Rule
	lang  string // forced language, "" = from the document
}

// Metrics measured by the quality stage, in Decision.Metrics order.
var qualityMetrics = []string{"words", "mean_word_len", "symbol_ratio", "hash_ratio", "ellipsis_ratio",
	"bullet_lines", "ellipsis_lines", "alpha_words", "stopwords", "stopword_density"}

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
		{"too_few_words", "min_words", "words", AtLeast, filters.GopherMinWords, 0, big, false},
		{"too_many_words", "max_words", "words", AtMost, filters.GopherMaxWords, 0, big, false},
		{"short_words", "min_mean_word_len", "mean_word_len", AtLeast, filters.GopherMinMeanWordLen, 0, big, false},
		{"long_words", "max_mean_word_len", "mean_word_len", AtMost, filters.GopherMaxMeanWordLen, 0, big, false},
		{"symbol_ratio", "max_symbol_ratio", "symbol_ratio", AtMost, filters.GopherMaxSymbolRatio, 0, big, false},
		{"bullet_lines", "max_bullet_lines", "bullet_lines", AtMost, filters.GopherMaxBulletLines, 0, 1, false},
		{"ellipsis_lines", "max_ellipsis_lines", "ellipsis_lines", AtMost, filters.GopherMaxEllipsisLines, 0, 1, false},
		{"alpha_words", "min_alpha_words", "alpha_words", AtLeast, filters.GopherMinAlphaWords, 0, 1, false},
		{"stopwords", "min_stopwords", "stopwords", AtLeast, filters.GopherMinStopwords, 0, big, false},
		{"stopword_density", "min_stopword_density", "stopword_density", AtLeast, 0, 0, 1, true},
	})}
	s.lang = p.String("language", "", filters.StopwordLanguages()...)
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
	m := []float64{float64(q.Words), q.MeanWordLen, q.SymbolRatio, q.HashRatio, q.EllipsisRatio,
		q.BulletLines, q.EllipsisLines, q.AlphaWords, stop, density}
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
