package stages

import (
	"winnow/filters"
)

// linesStage applies the line-level cleaning of Raffel et al. 2020
// (section 2.2; values from memory, see package filters): it removes
// lines without terminal punctuation (or ending in an ellipsis), lines of
// fewer than min_line_words (5) words, lines with a word longer than
// max_word_len (1000) characters, lines mentioning javascript and
// policy-notice lines, and deletes citation markers. Removing lines is an
// edit whose changes count each reason:
//
//	lines_long_word, lines_no_punct, lines_short, lines_javascript,
//	lines_policy, citations
//
// A page is dropped by the first failing page rule:
//
//	lorem_ipsum        the text contains "lorem ipsum" (drop_lorem_ipsum)
//	curly_brace        the text contains "{" (drop_curly_brace)
//	too_few_sentences  fewer than min_sentences (3) sentences are left
//
// The page rules are a rule table over stored metrics (lorem_ipsum and
// curly_brace are 0 or 1, sentences is counted on the cleaned text), so
// what-if recomputes drops for other min_sentences values exactly; the
// line rules are edits and are not recomputed.
type linesStage struct {
	opt   filters.LineOptions
	rules []Rule
}

// Metrics measured by the lines stage, in Decision.Metrics order.
var linesMetrics = []string{"lines", "lines_kept", "lines_long_word", "lines_no_punct", "lines_short",
	"lines_javascript", "lines_policy", "citations", "lorem_ipsum", "curly_brace", "sentences"}

func init() {
	Register(Kind{
		Name: "lines",
		Doc:  "line cleaning of Raffel et al. 2020 (terminal punctuation, short lines, javascript, policy notices, citations; lorem ipsum, curly braces, too few sentences drop the page)",
		New:  newLines,
	})
}

func newLines(p *Params, env Env) (Stage, error) {
	s := &linesStage{opt: filters.LineOptions{
		MinWords:        int(p.Int("min_line_words", filters.C4MinWordsPerLine, 0, 1<<20)),
		MaxWordLen:      int(p.Int("max_word_len", filters.C4MaxWordLen, 0, 1<<30)),
		RequireTerminal: p.Bool("require_terminal_punct", true),
		DropJavascript:  p.Bool("drop_javascript", true),
		DropPolicy:      p.Bool("drop_policy", true),
		RemoveCitations: p.Bool("strip_citations", true),
	}}
	lorem := p.Bool("drop_lorem_ipsum", true)
	curly := p.Bool("drop_curly_brace", true)
	minSent := p.Int("min_sentences", filters.C4MinSentences, 0, 1<<30)
	s.rules = []Rule{
		{Name: "lorem_ipsum", Key: "drop_lorem_ipsum", Metric: "lorem_ipsum", Cmp: AtMost, Limit: 0, Enabled: lorem},
		{Name: "curly_brace", Key: "drop_curly_brace", Metric: "curly_brace", Cmp: AtMost, Limit: 0, Enabled: curly},
		{Name: "too_few_sentences", Key: "min_sentences", Metric: "sentences", Cmp: AtLeast, Limit: float64(minSent), Enabled: minSent > 0},
	}
	return s, p.Done()
}

func (s *linesStage) Name() string          { return "lines" }
func (s *linesStage) Kind() string          { return "lines" }
func (s *linesStage) MetricNames() []string { return linesMetrics }
func (s *linesStage) Rules() []Rule         { return s.rules }

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// Process cleans the lines, then applies the page rules; a kept page whose
// lines changed is an edit.
func (s *linesStage) Process(d *Doc) Decision {
	r := filters.CleanLines(d.Text, s.opt)
	m := []float64{float64(r.Lines), float64(r.Kept), float64(r.LongWord), float64(r.NoPunct), float64(r.Short),
		float64(r.Javascript), float64(r.Policy), float64(r.Citations), b2f(r.LoremIpsum), b2f(r.CurlyBrace),
		float64(r.Sentences)}
	dec := ApplyRules(s.rules, linesMetrics, m)
	if dec.Action == Drop || !r.Changed {
		return dec
	}
	changes := map[string]int{}
	for i, n := range []int{r.LongWord, r.NoPunct, r.Short, r.Javascript, r.Policy, r.Citations} {
		if n > 0 {
			changes[linesMetrics[2+i]] = n
		}
	}
	dec = EditDoc("line_cleaning", r.Text, changes)
	dec.Metrics = m
	return dec
}
