package record

import (
	"encoding/json"
	"strings"
	"testing"

	"winnow/shard"
	"winnow/stages"
)

// check predicts what a mix leaves out for certain: input sources absent
// from the mix or with share 0, and mix sources no input supplies.
func TestPredictLeftOut(t *testing.T) {
	p := stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base", "mix": map[string]any{"manuals": 0.5, "forum": 0.5, "dealer": 0.0, "mail": 0.2}})
	got, err := PredictLeftOut(p, stages.Env{Checking: true}, []string{"manuals", "forum", "forum", "dealer", "web"})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{
		"web: every token will be left out: not in mix",
		"dealer: every token will be left out: share 0 in mix",
		"mail: in mix with share 0.2 but no input has this source: the run will fail",
		"the total is capped by the source that runs out first",
	}
	joined := strings.Join(got, "\n")
	for _, w := range want {
		if !strings.Contains(joined, w) {
			t.Errorf("missing %q in:\n%s", w, joined)
		}
	}
	if none, err := PredictLeftOut(stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base"}), stages.Env{Checking: true}, []string{"web"}); err != nil || none != nil {
		t.Errorf("no mix: %v %v", none, err)
	}
}

// The manifest's mix section gives the same left-out lines whether it is
// the report just built or read back from manifest.json.
func TestManifestLeftOutRoundTrip(t *testing.T) {
	rep := &shard.MixReport{Mode: "capped", Sources: []shard.MixSource{
		{Source: "forum", Available: 1000, Used: 400, LeftOut: 600, LeftOutWhy: "total capped at 800 tokens: source manuals has only 400 tokens for its share 0.5 (no budget_tokens, no repetition)"},
		{Source: "manuals", Available: 400, Used: 400},
		{Source: "web", Available: 50, LeftOut: 50, LeftOutWhy: "not in mix (add it with a share to use it)"},
	}}
	m := &Manifest{Mix: rep, Stages: []*Counters{{Kind: "tokenize"}}}
	data, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	var back Manifest
	if err := json.Unmarshal(data, &back); err != nil {
		t.Fatal(err)
	}
	a, b := m.LeftOut(), back.LeftOut()
	if len(a) != 2 || strings.Join(a, "\n") != strings.Join(b, "\n") || !strings.HasPrefix(a[0], "forum: 600 of 1000 tokens left out (60.0%): total capped") {
		t.Errorf("left out %q / %q", a, b)
	}
	if !back.TokensCounted() || (&Manifest{}).TokensCounted() {
		t.Error("TokensCounted")
	}
}
