package shard

import "unicode/utf8"

// Cutting a document into pieces. Pieces always concatenate back to the
// original text. A cut is made after a whitespace run (before one between
// words):
// first at paragraph breaks (a whitespace run holding two or more line
// breaks), else at line breaks, else between words; text with no
// whitespace at all is cut at character boundaries. Pieces are counted
// again after the cut, since a cut can change how the tokenizer splits
// the text next to it.

// Cut levels, coarsest first; their names are the ledger rule of a split.
const (
	levelParagraph = iota
	levelLine
	levelWord
	levelChar
)

var levelRule = [...]string{"split_paragraphs", "split_lines", "split_words", "split_chars"}

// cutPoints returns the offsets, inside (0, len(text)), where text may be
// cut at level (levelChar is not handled here).
func cutPoints(text string, level int) []int {
	var pts []int
	for i := 0; i < len(text); {
		c := text[i]
		if c != ' ' && c != '\t' && c != '\n' && c != '\r' && c != '\f' && c != '\v' {
			i++
			continue
		}
		j, breaks := i, 0
		for j < len(text) {
			c := text[j]
			if c == '\n' {
				breaks++
			} else if c != ' ' && c != '\t' && c != '\r' && c != '\f' && c != '\v' {
				break
			}
			j++
		}
		ok := false
		switch level {
		case levelParagraph:
			ok = breaks >= 2
		case levelLine:
			ok = breaks >= 1
		default:
			ok = true
		}
		if ok && i > 0 && j < len(text) {
			if level == levelWord {
				// Between words the cut goes before the spaces, where the
				// tokenizer splits too (" word" is one piece), so piece
				// counts add up to the document's.
				pts = append(pts, i)
			} else {
				pts = append(pts, j)
			}
		}
		i = j
	}
	return pts
}

// charCuts returns rune-boundary offsets that cut text into n nearly equal
// byte ranges.
func charCuts(text string, n int) []int {
	var pts []int
	for k := 1; k < n; k++ {
		p := len(text) * k / n
		for p < len(text) && !utf8.RuneStart(text[p]) {
			p++
		}
		if p > 0 && p < len(text) && (len(pts) == 0 || pts[len(pts)-1] < p) {
			pts = append(pts, p)
		}
	}
	return pts
}

// packPieces cuts text into pieces of at most limit tokens (as counted
// piece by piece; a recount may differ by a token at the cut) at the
// coarsest level that allows it. It returns the pieces and the finest
// level used.
func packPieces(tok *Tokenizer, text string, limit int) ([]string, int) {
	return packLevel(tok, text, limit, levelParagraph)
}

func packLevel(tok *Tokenizer, text string, limit, level int) ([]string, int) {
	if tok.Count(text) <= limit {
		return []string{text}, level
	}
	var pts []int
	for ; level < levelChar; level++ {
		if pts = cutPoints(text, level); len(pts) > 0 {
			break
		}
	}
	if level == levelChar {
		n := tok.Count(text)/limit + 1
		pts = charCuts(text, n)
		if len(pts) == 0 {
			return []string{text}, levelChar
		}
	}
	var out []string
	finest := level
	start, cur, curTok := 0, 0, 0
	flush := func(end int) {
		if end > start {
			out = append(out, text[start:end])
		}
		start, curTok = end, 0
	}
	bounds := append(pts, len(text))
	for _, end := range bounds {
		seg := text[cur:end]
		n := tok.Count(seg)
		if n > limit && level < levelChar {
			flush(cur)
			sub, l := packLevel(tok, seg, limit, level+1)
			finest = max(finest, l)
			out = append(out, sub...)
			start, cur, curTok = end, end, 0
			continue
		}
		if curTok > 0 && curTok+n > limit {
			flush(cur)
		}
		curTok += n
		cur = end
	}
	flush(len(text))
	return out, finest
}

// splitNear cuts text into two pieces so that the first holds about want
// tokens, at the coarsest level whose best cut is within tol tokens of
// want (the finest level's best cut otherwise). It returns the cut offset
// and the level, or -1 when text cannot be cut.
func splitNear(tok *Tokenizer, text string, want, tol int) (int, int) {
	bestCut, bestLevel := -1, levelChar
	for level := levelParagraph; level <= levelChar; level++ {
		var pts []int
		if level == levelChar {
			pts = charCuts(text, 64)
		} else {
			pts = cutPoints(text, level)
		}
		if len(pts) == 0 {
			continue
		}
		cut, dev := -1, 0
		prev, cum := 0, 0
		for _, p := range pts {
			cum += tok.Count(text[prev:p])
			prev = p
			d := cum - want
			if d < 0 {
				d = -d
			}
			if cut < 0 || d < dev {
				cut, dev = p, d
			}
			if cum > want+tol {
				break
			}
		}
		if cut >= 0 {
			bestCut, bestLevel = cut, level
			if dev <= tol {
				break
			}
		}
	}
	return bestCut, bestLevel
}
