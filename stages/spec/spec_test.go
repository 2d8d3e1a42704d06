package spec

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages"
)

const basicSpec = `name: basic
seed: 1
inputs:
  - source: yard
    paths: ["raw/*.zst"]
stages:
  - kind: normalize
  - kind: length
    min_chars: 5
output:
  dir: out
`

func TestSpecErrorsNameLineColumnAndSuggest(t *testing.T) {
	dir := t.TempDir()
	cases := []struct{ spec, want string }{
		{strings.Replace(basicSpec, "    min_chars: 5", "    min_chras: 5", 1), `spec.yaml:9:5: spec.stages[1].min_chras: unknown key (did you mean "min_chars"?)`},
		{strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: lots", 1), `spec.yaml:9:16: spec.stages[1].min_chars: want an integer, got "lots"`},
		{strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: -5", 1), `stages[1].min_chars: -5 is out of range`},
		{strings.Replace(basicSpec, "seed: 1", "sede: 1", 1), `spec.yaml:2:1: spec.sede: unknown key (did you mean "seed"?)`},
		{strings.Replace(basicSpec, "kind: length", "kind: lenght", 1), `unknown stage kind "lenght" (did you mean "length"?)`},
		{strings.Replace(basicSpec, "    paths:", "    pathz:", 1), `spec.inputs[0].pathz: unknown key (did you mean "paths"?)`},
	}
	for _, c := range cases {
		p := filepath.Join(dir, "spec.yaml")
		if err := os.WriteFile(p, []byte(c.spec), 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := LoadSpec(p)
		if err == nil {
			_, err = s.BuildStages(stages.Env{Checking: true})
		}
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("got %v\nwant %s", err, c.want)
		}
	}
}

// --set overrides: the stage is named by name or kind, the value is parsed
// as YAML into the plain-data config, and the config hash changes with it.
func TestApplySets(t *testing.T) {
	s, err := ParseSpec(filepath.Join(t.TempDir(), "spec.yaml"), []byte(basicSpec))
	if err != nil {
		t.Fatal(err)
	}
	base := s.ConfigHash
	if err := ApplySets(s, []string{"length.min_chars=40", "normalize.max_blank_lines=2"}); err != nil {
		t.Fatal(err)
	}
	if s.ConfigHash == base {
		t.Error("config hash unchanged by --set")
	}
	st := s.Config.(map[string]any)["stages"].([]any)
	if st[1].(map[string]any)["min_chars"] != 40 || st[0].(map[string]any)["max_blank_lines"] != 2 {
		t.Errorf("config stages %v", st)
	}
	if got := s.Stages[1].Params.Int("min_chars", 0, 0, 1000); got != 40 {
		t.Errorf("min_chars read as %d", got)
	}
	for set, want := range map[string]string{
		"quality.fewest_words=3": `the spec has no stage "quality"`,
		"length=40":              "want STAGE.KEY=VALUE",
		"length.min_chars":       "want STAGE.KEY=VALUE",
	} {
		if err := ApplySets(s, []string{set}); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("--set %s: error %v, want %q", set, err, want)
		}
	}
}
