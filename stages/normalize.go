package stages

import (
	"strings"
	"unicode"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

// normalizeStage puts text into one canonical shape before anything is
// measured: Unicode NFC (or NFKC), "\n" line endings, no control or
// zero-width characters, no trailing spaces, runs of spaces and tabs inside
// a line collapsed to one space, at most max_blank_lines blank lines in a
// row, no leading or trailing blank lines. What changed is counted in the
// ledger edit record. Text that is already clean costs one scan and no
// allocation.
type normalizeStage struct {
	form           norm.Form
	formName       string
	collapseSpaces bool
	maxBlank       int
}

func init() {
	Register(Kind{
		Name: "normalize",
		Doc:  "Unicode NFC/NFKC, line endings, control characters and whitespace cleanup (an edit)",
		New:  newNormalize,
	})
}

func newNormalize(p *Params, env Env) (Stage, error) {
	s := &normalizeStage{}
	s.formName = p.String("form", "NFC", "NFC", "NFKC")
	s.form = norm.NFC
	if s.formName == "NFKC" {
		s.form = norm.NFKC
	}
	s.collapseSpaces = p.Bool("collapse_spaces", true)
	s.maxBlank = int(p.Int("max_blank_lines", 1, 0, 1000))
	return s, p.Done()
}

func (s *normalizeStage) Name() string          { return "normalize" }
func (s *normalizeStage) Kind() string          { return "normalize" }
func (s *normalizeStage) MetricNames() []string { return nil }

// Process returns an edit when the text changes.
func (s *normalizeStage) Process(d *Doc) Decision {
	text, changes := NormalizeText(d.Text, s.form, s.collapseSpaces, s.maxBlank)
	if len(changes) == 0 {
		return KeepDoc()
	}
	return EditDoc("normalized", text, changes)
}

// NormalizeText cleans text as the normalize stage does and counts the
// changes by kind (nil when nothing changed).
func NormalizeText(text string, form norm.Form, collapseSpaces bool, maxBlank int) (string, map[string]int) {
	var changes map[string]int
	// One final newline is how most text files and many JSONL writers end
	// a document: it is kept, and only extra ones count as a change.
	body, final := strings.CutSuffix(text, "\n")
	crlf := false
	if final {
		body, crlf = strings.CutSuffix(body, "\r")
	}
	if final && body == "" {
		return "", map[string]int{"trailing_newlines": 1}
	}
	if crlf {
		changes = map[string]int{"line_endings": 1}
	}
	if crlf || !isCleanFast(body, collapseSpaces, maxBlank) {
		body = cleanLines(body, collapseSpaces, maxBlank, &changes)
		if final && body == "" {
			final = false
		}
		if final {
			text = body + "\n"
		} else {
			text = body
		}
	}
	if !isASCII(text) && !form.IsNormalString(text) {
		n := form.String(text)
		if n != text {
			if changes == nil {
				changes = map[string]int{}
			}
			changes["unicode_"+strings.ToLower(formName(form))]++
			text = n
		}
	}
	return text, changes
}

func formName(f norm.Form) string {
	if f == norm.NFKC {
		return "NFKC"
	}
	return "NFC"
}

// isCleanFast reports, in one byte scan, whether text needs no line or
// character cleanup.
func isCleanFast(text string, collapse bool, maxBlank int) bool {
	if len(text) == 0 {
		return true
	}
	if text[0] == '\n' || text[len(text)-1] == '\n' || text[len(text)-1] == ' ' {
		return false
	}
	blank := 0
	prev := byte('\n')
	for i := 0; i < len(text); i++ {
		c := text[i]
		switch {
		case c == '\n':
			if prev == ' ' || prev == '\t' {
				return false
			}
			if prev == '\n' {
				blank++
				if blank > maxBlank {
					return false
				}
			} else {
				blank = 0
			}
		case c == '\t':
			if collapse {
				return false
			}
		case c == ' ':
			if collapse && (prev == ' ' || prev == '\n') {
				return false
			}
		case c < 0x20 || c == 0x7f:
			return false
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(text[i:])
			if badRune(r, size) {
				return false
			}
			i += size - 1
			c = 'x'
		}
		prev = c
	}
	return true
}

// badRune reports characters normalize removes: invalid bytes, C0/C1
// controls other than newline and tab, zero-width and byte-order marks.
func badRune(r rune, size int) bool {
	if r == utf8.RuneError && size == 1 {
		return true
	}
	switch r {
	case '\u200b', '\u200c', '\u200d', '\u2060', '\ufeff', '\u00ad':
		return true
	}
	if r == '\u2028' || r == '\u2029' || r == '\u0085' {
		return true
	}
	return r >= 0x80 && r < 0xa0 || unicode.Is(unicode.Co, r)
}

func cleanLines(text string, collapse bool, maxBlank int, changes *map[string]int) string {
	count := func(k string, n int) {
		if *changes == nil {
			*changes = map[string]int{}
		}
		(*changes)[k] += n
	}
	var b strings.Builder
	b.Grow(len(text))
	started := false
	pendingBlank := 0
	line := make([]byte, 0, 256)
	flush := func() {
		// Trim trailing spaces and emit the line with blank-line limits.
		n := len(line)
		for n > 0 && (line[n-1] == ' ' || line[n-1] == '\t') {
			n--
		}
		if n < len(line) {
			count("trailing_spaces", 1)
		}
		line = line[:n]
		if len(line) == 0 {
			if started {
				pendingBlank++
			} else {
				count("blank_lines", 1)
			}
			return
		}
		if started {
			keep := min(pendingBlank, maxBlank)
			if pendingBlank > keep {
				count("blank_lines", pendingBlank-keep)
			}
			b.WriteByte('\n')
			for i := 0; i < keep; i++ {
				b.WriteByte('\n')
			}
		}
		pendingBlank = 0
		started = true
		b.Write(line)
	}
	for i := 0; i < len(text); {
		// A whole clean line is copied at once; only dirty lines are
		// rebuilt byte by byte.
		if len(line) == 0 {
			end := strings.IndexByte(text[i:], '\n')
			if end < 0 {
				end = len(text) - i
			}
			if seg := text[i : i+end]; lineIsClean(seg, collapse) {
				line = append(line, seg...)
				i += end
				if i < len(text) {
					flush()
					line = line[:0]
					i++
				}
				continue
			}
		}
		c := text[i]
		switch {
		case c == '\r':
			count("line_endings", 1)
			if i+1 < len(text) && text[i+1] == '\n' {
				i++
			}
			flush()
			line = line[:0]
			i++
		case c == '\n':
			flush()
			line = line[:0]
			i++
		case c == ' ' || c == '\t':
			if collapse {
				// Leading runs are dropped, inner runs become one space,
				// a tab becomes a space.
				if len(line) == 0 || line[len(line)-1] == ' ' || c == '\t' {
					count("spaces_collapsed", 1)
				}
				if len(line) > 0 && line[len(line)-1] != ' ' {
					line = append(line, ' ')
				}
			} else {
				line = append(line, c)
			}
			i++
		case c < 0x20 || c == 0x7f:
			if c == '\f' || c == '\v' {
				count("line_endings", 1)
				flush()
				line = line[:0]
			} else {
				count("control_chars", 1)
			}
			i++
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(text[i:])
			if r == '\u2028' || r == '\u2029' || r == '\u0085' {
				count("line_endings", 1)
				flush()
				line = line[:0]
			} else if r == utf8.RuneError && size == 1 {
				count("invalid_utf8", 1)
				line = append(line, "\uFFFD"...)
			} else if badRune(r, size) {
				count("control_chars", 1)
			} else {
				line = append(line, text[i:i+size]...)
			}
			i += size
		default:
			line = append(line, c)
			i++
		}
	}
	flush()
	if pendingBlank > 0 {
		count("trailing_newlines", pendingBlank)
	}
	return b.String()
}

// lineIsClean reports whether one line (without its newline) needs no
// character or whitespace cleanup. Printable ASCII is checked 8 bytes at a
// time (SWAR); any other byte takes the exact per-byte path.
func lineIsClean(seg string, collapse bool) bool {
	if len(seg) == 0 {
		return false // blank lines take the counting path
	}
	if seg[0] == ' ' || seg[len(seg)-1] == ' ' || seg[len(seg)-1] == '\t' {
		return false
	}
	prev := byte('x')
	for i := 0; i < len(seg); {
		if i+8 <= len(seg) {
			v := load64(seg[i:])
			if (v-lo8*0x20)&^v&hi8|v&hi8 == 0 { // all bytes in 0x20..0x7f
				sp := v ^ (lo8 * ' ')
				m := (sp - lo8) & ^sp & hi8 // high bit of each space byte (a '!' after a space may also show: harmless, it only sends the line to the slow path)
				if collapse && (m&(m>>8) != 0 || (prev == ' ' && m&0x80 != 0)) {
					return false
				}
				if bytes8Has(v, 0x7f) {
					return false
				}
				prev = seg[i+7]
				i += 8
				continue
			}
		}
		c := seg[i]
		switch {
		case c == ' ':
			if collapse && prev == ' ' {
				return false
			}
		case c == '\t':
			if collapse {
				return false
			}
		case c < 0x20 || c == 0x7f:
			return false
		case c >= utf8.RuneSelf:
			r, size := utf8.DecodeRuneInString(seg[i:])
			if badRune(r, size) || r == '\u2028' || r == '\u2029' || r == '\u0085' {
				return false
			}
			i += size
			prev = 'x'
			continue
		}
		prev = c
		i++
	}
	return true
}

// Bytes 0x01 and 0x80 repeated in each byte of a word, for SWAR byte tests.
const (
	lo8 = 0x0101010101010101
	hi8 = 0x8080808080808080
)

func load64(s string) uint64 {
	return uint64(s[0]) | uint64(s[1])<<8 | uint64(s[2])<<16 | uint64(s[3])<<24 |
		uint64(s[4])<<32 | uint64(s[5])<<40 | uint64(s[6])<<48 | uint64(s[7])<<56
}

// bytes8Has reports whether any byte of v equals c.
func bytes8Has(v uint64, c byte) bool {
	x := v ^ (lo8 * uint64(c))
	return (x-lo8)&^x&hi8 != 0
}

// isASCII reports whether text is pure ASCII, which every normal form
// leaves unchanged (IsNormalString itself allocates).
func isASCII(text string) bool {
	i := 0
	for ; i+8 <= len(text); i += 8 {
		if load64(text[i:])&hi8 != 0 {
			return false
		}
	}
	for ; i < len(text); i++ {
		if text[i] >= utf8.RuneSelf {
			return false
		}
	}
	return true
}
