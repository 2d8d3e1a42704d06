package audit

import (
	"regexp"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"winnow/dedup"
	"winnow/filters"
)

// Span is a marked byte range [Start, End) of a sample's text.
type Span struct {
	Start int    `json:"start"`
	End   int    `json:"end"`
	Label string `json:"label,omitempty"`
}

// What a removal rule is about is read from its name and the metric its
// rule table names (e.g. rule "repeated_lines_share" on metric
// "repeated_lines_share"), so marking works for any stage that follows the
// project's naming of the published rules.
var (
	reTopPhrase      = regexp.MustCompile(`top_(\d+)_?word_phrase`)
	reRepeatedPhrase = regexp.MustCompile(`repeated_(\d+)_?word_phrase`)
	reRepeatedLine   = regexp.MustCompile(`repeated_lines?`)
	reRepeatedPara   = regexp.MustCompile(`repeated_paragraph`)
)

// markRule returns the spans of text that rule (described by its name
// and the names of the metrics it tests) points at, and a sentence
// saying what is marked; nil spans when the rule measures the document
// as a whole.
func markRule(desc, text string) ([]Span, string) {
	d := strings.ToLower(desc)
	switch {
	case reTopPhrase.MatchString(d):
		n, _ := strconv.Atoi(reTopPhrase.FindStringSubmatch(d)[1])
		sp, gram := topNgram(text, n)
		if len(sp) == 0 {
			return nil, "no repeated " + strconv.Itoa(n) + "-word phrase found in the text shown"
		}
		return sp, "occurrences of the most frequent " + strconv.Itoa(n) + "-word phrase " + strconv.Quote(gram)
	case reRepeatedPhrase.MatchString(d):
		n, _ := strconv.Atoi(reRepeatedPhrase.FindStringSubmatch(d)[1])
		return dupNgrams(text, n), "words covered by a repeated occurrence of a " + strconv.Itoa(n) + "-word phrase"
	case reRepeatedPara.MatchString(d):
		return dupBlocks(text, true), "paragraphs that repeat an earlier paragraph"
	case reRepeatedLine.MatchString(d):
		return dupBlocks(text, false), "lines that repeat an earlier line"
	case strings.Contains(d, "bullet"):
		return linesWhere(text, filters.StartsWithBullet), "lines starting with a bullet"
	case strings.Contains(d, "ellipsis") && strings.Contains(d, "line"):
		return linesWhere(text, filters.EndsWithEllipsis), "lines ending with an ellipsis"
	case strings.Contains(d, "symbol") || strings.Contains(d, "hash") || strings.Contains(d, "ellipsis"):
		return findAll(text, []string{"#", "...", "\u2026"}), "hash symbols and ellipses"
	case strings.Contains(d, "with_letters"):
		return wordsWhere(text, func(w string) bool { return !strings.ContainsFunc(w, unicode.IsLetter) }), "words without a letter"
	case strings.Contains(d, "stop"):
		stop := map[string]bool{"the": true, "be": true, "to": true, "of": true, "and": true, "that": true, "have": true, "with": true}
		return wordsWhere(text, func(w string) bool {
			return stop[strings.ToLower(strings.TrimFunc(w, func(r rune) bool { return !unicode.IsLetter(r) }))]
		}), "the stop words found (the, be, to, of, and, that, have, with)"
	case strings.Contains(d, "placeholder"):
		return findFold(text, "lorem ipsum"), `"lorem ipsum"`
	case strings.Contains(d, "brace"):
		return findAll(text, []string{"{"}), `curly brackets`
	case strings.Contains(d, "javascript"):
		return findFold(text, "javascript"), `"javascript"`
	}
	return nil, ""
}

// lineSpans returns the byte spans of text's lines (without "\n").
func lineSpans(text string) [][2]int {
	var out [][2]int
	start := 0
	for i := 0; i <= len(text); i++ {
		if i == len(text) || text[i] == '\n' {
			out = append(out, [2]int{start, i})
			start = i + 1
		}
	}
	return out
}

