package stages

import (
	"winnow/filters"
)

// linesStage applies the line-level cleaning of Raffel et al. 2020
// (section 2.2; see package filters): it removes lines without terminal
// punctuation (or ending in an ellipsis), lines of fewer than
// fewest_words_per_line (3) words, lines with a word longer than
// longest_word (1000) characters, lines mentioning javascript and
// policy-notice lines, and deletes citation markers. Removing lines is an
// edit whose changes count each reason (metrics named like the quality
// stage's: what is counted; keys name the limit or say what is removed):
//
//	overlong_word_lines   longest_word
//	unpunctuated_lines    remove_unpunctuated_lines
//	short_lines           fewest_words_per_line
//	javascript_lines      remove_javascript_lines
//	policy_notice_lines   remove_policy_notice_lines
//	citation_marks        remove_citation_marks
//
// A page is dropped by the first failing page rule:
//
//	has_placeholder_text  the text contains "lorem ipsum" (reject_placeholder_pages)
//	has_braces            the text contains "{" (reject_pages_with_braces)
//	sentences_too_few     fewer than fewest_sentences (5) sentences are left
//
// The page rules are a rule table over stored metrics (has_placeholder_text
// and has_braces are 0 or 1, sentence_count is counted on the cleaned
// text), so what-if recomputes drops for other fewest_sentences values
// exactly; the line rules are edits and are not recomputed.
type linesStage struct {
	opt   filters.LineOptions
	rules []Rule
}

// Metrics measured by the lines stage, in Decision.Metrics order.
var linesMetrics = []string{"input_lines", "kept_lines", "overlong_word_lines", "unpunctuated_lines", "short_lines",
	"javascript_lines", "policy_notice_lines", "citation_marks", "has_placeholder_text", "has_braces", "sentence_count"}

func init() {
	Register(Kind{
		Name: "lines",
		Doc:  "line cleaning of Raffel et al. 2020 (terminal punctuation, short lines, javascript, policy notices, citations; lorem ipsum, curly braces, too few sentences drop the page)",
		New:  newLines,
	})
}

func newLines(p *Params, env Env) (Stage, error) {
	s := &linesStage{opt: filters.LineOptions{
		FewestWords:         int(p.Int("fewest_words_per_line", filters.C4FewestWordsPerLine, 0, 1<<20)),
		LongestWord:         int(p.Int("longest_word", filters.C4LongestWord, 0, 1<<30)),
		RemoveUnpunctuated:  p.Bool("remove_unpunctuated_lines", true),
		RemoveJavascript:    p.Bool("remove_javascript_lines", true),
		RemovePolicyNotices: p.Bool("remove_policy_notice_lines", true),
		RemoveCitations:     p.Bool("remove_citation_marks", true),
	}}
	lorem := p.Bool("reject_placeholder_pages", true)
	curly := p.Bool("reject_pages_with_braces", true)
	minSent := p.Int("fewest_sentences", filters.C4FewestSentences, 0, 1<<30)
	s.rules = []Rule{
		{Name: "has_placeholder_text", Key: "reject_placeholder_pages", Metric: "has_placeholder_text", Cmp: AtMost, Limit: 0, Enabled: lorem},
		{Name: "has_braces", Key: "reject_pages_with_braces", Metric: "has_braces", Cmp: AtMost, Limit: 0, Enabled: curly},
		{Name: "sentences_too_few", Key: "fewest_sentences", Metric: "sentence_count", Cmp: AtLeast, Limit: float64(minSent), Enabled: minSent > 0},
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
	m := []float64{float64(r.Lines), float64(r.Kept), float64(r.OverlongWord), float64(r.Unpunctuated), float64(r.Short),
		float64(r.Javascript), float64(r.Policy), float64(r.Citations), b2f(r.Placeholder), b2f(r.Braces),
		float64(r.Sentences)}
	dec := ApplyRules(s.rules, linesMetrics, m)
	if dec.Action == Drop || !r.Changed {
		return dec
	}
	changes := map[string]int{}
	for i, n := range []int{r.OverlongWord, r.Unpunctuated, r.Short, r.Javascript, r.Policy, r.Citations} {
		if n > 0 {
			changes[linesMetrics[2+i]] = n
		}
	}
	dec = EditDoc("line_cleaning", r.Text, changes)
	dec.Metrics = m
	return dec
}

// StructureSensitive is a stage some of whose enabled rules are known to
// remove structural text (code, option lists, synopses, the hard-wrapped
// lines of formatted manuals) when run on technical sources; `winnow
// check` warns when such a stage applies to a source that looks technical.
type StructureSensitive interface {
	// StructuralKeys names the enabled spec keys of those rules.
	StructuralKeys() []string
}

// StructuralKeys: a curly brace drops the page; lines without terminal
// punctuation and lines of few words (a closing brace, an option name)
// are cut.
func (s *linesStage) StructuralKeys() []string {
	var keys []string
	for _, r := range s.rules {
		if r.Enabled && r.Key == "reject_pages_with_braces" {
			keys = append(keys, r.Key)
		}
	}
	if s.opt.RemoveUnpunctuated {
		keys = append(keys, "remove_unpunctuated_lines")
	}
	if s.opt.FewestWords > 1 {
		keys = append(keys, "fewest_words_per_line")
	}
	return keys
}
