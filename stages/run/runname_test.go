package run

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"winnow/stages/spec"
)

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
