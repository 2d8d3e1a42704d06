package stages

import (
	"go/parser"
	"go/token"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"
)

// roomRank places every package of the module on the one-way ladder of
// DEVELOPERS.md "Architecture in one page": a package may import only
// packages of a lower rank (or its own sub-packages). A new package must be
// added here, which is the moment to decide where it belongs.
var roomRank = map[string]int{
	"winnow/cmd/winnow":          9, // one file per command
	"winnow/scripts/benchdedup":  9, // developer tool
	"winnow/stages/audit":        7, // reads finished run directories (through record, not the engine)
	"winnow/stages/run":          7, // runner, segments, spill, resume, manifest
	"winnow/stages/spec":         6, // YAML spec, --set overrides
	"winnow/stages/record":       5, // ledger, metrics, output sink
	"winnow/stages":              4, // Doc, Decision, contracts, registry, stage kinds
	"winnow/stages/read":         3, // inputs, codecs, record readers
	"winnow/stages/read/webpage": 3, // HTTP, charset and HTML main-text extraction
	"winnow/filters":             2,
	"winnow/filters/langid":      2,
	"winnow/filters/domain":      2,
	"winnow/dedup":               2,
	"winnow/shard":               2,
	"winnow/stages/synth":        2, // demo corpus generator
	"winnow/stages/fsio":         1,
	"winnow/stages/jsonl":        1,
	"winnow/stages/suggest":      1,
	"winnow/stages/termtext":     1, // escaping for terminal output
	"winnow/configs":             1,
	"winnow/configs/cluster":     9, // tests of the cluster examples (runs the built command)
}

// moduleImports returns, per package of the module, the module packages
// its non-test files import.
func moduleImports(t *testing.T, root, module string) map[string][]string {
	t.Helper()
	out := map[string][]string{}
	fset := token.NewFileSet()
	err := filepath.WalkDir(root, func(path string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		name := d.Name()
		if d.IsDir() {
			if path != root && (name == "testdata" || strings.HasPrefix(name, ".") || strings.HasPrefix(name, "_")) {
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(name, ".go") || strings.HasSuffix(name, "_test.go") {
			return nil
		}
		f, err := parser.ParseFile(fset, path, nil, parser.ImportsOnly)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, filepath.Dir(path))
		pkg := module
		if rel != "." {
			pkg += "/" + filepath.ToSlash(rel)
		}
		if _, ok := out[pkg]; !ok {
			out[pkg] = nil
		}
		for _, imp := range f.Imports {
			p, _ := strconv.Unquote(imp.Path.Value)
			if p == module || strings.HasPrefix(p, module+"/") {
				out[pkg] = append(out[pkg], p)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// Imports run one way: no package imports a room above (or beside) it.
func TestRoomsImportOneWay(t *testing.T) {
	imports := moduleImports(t, "..", "winnow")
	if len(imports) < len(roomRank)/2 {
		t.Fatalf("found only %d packages: wrong module root?", len(imports))
	}
	var pkgs []string
	for p := range imports {
		pkgs = append(pkgs, p)
	}
	sort.Strings(pkgs)
	for _, p := range pkgs {
		rp, ok := roomRank[p]
		if !ok {
			t.Errorf("package %s has no place in roomRank (stages/rooms_test.go): decide its room", p)
			continue
		}
		for _, q := range imports[p] {
			rq, ok := roomRank[q]
			if !ok {
				continue // reported as a package of its own
			}
			if rq >= rp && !strings.HasPrefix(q, p+"/") {
				t.Errorf("%s (rank %d) imports %s (rank %d): imports must point down the ladder", p, rp, q, rq)
			}
		}
	}
}

// The check itself: a reach upward is caught.
func TestRoomsCheckCatchesUpwardImport(t *testing.T) {
	dir := t.TempDir()
	write := func(rel, src string) {
		p := filepath.Join(dir, rel)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write("stages/read/r.go", "package read\n\nimport _ \"winnow/stages/run\"\n")
	write("stages/run/r.go", "package run\n\nimport _ \"winnow/stages/read\"\n")
	imports := moduleImports(t, dir, "winnow")
	up := 0
	for p, qs := range imports {
		for _, q := range qs {
			if roomRank[q] >= roomRank[p] {
				up++
			}
		}
	}
	if len(imports) != 2 || up != 1 {
		t.Errorf("packages %v: %d upward imports, want 2 packages and 1", imports, up)
	}
}