// dupBlocks marks lines (or blank-line separated paragraphs) whose trimmed
// text equals an earlier one's, as Rae et al. 2021 count duplicates.
func dupBlocks(text string, paragraphs bool) []Span {
	var blocks [][2]int
	if paragraphs {
		ls := lineSpans(text)
		cur := [2]int{-1, -1}
		for _, l := range ls {
			if strings.TrimSpace(text[l[0]:l[1]]) == "" {
				if cur[0] >= 0 {
					blocks = append(blocks, cur)
					cur = [2]int{-1, -1}
				}
				continue
			}
			if cur[0] < 0 {
				cur[0] = l[0]
			}
			cur[1] = l[1]
		}
		if cur[0] >= 0 {
			blocks = append(blocks, cur)
		}
	} else {
		blocks = lineSpans(text)
	}
	seen := map[string]bool{}
	var out []Span
	for _, b := range blocks {
		t := strings.TrimSpace(text[b[0]:b[1]])
		if t == "" {
			continue
		}
		if seen[t] {
			out = append(out, Span{Start: b[0], End: b[1]})
		}
		seen[t] = true
	}
	return out
}

func linesWhere(text string, f func(string) bool) []Span {
	var out []Span
	for _, l := range lineSpans(text) {
		if t := strings.TrimSpace(text[l[0]:l[1]]); t != "" && f(t) {
			out = append(out, Span{Start: l[0], End: l[1]})
		}
	}
	return out
}

// words returns the byte spans of whitespace-separated words.
func words(text string) [][2]int {
	var out [][2]int
	start := -1
	for i, r := range text {
		if unicode.IsSpace(r) {
			if start >= 0 {
				out = append(out, [2]int{start, i})
				start = -1
			}
		} else if start < 0 {
			start = i
		}
	}
	if start >= 0 {
		out = append(out, [2]int{start, len(text)})
	}
	return out
}

func wordsWhere(text string, f func(string) bool) []Span {
	var out []Span
	for _, w := range words(text) {
		if f(text[w[0]:w[1]]) {
			out = append(out, Span{Start: w[0], End: w[1]})
		}
	}
	return out
}

func findAll(text string, needles []string) []Span {
	var out []Span
	for i := 0; i < len(text); {
		hit := ""
		for _, n := range needles {
			if strings.HasPrefix(text[i:], n) && len(n) > len(hit) {
				hit = n
			}
		}
		if hit != "" {
			out = append(out, Span{Start: i, End: i + len(hit)})
			i += len(hit)
			continue
		}
		_, size := utf8.DecodeRuneInString(text[i:])
		i += size
	}
	return out
}

func findFold(text, needle string) []Span {
	lower := strings.ToLower(text)
	if len(lower) != len(text) {
		return nil // case folding changed byte lengths: offsets would be wrong
	}
	var out []Span
	for i := 0; ; {
		j := strings.Index(lower[i:], needle)
		if j < 0 {
			return out
		}
		out = append(out, Span{Start: i + j, End: i + j + len(needle)})
		i += j + len(needle)
	}
}

func ngramKey(text string, ws [][2]int, i, n int) string {
	var b strings.Builder
	for k := i; k < i+n; k++ {
		if k > i {
			b.WriteByte(' ')
		}
		b.WriteString(text[ws[k][0]:ws[k][1]])
	}
	return b.String()
}

// topNgram marks the non-overlapping occurrences of the most frequent
// word n-gram (ties: the one that occurs first).
func topNgram(text string, n int) ([]Span, string) {
	ws := words(text)
	if n < 1 || len(ws) < n {
		return nil, ""
	}
	count := map[string]int{}
	first := map[string]int{}
	for i := 0; i+n <= len(ws); i++ {
		k := ngramKey(text, ws, i, n)
		if _, ok := first[k]; !ok {
			first[k] = i
		}
		count[k]++
	}
	best, bc := "", 1
	for _, k := range sortedKeys(count) {
		c := count[k]
		if c > bc || c == bc && best != "" && first[k] < first[best] {
			best, bc = k, c
		}
	}
	if best == "" {
		return nil, ""
	}
	var out []Span
	for i := 0; i+n <= len(ws); i++ {
		if ngramKey(text, ws, i, n) == best {
			out = append(out, Span{Start: ws[i][0], End: ws[i+n-1][1]})
			i += n - 1
		}
	}
	return out, best
}

// dupNgrams marks the words covered by an occurrence of a word n-gram
// that occurred earlier in the text.
func dupNgrams(text string, n int) []Span {
	ws := words(text)
	if n < 1 || len(ws) < n {
		return nil
	}
	seen := map[string]bool{}
	covered := make([]bool, len(ws))
	for i := 0; i+n <= len(ws); i++ {
		k := ngramKey(text, ws, i, n)
		if seen[k] {
			for j := i; j < i+n; j++ {
				covered[j] = true
			}
		}
		seen[k] = true
	}
	return wordRuns(ws, covered)
}

