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
	// budget is Env.MemoryBudget (0: the default); a small one makes the
	// indexes sort partitions and pairs externally.
	budget int64
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
			out = append(out, splitCase{name: "near_dedup" + suffix, kind: "near_dedup",
				params: map[string]any{"keep": keep, "threshold": 0.7}, docs: splitDocs, against: against, keyFiles: true})
		}
	}
	// Partitions larger than the memory budget: external sorts.
	// (64 bytes: two exact-dedup records, four band keys.)
	for _, kind := range []string{"exact_dedup", "near_dedup"} {
		params := map[string]any{"keep": "longest"}
		if kind == "near_dedup" {
			params["threshold"] = 0.7
		}
		out = append(out, splitCase{name: kind + " keep longest against, budget 64 bytes", kind: kind,
			params: params, docs: splitDocs, against: true, keyFiles: true, budget: 64})
	}
	for _, maxRepeats := range []int{1, 2} {
		out = append(out, splitCase{name: fmt.Sprintf("exact_dedup paragraph max_repeats %d", maxRepeats), kind: "exact_dedup",
			params: map[string]any{"scope": "paragraph", "max_repeats": maxRepeats}, docs: splitDocs})
	}
	out = append(out, splitCase{name: "near_dedup verify exact against", kind: "near_dedup",
		params: map[string]any{"verify": "exact", "threshold": 0.7, "keep": "longest"}, docs: splitDocs, against: true, keyFiles: true})
	for _, action := range []string{"cut", "drop"} {
		out = append(out, splitCase{name: "decontaminate max_doc_frequency " + action, kind: "decontaminate",
			params:  map[string]any{"evals": decontamEvalParams(), "max_doc_frequency": 2, "action": action},
			specDir: "..", docs: func(tb testing.TB) []*Doc { return makeDocs(contamDocs(tb)) }})
	}
	return out
}

// splitRun is what one way of reducing decided and wrote.
type splitRun struct {
	decisions []string
	keys      map[string]string // path under keys/ -> sha256
	// report is the run-level file a Finisher wrote (contamination.json).
	report string
	// ignored is the number of n-grams decontaminate ignored.
	ignored int
	// of is each document's "of" ledger field ("" for none).
	of []string
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
	return Env{RunDir: runDir, Against: against, SpecDir: c.specDir, Seed: 7, MemoryBudget: c.budget}
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

// finish decides about every document (observing the decisions when the
// stage aggregates a report, and writing the report) and hashes the key
// files.
func finish(tb testing.TB, g GlobalStage, docs []*Doc, runDir string) splitRun {
	tb.Helper()
	r := splitRun{decisions: make([]string, len(docs)), keys: keyHashes(tb, runDir), of: make([]string, len(docs))}
	for i, d := range docs {
		dec := g.Apply(d)
		r.decisions[i] = renderDecision(dec)
		if dec.Action == Edit {
			sum := sha256.Sum256([]byte(dec.Text)) // the edited text itself, not only its length
			r.decisions[i] += " " + hex.EncodeToString(sum[:8])
		}
		if of, ok := dec.Extra["of"].(string); ok && dec.Extra["against"] == nil {
			r.of[i] = of
		}
		if o, ok := g.(Observer); ok {
			o.Observe(d, &dec)
		}
	}
	if f, ok := g.(Finisher); ok {
		if err := f.Finish(runDir); err != nil {
			tb.Fatal(err)
		}
		for _, name := range []string{"contamination.json"} {
			b, err := os.ReadFile(filepath.Join(runDir, name))
			if err != nil {
				tb.Fatal(err)
			}
			r.report += string(b)
		}
	}
	if dc, ok := g.(*Decontaminate); ok {
		r.ignored = dc.Report().IgnoredNgrams
	}
	return r
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
		return finish(t, scanner, docs, runDir)
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
	return finish(t, loader, docs, runDir)
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
			if c.kind == "decontaminate" && want.ignored == 0 {
				t.Fatalf("no n-gram ignored: max_doc_frequency shows nothing")
			}
			t.Logf("%d docs, %d removed or edited (%d of the previous run), key files %d, n-grams ignored %d", len(docs), removed, againstHits, len(want.keys), want.ignored)
			for _, groups := range []int{1, 3} {
				got := c.runSplit(t, docs, prev, groups)
				for i, d := range docs {
					if got.decisions[i] != want.decisions[i] {
						t.Errorf("%d groups: %s: %q, Reduce decided %q", groups, d.ID, got.decisions[i], want.decisions[i])
					}
				}
				// Every document removed as a copy of this run's points at a
				// document that was kept (no chains of copies of copies).
				kept := map[string]bool{}
				for i, d := range docs {
					kept[d.ID] = got.decisions[i] == "keep"
				}
				for i, of := range got.of {
					if of != "" && !kept[of] {
						t.Errorf("%d groups: %s removed of %s, which was not kept", groups, docs[i].ID, of)
					}
				}
				if got.report != want.report {
					t.Errorf("%d groups: report\n%s\nReduce's\n%s", groups, got.report, want.report)
				}
				if fmt.Sprint(got.keys) != fmt.Sprint(want.keys) {
					t.Errorf("%d groups: key files %v, Reduce wrote %v", groups, got.keys, want.keys)
				}
			}
		})
	}
}

