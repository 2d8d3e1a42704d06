package stages

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// splitCase is one global stage configuration whose reduce is cut into
// parts.
type splitCase struct {
	name   string
	kind   string
	params map[string]any
	// specDir is Env.SpecDir ("" for none).
	specDir string
	docs    func(tb testing.TB) []*Doc
	// against runs a previous run over the first third of the documents
	// and compares with it (--against).
	against bool
	// keyFiles: the stage writes key files.
	keyFiles bool
}

// splitDocs returns real documents (manual pages, mail, HTML pages,
// Python documentation chunks) followed by exact, case-folded and near
// copies of some of them, with sources cycling through web, forum and
// mirror so that keep: {sources: ...} has something to choose.
func splitDocs(tb testing.TB) []*Doc {
	texts := loadRealTexts(tb).all()
	texts = append(texts, zstdJSONLTexts(tb, "../testdata/domaindocs/python.jsonl.zst", "text")[:60]...)
	docs := makeDocs(withCopies(texts))
	for i, d := range docs {
		d.Source = []string{"web", "forum", "mirror"}[i%3]
	}
	return docs
}

func splitCases() []splitCase {
	var out []splitCase
	for _, keep := range []any{"first", "longest", map[string]any{"sources": []any{"mirror", "web"}}} {
		kn := fmt.Sprint(keep)
		if m, ok := keep.(map[string]any); ok {
			kn = fmt.Sprint("sources ", m["sources"])
		}
		for _, against := range []bool{false, true} {
			suffix := " keep " + kn
			if against {
				suffix += " against"
			}
			out = append(out, splitCase{name: "exact_dedup" + suffix, kind: "exact_dedup",
				params: map[string]any{"keep": keep}, docs: splitDocs, against: against, keyFiles: true})
		}
	}
	return out
}

// splitRun is what one way of reducing decided and wrote.
type splitRun struct {
	decisions []string
	keys      map[string]string // path under keys/ -> sha256
}

// keyHashes returns the sha256 of every file under dir/keys.
func keyHashes(tb testing.TB, dir string) map[string]string {
	tb.Helper()
	out := map[string]string{}
	root := filepath.Join(dir, "keys")
	err := filepath.WalkDir(root, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		sum := sha256.Sum256(b)
		rel, _ := filepath.Rel(root, p)
		out[rel] = hex.EncodeToString(sum[:])
		return nil
	})
	if err != nil && !os.IsNotExist(err) {
		tb.Fatal(err)
	}
	return out
}

func (c splitCase) env(tb testing.TB, runDir, against string) Env {
	dir := filepath.Join(runDir, "keys")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		tb.Fatal(err)
	}
	return Env{RunDir: runDir, Against: against, SpecDir: c.specDir, Seed: 7}
}

// feedOf returns a Feed over docs with their scanned keys.
func feedOf(docs []*Doc, keys []any) Feed {
	return func(collect func(OrderKey, string, any) error) error {
		for i, d := range docs {
			if err := collect(d.Order, d.ID, keys[i]); err != nil {
				return err
			}
		}
		return nil
	}
}

func decide(g GlobalStage, docs []*Doc) []string {
	out := make([]string, len(docs))
	for i, d := range docs {
		out[i] = renderDecision(g.Apply(d))
	}
	return out
}

