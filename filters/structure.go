package filters

import (
	"strings"
	"unicode/utf8"
)

// Structural text: telling code and reference documentation from prose.
//
// The line rules of Raffel et al. 2020 (section 2.2) were written for
// crawled prose: they drop every page with a curly brace and every line
// that does not end in terminal punctuation. On manual pages, reference
// manuals and source code that removes the text itself: code blocks,
// option lists, synopses, tables, and the hard-wrapped lines of formatted
// manuals. MeasureStructure counts the lines that look like such
// structure, so a caller can warn before those rules run on it. The
// signals are our own rule of thumb, not a published classifier:
//
//   - code punctuation: a curly brace, one of "->", "::", "==", "!=",
//     "&&", "||", "#include", or a statement: a line ending in ';' that
//     holds a parenthesis or '=' (prose ends clauses in ';' too: the
//     UDHR's preamble in Spanish, Italian, Dutch, Portuguese);
//   - a command-line option list: the line starts with '-' followed by a
//     letter or a second '-' ("-a, --all"), or with a shell prompt "$ ";
//   - markup: a line starting with '<' that holds '>' (HTML, XML), a roff
//     request (".TH", ".SH": a dot and two capitals), or a roff font
//     escape ("\fB");
//   - a preformatted block: a line indented by a tab or at least four
//     spaces that does not end in terminal punctuation (formatted manuals
//     and code are indented and hard-wrapped; prose paragraphs end
//     sentences).

// StructureStats is what MeasureStructure counted in one text.
type StructureStats struct {
	// Lines are the non-blank lines.
	Lines int
	// Structural are the lines with one of the signals above.
	Structural int
	// Braces reports whether the text holds a curly brace.
	Braces bool
}

// MeasureStructure counts the structural lines of text.
func MeasureStructure(text string) StructureStats {
	var st StructureStats
	st.Braces = strings.ContainsAny(text, "{}")
	for len(text) > 0 {
		line := text
		if i := strings.IndexByte(text, '\n'); i >= 0 {
			line, text = text[:i], text[i+1:]
		} else {
			text = ""
		}
		line = strings.TrimSuffix(line, "\r")
		trimmed := strings.TrimSpace(line)
		if trimmed == "" {
			continue
		}
		st.Lines++
		if StructuralLine(line) {
			st.Structural++
		}
	}
	return st
}

// codeMarks are the code punctuation signals found anywhere in a line.
var codeMarks = []string{"{", "}", "->", "::", "==", "!=", "&&", "||", "#include"}

// StructuralLine reports whether one line (without its newline) looks like
// code, an option list, markup or a preformatted block.
func StructuralLine(line string) bool {
	trimmed := strings.TrimSpace(line)
	if trimmed == "" {
		return false
	}
	if containsAny(trimmed, codeMarks) || strings.HasSuffix(trimmed, ";") && strings.ContainsAny(trimmed, "()=") {
		return true
	}
	if len(trimmed) >= 2 && trimmed[0] == '-' && (trimmed[1] == '-' || isASCIILetter(trimmed[1])) {
		return true
	}
	if strings.HasPrefix(trimmed, "$ ") {
		return true
	}
	if trimmed[0] == '<' && strings.IndexByte(trimmed, '>') > 0 {
		return true
	}
	if len(trimmed) >= 3 && trimmed[0] == '.' && isUpper(trimmed[1]) && isUpper(trimmed[2]) {
		return true
	}
	if strings.Contains(trimmed, `\f`) {
		return true
	}
	if strings.HasPrefix(line, "\t") || strings.HasPrefix(line, "    ") {
		r, _ := utf8.DecodeLastRuneInString(trimmed)
		return !isTerminal(r)
	}
	return false
}

func isASCIILetter(c byte) bool { return c|0x20 >= 'a' && c|0x20 <= 'z' }

func isUpper(c byte) bool { return c >= 'A' && c <= 'Z' }
