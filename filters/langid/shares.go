package langid

import (
	"sort"
	"strings"
)

// Share is one language's share of a document's text.
type Share struct {
	Lang  string  // ISO 639-1 code
	Share float64 // in (0, 1]
}

// MinShareLetters is the fewest letters a paragraph is detected on alone
// by Shares; a shorter line joins the lines after it (common practice:
// the langid stage's min_letters default, about four words).
const MinShareLetters = 20

// Shares splits text into paragraphs (lines; a line of fewer than
// MinShareLetters letters joins the following ones), detects the language
// of each with Detect, and returns each language's share of the letters of
// the paragraphs a language was named for (Han, kana and Hangul letters
// weigh three Latin ones, as in Detect), largest first, ties by code. The
// shares sum to 1; the result is empty when no paragraph could be named.
// Unlike Detect it reads the whole text, so it costs time in proportion to
// the document's length.
func (d *Detector) Shares(text string) []Share {
	acc := map[string]int{}
	total := 0
	add := func(p string) {
		r, w := d.detect(p)
		if r.Lang != Undetermined && w > 0 {
			acc[r.Lang] += w
			total += w
		}
	}
	start := 0
	for start < len(text) {
		end, letters := start, 0
		for end < len(text) {
			from := end
			if nl := strings.IndexByte(text[end:], '\n'); nl < 0 {
				end = len(text)
			} else {
				end += nl + 1
			}
			if letters += scanText(text[from:end]).letters; letters >= MinShareLetters {
				break
			}
		}
		add(text[start:end])
		start = end
	}
	if total == 0 {
		return nil
	}
	out := make([]Share, 0, len(acc))
	for lang, w := range acc {
		out = append(out, Share{Lang: lang, Share: float64(w) / float64(total)})
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Share != out[j].Share {
			return out[i].Share > out[j].Share
		}
		return out[i].Lang < out[j].Lang
	})
	return out
}