// FuzzDecontamPart: decoding arbitrary bytes as a part of n keys never
// panics and gives ascending offsets below n; what decodes re-encodes to
// bytes that decode to the same offsets. Seeds include real results of
// ReduceSome over the real eval sets and mail with pasted questions.
func FuzzDecontamPart(f *testing.F) {
	g := buildGlobal(f, "decontaminate", map[string]any{"evals": decontamEvalParams(), "max_doc_frequency": 2}, Env{SpecDir: ".."})
	dc := g.(*Decontaminate)
	docs := makeDocs(contamDocs(f))
	keys := make([]any, len(docs))
	for i, d := range docs {
		keys[i] = dc.Scan(d)
	}
	all := make([]int, decontamParts)
	for i := range all {
		all[i] = i
	}
	res, err := dc.ReduceSome(all, feedOf(docs, keys))
	if err != nil {
		f.Fatal(err)
	}
	for p, b := range res {
		f.Add(b, uint8(p), uint32(dc.partLo(p+1)-dc.partLo(p)))
	}
	f.Add(encodeDecontamPart(nil, 3, 301, []int{0, 1, 5, 300}), uint8(3), uint32(301))
	f.Add(encodeDecontamPart(nil, 0, 0, nil), uint8(0), uint32(0))
	f.Fuzz(func(t *testing.T, b []byte, p uint8, n uint32) {
		n %= 1 << 24
		ks, err := decodeDecontamPart(b, int(p), int(n))
		if err != nil {
			return
		}
		for i, k := range ks {
			if k < 0 || k >= int(n) || (i > 0 && k <= ks[i-1]) {
				t.Fatalf("offsets %v of a part of %d keys", ks, n)
			}
		}
		again, err := decodeDecontamPart(encodeDecontamPart(nil, int(p), int(n), ks), int(p), int(n))
		if err != nil || fmt.Sprint(again) != fmt.Sprint(ks) {
			t.Fatalf("re-encoded %v decodes to %v, %v", ks, again, err)
		}
	})
}

// TestDecontamPartRoundTrip: a part's result decodes to the keys it was
// made of and no proper prefix decodes.
func TestDecontamPartRoundTrip(t *testing.T) {
	ks := []int{0, 3, 4, 127, 128, 20000}
	b := encodeDecontamPart(nil, 4, 20001, ks)
	got, err := decodeDecontamPart(b, 4, 20001)
	if err != nil || fmt.Sprint(got) != fmt.Sprint(ks) {
		t.Fatalf("decoded %v, %v", got, err)
	}
	if _, err := decodeDecontamPart(encodeDecontamPart(nil, 4, 20000, ks), 4, 20000); err == nil {
		t.Fatal("key 20000 accepted in a part of 20000 keys")
	}
	if _, err := decodeDecontamPart(b, 5, 20001); err == nil {
		t.Fatal("part 4's result accepted as part 5's")
	}
	if _, err := decodeDecontamPart(b, 4, 20002); err == nil {
		t.Fatal("a result of 20001 keys accepted for a part of 20002")
	}
	for n := 0; n < len(b); n++ {
		if _, err := decodeDecontamPart(b[:n], 4, 20001); err == nil {
			t.Fatalf("the first %d of %d bytes decoded", n, len(b))
		}
	}
}

// TestLoadReducedRejects: results cut short, two parts' results swapped,
// or another stage's results are errors naming the stage, never a panic
// or a silent wrong decision.
func TestLoadReducedRejects(t *testing.T) {
	byName := map[string]splitCase{}
	for _, c := range splitCases() {
		byName[c.name] = c
	}
	names := []string{"exact_dedup keep first", "near_dedup keep first", "exact_dedup paragraph max_repeats 1", "decontaminate max_doc_frequency drop"}
	all := map[string][][]byte{}
	for _, name := range names {
		c, ok := byName[name]
		if !ok {
			t.Fatalf("no case %q", name)
		}
		docs := c.docs(t)
		env := c.env(t, t.TempDir(), "")
		g := buildGlobal(t, c.kind, c.params, env)
		keys := make([]any, len(docs))
		for i, d := range docs {
			keys[i] = g.Scan(d)
		}
		sr := g.(SplitReducer)
		ps := make([]int, sr.ReduceParts())
		for i := range ps {
			ps[i] = i
		}
		res, err := sr.ReduceSome(ps, feedOf(docs, keys))
		if err != nil {
			t.Fatal(err)
		}
		g.Close()
		all[name] = res
		// Two non-empty results (the longest two) swapped.
		a, b := 0, 1
		for i := range res {
			if len(res[i]) > len(res[a]) {
				a, b = i, a
			} else if i != a && len(res[i]) > len(res[b]) {
				b = i
			}
		}
		swapped := append([][]byte{}, res...)
		swapped[a], swapped[b] = swapped[b], swapped[a]
		bad := map[string][][]byte{"cut short": res[:len(res)-1], "swapped": swapped}
		for what, rs := range bad {
			g := buildGlobal(t, c.kind, c.params, c.env(t, t.TempDir(), ""))
			err := g.(SplitReducer).LoadReduced(rs, feedOf(docs, keys))
			if err == nil || !strings.Contains(err.Error(), g.Name()) {
				t.Errorf("%s: results %s: %v", name, what, err)
			}
			g.Close()
		}
	}
	// Another stage's results (padded or cut to the part count).
	for i, name := range names {
		c := byName[name]
		other := all[names[(i+1)%len(names)]]
		g := buildGlobal(t, c.kind, c.params, c.env(t, t.TempDir(), ""))
		n := g.(SplitReducer).ReduceParts()
		rs := make([][]byte, n)
		for p := range rs {
			rs[p] = other[p%len(other)]
		}
		if err := g.(SplitReducer).LoadReduced(rs, feedOf(nil, nil)); err == nil {
			t.Errorf("%s loaded the results of %s", name, names[(i+1)%len(names)])
		}
		g.Close()
	}
}
