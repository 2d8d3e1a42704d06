package record

import (
	"encoding/json"

	"winnow/shard"
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
