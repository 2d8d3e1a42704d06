package run

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"winnow/stages"
	"winnow/stages/spec"
)

// Spec values that would fail late or silently are refused when the spec is
// loaded or its stages built (what `winnow check` does), each error naming
// file:line:column and the key.
func TestSpecValidatedUpFront(t *testing.T) {
	dir := writeCorpus(t, 4)
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
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    max_symbol_ratio: +Inf", 1), `spec.yaml:9:23: spec.stages[1].max_symbol_ratio: want a finite number, got "+Inf"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: NaN}", 1), `spec.yaml:12:15: spec.output.mix.yard: want a finite number >= 0, got "NaN"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: .inf}", 1), `spec.output.mix.yard: want a finite number >= 0, got ".inf"`},
		{strings.Replace(basicSpec, "  dir: out", "  dir: out\n  mix: {yard: -1}", 1), `spec.output.mix.yard: -1: must not be negative`},
		// A non-finite number anywhere (even a key no stage reads) is named
		// by its place, not by a JSON encoder error at the end.
		{strings.Replace(basicSpec, "    min_chars: 5", "    min_chars: 5\n    note: [1, .nan]", 1), `spec.yaml:10:15: spec.stages[1].note[1]: want a finite number, got ".nan"`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: near_dedup\n    threshold: -.inf", 1), `spec.yaml:9:16: spec.stages[1].threshold: want a finite number, got "-.inf"`},
		// Contradictory limits.
		{lengthSpec, `spec.yaml:9:16: spec.stages[1].min_chars: min_chars 500 is above max_chars 100: no document could keep both`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    min_words: 900\n    max_words: 800", 1), `spec.yaml:9:16: spec.stages[1].min_words: min_words 900 is above max_words 800`},
		{strings.Replace(basicSpec, "  - kind: length\n    min_chars: 5", "  - kind: quality\n    min_mean_word_len: 20", 1), `spec.stages[1].min_mean_word_len: min_mean_word_len 20 is above max_mean_word_len 10`},
	}
	for _, c := range cases {
		p := writeFile(t, dir, "spec.yaml", c.spec)
		s, err := spec.LoadSpec(p)
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
		s := writeSpec(t, dir, ok)
		if _, err := s.BuildStages(stages.Env{Checking: true}); err != nil {
			t.Errorf("valid spec refused: %v", err)
		}
	}
}

// A stage name that tries to leave the run directory is refused before
// anything is written: the run directory's parent holds nothing new and the
// run directory is not even created.
func TestStageNameCannotEscapeRunDir(t *testing.T) {
	dir := writeCorpus(t, 10)
	before := listTree(t, dir)
	abs := filepath.Join(dir, "elsewhere")
	for _, name := range []string{`"../../x"`, `"../x"`, `"a/b"`, `"` + abs + `"`, `"sub\\x"`} {
		body := strings.Replace(basicSpec, "  - kind: length", "  - kind: length\n    name: "+name, 1)
		p := writeFile(t, dir, "spec.yaml", body)
		s, err := spec.LoadSpec(p)
		if err == nil {
			_, err = RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "run", "out")})
		}
		if err == nil || !strings.Contains(err.Error(), "must be a plain file name") {
			t.Errorf("name %s: %v", name, err)
		}
	}
	after := listTree(t, dir)
	for p := range after {
		if !before[p] && p != "spec.yaml" {
			t.Errorf("written: %s", p)
		}
	}
}

func listTree(t *testing.T, dir string) map[string]bool {
	t.Helper()
	out := map[string]bool{}
	filepath.Walk(filepath.Dir(dir), func(p string, info os.FileInfo, err error) error {
		if err == nil {
			rel, _ := filepath.Rel(dir, p)
			out[rel] = true
		}
		return nil
	})
	return out
}
