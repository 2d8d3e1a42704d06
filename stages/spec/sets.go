package spec

import (
	"fmt"
	"strings"

	"gopkg.in/yaml.v3"

	"winnow/stages/read"
)

// ApplySets applies "stage.key=value" overrides to a spec's stage params
// (the stage is named by its name or kind). An unknown stage is an error;
// an unknown key is reported when the stage is built.
func ApplySets(s *Spec, sets []string) error {
	for _, set := range sets {
		k, v, ok := strings.Cut(set, "=")
		if !ok {
			return fmt.Errorf("--set %q: want STAGE.KEY=VALUE", set)
		}
		st, key, ok := strings.Cut(k, ".")
		if !ok {
			return fmt.Errorf("--set %q: want STAGE.KEY=VALUE", set)
		}
		found := false
		for i, sp := range s.Stages {
			if sp.Name == st || sp.Kind == st {
				sp.Params.SetOverride(key, v)
				s.setConfig(i, key, v)
				found = true
			}
		}
		if !found {
			return fmt.Errorf("--set %q: the spec has no stage %q", set, st)
		}
	}
	if len(sets) > 0 {
		s.hashConfig()
	}
	return nil
}

// setConfig records an override in the plain-data config written to the
// manifest, so the manifest and config hash describe what really ran.
func (s *Spec) setConfig(stage int, key, value string) {
	m, ok := s.Config.(map[string]any)
	if !ok {
		return
	}
	list, ok := m["stages"].([]any)
	if !ok || stage >= len(list) {
		return
	}
	entry, ok := list[stage].(map[string]any)
	if !ok {
		return
	}
	var v any = value
	var parsed any
	if err := yaml.Unmarshal([]byte(value), &parsed); err == nil && parsed != nil {
		v = jsonable(parsed)
	}
	entry[key] = v
}

// ResolveInputs lists the input files of the spec's "inputs" (see
// read.ResolveInputs), each with its entry's read options.
func ResolveInputs(s *Spec) ([]read.InputFile, error) {
	groups := make([]read.Group, len(s.Inputs))
	for i := range s.Inputs {
		groups[i] = read.Group{Options: &s.Inputs[i].ReadOptions, Paths: s.Inputs[i].Paths}
	}
	return read.ResolveInputs(s.File, s.Dir, groups)
}
