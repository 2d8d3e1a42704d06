package stages

import (
	"winnow/filters"
)

// redactStage replaces e-mail addresses, IP addresses and phone-number-
// like strings with placeholders (best effort, not a guarantee: see
// package filters for what is and is not found). A document with
// replacements is an edit whose changes count each kind: email, ip,
// phone.
type redactStage struct {
	opt filters.RedactOptions
}

// Metrics measured by the redact stage: replacements of each kind.
var redactMetrics = []string{"email", "ip", "phone"}

func init() {
	Register(Kind{
		Name: "redact",
		Doc:  "replace e-mail addresses, IP addresses and phone numbers with placeholders (best effort)",
		New:  newRedact,
	})
}

func newRedact(p *Params, env Env) (Stage, error) {
	s := &redactStage{opt: filters.RedactOptions{
		Email:            p.Bool("email", true),
		IP:               p.Bool("ip", true),
		Phone:            p.Bool("phone", true),
		EmailPlaceholder: p.String("email_placeholder", filters.EmailPlaceholder),
		IPPlaceholder:    p.String("ip_placeholder", filters.IPPlaceholder),
		PhonePlaceholder: p.String("phone_placeholder", filters.PhonePlaceholder),
	}}
	return s, p.Done()
}

func (s *redactStage) Name() string          { return "redact" }
func (s *redactStage) Kind() string          { return "redact" }
func (s *redactStage) MetricNames() []string { return redactMetrics }

// Process redacts the text; an edit when anything was replaced.
func (s *redactStage) Process(d *Doc) Decision {
	r := filters.Redact(d.Text, s.opt)
	m := []float64{float64(r.Email), float64(r.IP), float64(r.Phone)}
	if r.Email+r.IP+r.Phone == 0 {
		return Decision{Metrics: m}
	}
	changes := map[string]int{}
	for i, n := range []int{r.Email, r.IP, r.Phone} {
		if n > 0 {
			changes[redactMetrics[i]] = n
		}
	}
	dec := EditDoc("redacted", r.Text, changes)
	dec.Metrics = m
	return dec
}
