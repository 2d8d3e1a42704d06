package record

import (
	"encoding/json"
	"fmt"

	"winnow/shard"
	"winnow/stages"
)

// MixReport returns the manifest's mix section, whether the manifest was
// just assembled (a *shard.MixReport) or read back from JSON; nil when
// the run had no mix.
func (m *Manifest) MixReport() *shard.MixReport {
	switch v := m.Mix.(type) {
	case nil:
		return nil
	case *shard.MixReport:
		return v
	default:
		data, err := json.Marshal(v)
		if err != nil {
			return nil
		}
		var r shard.MixReport
		if json.Unmarshal(data, &r) != nil {
			return nil
		}
		return &r
	}
}

// LeftOut returns one line per source whose surviving tokens the output
// left out, with the reason (the mix cap, a source absent from the mix or
// with share 0); nil when nothing was left out.
func (m *Manifest) LeftOut() []string {
	return m.MixReport().LeftOutLines()
}

// TokensCounted reports whether the run counted tokens (a tokenize stage
// ran, as output.tokenizer implies): without one every token figure is
// "not counted", not 0.
func (m *Manifest) TokensCounted() bool {
	for _, c := range m.Stages {
		if c.Kind == "tokenize" {
			return true
		}
	}
	return false
}

// PredictLeftOut says, before a run, what its output will leave out for
// certain: the sources of the inputs absent from output.mix or with share
// 0 (all their tokens), and mix sources no input supplies (the run will
// fail). How much the mix cap leaves out of the other sources depends on
// their token counts after filtering, known only after the run. p is the
// spec's output mapping; sources are the input sources in spec order.
func PredictLeftOut(p *stages.Params, env stages.Env, sources []string) ([]string, error) {
	if p == nil {
		return nil, nil
	}
	c, err := parseOutput(p, env)
	if err != nil || c.mix == nil {
		return nil, err
	}
	var out []string
	have := map[string]bool{}
	for _, s := range sources {
		if have[s] {
			continue
		}
		have[s] = true
		switch v, ok := c.mix[s]; {
		case !ok:
			out = append(out, fmt.Sprintf("%s: every token will be left out: not in mix (add it with a share to use it)", s))
		case v == 0:
			out = append(out, fmt.Sprintf("%s: every token will be left out: share 0 in mix", s))
		}
	}
	for _, s := range sortedStrings(c.mix) {
		if !have[s] && c.mix[s] > 0 {
			out = append(out, fmt.Sprintf("%s: in mix with share %g but no input has this source: the run will fail", s, c.mix[s]))
		}
	}
	if len(out) < len(have) {
		out = append(out, "the total is capped by the source that runs out first for its share (unless budget_tokens and max_epochs allow repetition); "+
			"what the cap leaves out of the other sources is printed at the end of the run")
	}
	return out, nil
}