// runSplit reduces docs in one of three ways: groups nil is Collect and
// Reduce in one stage; otherwise each group of parts is reduced by its
// own stage object (ReduceSome) and a further fresh stage loads all the
// results in part order (LoadReduced) and decides. A nil group means
// "every part".
func (c splitCase) runSplit(t *testing.T, docs []*Doc, against string, nGroups int) splitRun {
	t.Helper()
	runDir := t.TempDir()
	env := c.env(t, runDir, against)
	build := func() GlobalStage { return buildGlobal(t, c.kind, c.params, env) }
	scanner := build()
	defer scanner.Close()
	keys := make([]any, len(docs))
	for i, d := range docs {
		keys[i] = scanner.Scan(d)
	}
	feed := feedOf(docs, keys)
	if nGroups == 0 {
		if err := feed(scanner.Collect); err != nil {
			t.Fatal(err)
		}
		if err := scanner.Reduce(); err != nil {
			t.Fatal(err)
		}
		return splitRun{decide(scanner, docs), keyHashes(t, runDir)}
	}
	sr, ok := scanner.(SplitReducer)
	if !ok {
		t.Fatalf("%T does not implement SplitReducer", scanner)
	}
	n := sr.ReduceParts()
	if n < 2 {
		t.Fatalf("ReduceParts %d", n)
	}
	results := make([][]byte, n)
	for g := 0; g < nGroups; g++ {
		var ps []int
		for p := g; p < n; p += nGroups {
			ps = append(ps, p)
		}
		// A reduce task writes no key files.
		renv := env
		renv.NoKeyFiles = true
		red := buildGlobal(t, c.kind, c.params, renv)
		out, err := red.(SplitReducer).ReduceSome(ps, feed)
		if err != nil {
			t.Fatal(err)
		}
		red.Close()
		if len(out) != len(ps) {
			t.Fatalf("ReduceSome(%v) returned %d results", ps, len(out))
		}
		for i, p := range ps {
			results[p] = out[i]
		}
	}
	loader := build()
	defer loader.Close()
	if err := loader.(SplitReducer).LoadReduced(results, feed); err != nil {
		t.Fatal(err)
	}
	return splitRun{decide(loader, docs), keyHashes(t, runDir)}
}

// TestSplitReduceMatchesReduce: for every global stage that reduces in
// parts, on real documents with copies, reducing all parts in one call or
// the parts spread over three stage objects (parts ≡ 0, 1, 2 mod 3), then
// loading the results into a fourth, decides every document exactly as
// Collect and Reduce in one stage, and writes byte-identical key files.
func TestSplitReduceMatchesReduce(t *testing.T) {
	for _, c := range splitCases() {
		t.Run(c.name, func(t *testing.T) {
			docs := c.docs(t)
			prev := ""
			if c.against {
				prev = t.TempDir()
				env := c.env(t, prev, "")
				g := buildGlobal(t, c.kind, c.params, env)
				for _, d := range docs[:len(docs)/3] {
					if err := g.Collect(d.Order, d.ID, g.Scan(d)); err != nil {
						t.Fatal(err)
					}
				}
				if err := g.Reduce(); err != nil {
					t.Fatal(err)
				}
				g.Close()
			}
			want := c.runSplit(t, docs, prev, 0)
			removed, againstHits := 0, 0
			for _, d := range want.decisions {
				if d != "keep" {
					removed++
				}
				if strings.Contains(d, "against=") {
					againstHits++
				}
			}
			if removed == 0 {
				t.Fatalf("no document removed among %d: the comparison shows nothing", len(docs))
			}
			if c.against && againstHits == 0 {
				t.Fatalf("no document removed as a copy of the previous run")
			}
			if c.keyFiles && len(want.keys) == 0 {
				t.Fatalf("Reduce wrote no key files")
			}
			t.Logf("%d docs, %d removed (%d of the previous run), key files %d", len(docs), removed, againstHits, len(want.keys))
			for _, groups := range []int{1, 3} {
				got := c.runSplit(t, docs, prev, groups)
				for i, d := range docs {
					if got.decisions[i] != want.decisions[i] {
						t.Errorf("%d groups: %s: %q, Reduce decided %q", groups, d.ID, got.decisions[i], want.decisions[i])
					}
				}
				if fmt.Sprint(got.keys) != fmt.Sprint(want.keys) {
					t.Errorf("%d groups: key files %v, Reduce wrote %v", groups, got.keys, want.keys)
				}
			}
		})
	}
}
