package stages

import (
	"math"
	"strings"
	"unicode/utf8"
)

// lengthStage drops documents outside character and line-count bounds. A
// bound of 0 is off, except min_chars, which defaults to 1 so that empty
// documents never reach the output.
type lengthStage struct {
	rules []Rule
}

// Metrics measured by the length stage.
var lengthMetrics = []string{"chars", "lines"}

func init() {
	Register(Kind{
		Name: "length",
		Doc:  "drop documents outside min/max characters and lines",
		New:  newLength,
	})
}

func newLength(p *Params, env Env) (Stage, error) {
	rule := func(name, metric string, cmp Cmp, def int64) Rule {
		v := p.Int(name, def, 0, math.MaxInt64)
		return Rule{Name: name, Key: name, Metric: metric, Cmp: cmp, Limit: float64(v), Enabled: v > 0}
	}
	s := &lengthStage{rules: []Rule{
		rule("min_chars", "chars", AtLeast, 1),
		rule("max_chars", "chars", AtMost, 0),
		rule("min_lines", "lines", AtLeast, 0),
		rule("max_lines", "lines", AtMost, 0),
	}}
	return s, p.Done()
}

func (s *lengthStage) Name() string          { return "length" }
func (s *lengthStage) Kind() string          { return "length" }
func (s *lengthStage) MetricNames() []string { return lengthMetrics }
func (s *lengthStage) Rules() []Rule         { return s.rules }

// Process measures characters (Unicode code points) and lines (non-blank
// lines) and applies the bounds.
func (s *lengthStage) Process(d *Doc) Decision {
	chars := utf8.RuneCountInString(d.Text)
	lines := 0
	for rest := d.Text; len(rest) > 0; {
		line := rest
		if i := strings.IndexByte(rest, '\n'); i >= 0 {
			line, rest = rest[:i], rest[i+1:]
		} else {
			rest = ""
		}
		if strings.TrimSpace(line) != "" {
			lines++
		}
	}
	return ApplyRules(s.rules, lengthMetrics, []float64{float64(chars), float64(lines)})
}
