package stages

import (
	"golang.org/x/text/unicode/norm"

	"winnow/filters"
)

// normalizeStage puts text into one canonical shape before anything is
// measured: Unicode NFC (or NFKC), "\n" line endings, no control or
// zero-width characters, no trailing spaces, runs of spaces and tabs inside
// a line collapsed to one space, at most max_blank_lines blank lines in a
// row, no leading or trailing blank lines. What changed is counted in the
// ledger edit record. The text function is filters.NormalizeText.
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
	text, changes := filters.NormalizeText(d.Text, s.form, s.collapseSpaces, s.maxBlank)
	if len(changes) == 0 {
		return KeepDoc()
	}
	return EditDoc("normalized", text, changes)
}
