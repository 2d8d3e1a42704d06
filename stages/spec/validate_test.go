package spec

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/stages"
)

// Spec values that would fail late or silently are refused when the spec is
// loaded or its stages built (what `winnow check` does), each error naming
// file:line:column and the key.
func TestSpecValidatedUpFront(t *testing.T) {
	dir := t.TempDir()
	long := strings.Repeat("a", 300)
	lengthSpec := strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: 500\n    max_chars: 100", 1)
	cases := []struct{ spec, want string }{
		// stages.Stage names become file names in the run directory.
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: \"../../x\"", 1), `spec.yaml:9:11: spec.stages[1].name: "../../x" must be a plain file name (letters, digits, '_', '-', '.'), it has a path separator at byte 2`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: /tmp/evil", 1), `spec.yaml:9:11: spec.stages[1].name: "/tmp/evil" must be a plain file name`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: ..", 1), `spec.yaml:9:11: spec.stages[1].name: ".." must not start with '.'`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: \"a\\0b\"", 1), `spec.yaml:9:11: spec.stages[1].name: "a\x00b" must be a plain file name (letters, digits, '_', '-', '.'), it has a NUL byte at byte 1`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: "+long, 1), `spec.yaml:9:11: spec.stages[1].name: name is 300 bytes long, at most 64 allowed`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: read", 1), `spec.yaml:9:11: spec.stages[1].name: "read" is reserved`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: write", 1), `"write" is reserved`},
		{strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: output", 1), `"output" is reserved`},
		{strings.Replace(basicSpec, "name: basic", "name: \"x\\0y\"", 1), `spec.yaml:1:7: spec.name: "x\x00y" must be a plain file name`},
		{strings.Replace(basicSpec, "name: basic", "name: "+long, 1), `spec.yaml:1:7: spec.name: name is 300 bytes long`},
		{strings.Replace(basicSpec, "name: basic", "name: \"\\e]0;pwned\\a\"", 1), `spec.yaml:1:7: spec.name: "\x1b]0;pwned\a" must be a plain file name (letters, digits, '_', '-', '.'), it has a control character at byte 0`},
		// Non-finite numbers.
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: near_dedup\n    threshold: NaN", 1), `spec.yaml:9:16: spec.stages[1].threshold: want a finite number, got "NaN"`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    most_symbols_per_word: +Inf", 1), `spec.yaml:9:28: spec.stages[1].most_symbols_per_word: want a finite number, got "+Inf"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: NaN}", 1), `spec.yaml:12:15: spec.output.mix.yard: want a finite number >= 0, got "NaN"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: .inf}", 1), `spec.output.mix.yard: want a finite number >= 0, got ".inf"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: -1}", 1), `spec.output.mix.yard: -1: must not be negative`},
		// A non-finite number anywhere (even a key no stage reads) is named
		// by its place, not by a JSON encoder error at the end.
		{strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: 5\n    note: [1, .nan]", 1), `spec.yaml:10:15: spec.stages[1].note[1]: want a finite number, got ".nan"`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: near_dedup\n    threshold: -.inf", 1), `spec.yaml:9:16: spec.stages[1].threshold: want a finite number, got "-.inf"`},
		// Contradictory limits.
		{lengthSpec, `spec.yaml:9:16: spec.stages[1].min_chars: min_chars 500 is above max_chars 100: no document could keep both`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    fewest_words: 900\n    most_words: 800", 1), `spec.yaml:9:19: spec.stages[1].fewest_words: fewest_words 900 is above most_words 800`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    shortest_average_word: 20", 1), `spec.stages[1].shortest_average_word: shortest_average_word 20 is above longest_average_word 10`},
	}
	for _, c := range cases {
		p := filepath.Join(dir, "spec.yaml")
		os.WriteFile(p, []byte(c.spec), 0o644)
		s, err := LoadSpec(p)
		if err == nil {
			_, err = s.BuildStages(stages.Env{Checking: true})
		}
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("got %v\nwant %s", err, c.want)
		}
	}
	// Equal bounds and a disabled maximum are fine.
	for _, ok := range []string{
		strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: 100\n    max_chars: 100", 1),
		strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: 100\n    max_chars: 0", 1),
	} {
		p := filepath.Join(dir, "spec.yaml")
		os.WriteFile(p, []byte(ok), 0o644)
		s, err := LoadSpec(p)
		if err == nil {
			_, err = s.BuildStages(stages.Env{Checking: true})
		}
		if err != nil {
			t.Errorf("valid spec refused: %v", err)
		}
	}
}