// wordRuns merges runs of flagged words into spans.
func wordRuns(ws [][2]int, flag []bool) []Span {
	var out []Span
	for i := 0; i < len(ws); i++ {
		if !flag[i] {
			continue
		}
		j := i
		for j+1 < len(ws) && flag[j+1] {
			j++
		}
		out = append(out, Span{Start: ws[i][0], End: ws[j][1]})
		i = j
	}
	return out
}

// normWords returns text's whitespace words normalized as contamination
// excerpts are (NFKC, case folded, punctuation removed), with their spans;
// words that normalize to nothing are left out.
func normWords(text string) ([]string, [][2]int) {
	var ns []string
	var sp [][2]int
	for _, w := range words(text) {
		for _, part := range strings.Fields(dedup.NormalizeWords(text[w[0]:w[1]])) {
			ns = append(ns, part)
			sp = append(sp, w)
		}
	}
	return ns, sp
}

// markExcerpt marks where the normalized words of excerpt (the matched
// text in contamination.json) occur in text: every run of at least n
// consecutive excerpt words.
func markExcerpt(text, excerpt string, n int) []Span {
	ex := strings.Fields(dedup.NormalizeWords(strings.TrimSuffix(excerpt, "…")))
	if len(ex) == 0 {
		return nil
	}
	if n > len(ex) {
		n = len(ex)
	}
	grams := map[string]bool{}
	for i := 0; i+n <= len(ex); i++ {
		grams[strings.Join(ex[i:i+n], " ")] = true
	}
	ns, sp := normWords(text)
	flag := make([]bool, len(ns))
	for i := 0; i+n <= len(ns); i++ {
		if grams[strings.Join(ns[i:i+n], " ")] {
			for j := i; j < i+n; j++ {
				flag[j] = true
			}
		}
	}
	return wordRuns(sp, flag)
}

// shingleDiff compares a document with its kept twin on normalized word
// n-grams: it returns the Jaccard similarity of the two n-gram sets and
// marks the words of text covered by no n-gram the twin shares.
func shingleDiff(text, twin string, n int) (float64, []Span) {
	a, asp := normWords(text)
	b, _ := normWords(twin)
	if n < 1 {
		n = 5
	}
	set := func(ws []string) map[string]bool {
		m := map[string]bool{}
		for i := 0; i+n <= len(ws); i++ {
			m[strings.Join(ws[i:i+n], " ")] = true
		}
		return m
	}
	sa, sb := set(a), set(b)
	inter := 0
	for k := range sa {
		if sb[k] {
			inter++
		}
	}
	union := len(sa) + len(sb) - inter
	j := 0.0
	if union > 0 {
		j = float64(inter) / float64(union)
	}
	shared := make([]bool, len(a))
	for i := 0; i+n <= len(a); i++ {
		if sb[strings.Join(a[i:i+n], " ")] {
			for k := i; k < i+n; k++ {
				shared[k] = true
			}
		}
	}
	differ := make([]bool, len(a))
	for i := range a {
		differ[i] = !shared[i]
	}
	return j, wordRuns(asp, differ)
}

// lineDiff marks the lines of before that are not in after (as a
// multiset): what an edit removed or changed.
func lineDiff(before, after string) []Span {
	left := map[string]int{}
	for _, l := range strings.Split(after, "\n") {
		left[strings.TrimSpace(l)]++
	}
	var out []Span
	for _, l := range lineSpans(before) {
		t := strings.TrimSpace(before[l[0]:l[1]])
		if t == "" {
			continue
		}
		if left[t] > 0 {
			left[t]--
			continue
		}
		out = append(out, Span{Start: l[0], End: l[1]})
	}
	return out
}

// mergeSpans sorts spans and joins overlapping ones (labels of the first
// kept).
func mergeSpans(sp []Span) []Span {
	if len(sp) == 0 {
		return nil
	}
	sort.SliceStable(sp, func(i, j int) bool { return sp[i].Start < sp[j].Start })
	out := []Span{sp[0]}
	for _, s := range sp[1:] {
		last := &out[len(out)-1]
		if s.Start <= last.End {
			last.End = max(last.End, s.End)
			continue
		}
		out = append(out, s)
	}
	return out
}

// Render returns text with every span wrapped in open and close.
func Render(text string, spans []Span, open, close string) string {
	var b strings.Builder
	pos := 0
	for _, s := range spans {
		if s.Start < pos || s.End > len(text) || s.Start >= s.End {
			continue
		}
		b.WriteString(text[pos:s.Start])
		b.WriteString(open)
		b.WriteString(text[s.Start:s.End])
		b.WriteString(close)
		pos = s.End
	}
	b.WriteString(text[pos:])
	return b.String()
}
