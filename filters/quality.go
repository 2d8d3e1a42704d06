package filters

import (
	"math"
	"strings"
	"unicode/utf8"
)

var nan = math.NaN()

// Published thresholds of the MassiveWeb quality filter, Rae et al. 2021,
// "Scaling Language Models: Methods, Analysis & Insights from Training
// Gopher", appendix A (all from memory). The paper states them as removal
// conditions ("remove documents with more than..."), so a value equal to a
// limit keeps the document.
const (
	GopherFewestWords             = 50     // "between 50 and 100,000 words"
	GopherMostWords               = 100000 // idem
	GopherShortestAverageWord     = 3.0    // "mean word length ... outside of the range of 3 to 10 characters"
	GopherLongestAverageWord      = 10.0   // idem
	GopherMostSymbolsPerWord      = 0.1    // "symbol-to-word ratio greater than 0.1 for either the hash symbol or the ellipsis"
	GopherMostBulletedLines       = 0.9    // "more than 90% of lines starting with a bullet point"
	GopherMostEllipsisEndingLines = 0.3    // "more than 30% [of lines] ending with an ellipsis"
	GopherFewestWordsWithLetters  = 0.8    // "80% of words ... contain at least one alphabetic character"
	GopherFewestStopWords         = 2      // "at least two of the following English words: the, be, to, of, and, that, have, with"
)

// Quality holds the document-level quality metrics of Rae et al. 2021 for
// one text.
type Quality struct {
	// Words is the number of words (as Split cuts them).
	Words int
	// AverageWordLength is the mean length in characters of the words of
	// spaced scripts. The paper's rule is about alphabetic words: a text
	// whose words are mostly one-character words of scripts without spaces
	// (Chinese, Japanese, Thai; see Split) has no comparable word length,
	// and the value is NaN, as it is without words.
	AverageWordLength float64
	// HashesPerWord is the number of '#' characters per word; EllipsesPerWord the
	// number of ellipses ("..." or U+2026) per word; SymbolsPerWord the larger
	// of the two, the value the paper's rule holds against 0.1 (all NaN
	// without words).
	HashesPerWord, EllipsesPerWord, SymbolsPerWord float64
	// BulletedLinesShare is the fraction of non-blank lines that start with a
	// bullet; EllipsisEndingLinesShare the fraction that end with an ellipsis (0
	// without lines).
	BulletedLinesShare, EllipsisEndingLinesShare float64
	// WordsWithLettersShare is the fraction of words containing a letter (NaN without
	// words).
	WordsWithLettersShare float64
	// Stop is the stop-word scan (the English eight and the language list).
	Stop StopCount
}

// MeasureQuality splits text into s and measures its quality metrics with
// the stop-word list sw (nil: only the English eight are counted). It
// allocates nothing once s has grown to the text's size.
func MeasureQuality(s *Scratch, text string, sw *Stopwords) Quality {
	s.Split(text)
	return QualityOfSplit(s, text, sw)
}

// QualityOfSplit measures text, which s.Split(text) has already split.
func QualityOfSplit(s *Scratch, text string, sw *Stopwords) Quality {
	q := Quality{Words: len(s.Words)}
	chars, alpha, unspaced := 0, 0, 0
	for _, w := range s.Words {
		if w.Unspaced {
			unspaced++
		} else {
			chars += int(w.Runes)
		}
		if w.Alpha {
			alpha++
		}
	}
	if q.Words > 0 {
		n := float64(q.Words)
		q.AverageWordLength = nan
		if spaced := q.Words - unspaced; spaced > unspaced {
			q.AverageWordLength = float64(chars) / float64(spaced)
		}
		q.HashesPerWord = float64(strings.Count(text, "#")) / n
		q.EllipsesPerWord = float64(strings.Count(text, "...")+strings.Count(text, "\u2026")) / n
		q.SymbolsPerWord = max(q.HashesPerWord, q.EllipsesPerWord)
		q.WordsWithLettersShare = float64(alpha) / n
	} else {
		q.AverageWordLength, q.HashesPerWord, q.EllipsesPerWord, q.SymbolsPerWord, q.WordsWithLettersShare = nan, nan, nan, nan, nan
	}
	if len(s.Lines) > 0 {
		bullets, ellipses := 0, 0
		for _, l := range s.Lines {
			line := text[l.Start:l.End]
			if StartsWithBullet(line) {
				bullets++
			}
			if EndsWithEllipsis(line) {
				ellipses++
			}
		}
		q.BulletedLinesShare = float64(bullets) / float64(len(s.Lines))
		q.EllipsisEndingLinesShare = float64(ellipses) / float64(len(s.Lines))
	}
	q.Stop = CountStopwords(s, text, sw)
	return q
}

// bulletRunes start a bullet line wherever they appear first on a line.
// Dashes are left out on purpose: many languages open dialogue lines with
// an em dash.
var bulletRunes = map[rune]bool{
	'•': true, '‣': true, '◦': true, '⁃': true, '●': true, '○': true, '▪': true, '▫': true,
	'■': true, '□': true, '◆': true, '◇': true, '►': true, '▶': true, '➢': true, '➤': true,
	'✓': true, '✔': true, '·': true, '∙': true,
}

// StartsWithBullet reports whether a trimmed line starts with a bullet
// point: one of the Unicode bullet characters, or '-', '*' or '+' followed
// by a space (so "-5 degrees" and "*emphasis*" are not bullets).
func StartsWithBullet(line string) bool {
	if line == "" {
		return false
	}
	c := line[0]
	if c < utf8.RuneSelf {
		if c == '-' || c == '*' || c == '+' {
			return len(line) == 1 || line[1] == ' ' || line[1] == '\t'
		}
		return false
	}
	r, _ := utf8.DecodeRuneInString(line)
	return bulletRunes[r]
}

// EndsWithEllipsis reports whether a trimmed line ends with "..." or the
// ellipsis character U+2026.
func EndsWithEllipsis(line string) bool {
	return strings.HasSuffix(line, "...") || strings.HasSuffix(line, "\u2026")
}
