package run

import (
	"os"
	"path/filepath"
	"testing"

	"winnow/stages"
	"winnow/stages/spec"
)

// TestStructureWarningsOnRealDocs samples real documents nobody here wrote
// (testdata/realdocs: Debian manual pages rendered by groff, libffi's
// texinfo HTML manual; testdata/udhr: the Universal Declaration of Human
// Rights in 27 languages) and checks that `check` warns about the line
// rules on the two technical sources, not on the prose, and not on a
// lines stage scoped to the prose.
func TestStructureWarningsOnRealDocs(t *testing.T) {
	real, _ := filepath.Abs(filepath.Join("..", "..", "testdata"))
	dir := t.TempDir()
	body := `name: structure
inputs:
  - source: manuals
    paths: ["` + filepath.Join(real, "realdocs", "man", "pages.jsonl.zst") + `"]
  - source: reference
    paths: ["` + filepath.Join(real, "realdocs", "html", "*.html") + `"]
  - source: udhr
    paths: ["` + filepath.Join(real, "udhr", "*.txt") + `"]
stages:
  - kind: lines
  - kind: lines
    name: prose_lines
    only: {sources: [udhr]}
`
	p := filepath.Join(dir, "spec.yaml")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	sp, err := spec.LoadSpec(p)
	if err != nil {
		t.Fatal(err)
	}
	inputs, err := spec.ResolveInputs(sp)
	if err != nil {
		t.Fatal(err)
	}
	steps, err := sp.BuildStages(stages.Env{Checking: true})
	if err != nil {
		t.Fatal(err)
	}
	ws, err := CheckStructure(inputs, steps)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]StructureWarning{}
	for _, w := range ws {
		t.Logf("%s", w.Message)
		got[w.Stage+"/"+w.Source] = w
	}
	if len(ws) != 2 {
		t.Errorf("%d warnings, want 2 (lines on manuals and on reference)", len(ws))
	}
	for _, src := range []string{"manuals", "reference"} {
		w, ok := got["lines/"+src]
		if !ok {
			t.Errorf("no warning for lines on %s", src)
			continue
		}
		if w.StructuralShare < TechnicalLineShare || len(w.SuggestSources) != 1 || w.SuggestSources[0] != "udhr" {
			t.Errorf("%s: structural share %.2f, suggests %v", src, w.StructuralShare, w.SuggestSources)
		}
	}
}
