package shard

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// Invented demo data: Larkspur Marine Works boatyard prose.
var (
	yardSubjects = []string{"The yard crew", "Our rigger", "The night watch", "A member", "The surveyor", "Marta from the paint shed", "The apprentice"}
	yardVerbs    = []string{"hauled", "inspected", "sanded", "re-bedded", "faired", "caulked", "logged", "replaced", "torqued"}
	yardObjects  = []string{"the ketch's rudder", "three stanchions", "the cutlass bearing", "a soft deck core", "the keel bolts", "the mooring chain", "two seacocks", "the gelcoat blisters"}
	yardTails    = []string{"before the tide turned", "with 220-grit paper", "at 95 ft-lb", "after the rain", "under the travel lift", "for the spring launch", "while the epoxy cured"}
)

func yardSentence(r *rand.Rand) string {
	return fmt.Sprintf("%s %s %s %s.", yardSubjects[r.IntN(len(yardSubjects))], yardVerbs[r.IntN(len(yardVerbs))],
		yardObjects[r.IntN(len(yardObjects))], yardTails[r.IntN(len(yardTails))])
}

func yardDoc(r *rand.Rand, paragraphs int) string {
	ps := make([]string, paragraphs)
	for i := range ps {
		n := 1 + r.IntN(5)
		ss := make([]string, n)
		for j := range ss {
			ss[j] = yardSentence(r)
		}
		ps[i] = strings.Join(ss, " ")
	}
	return strings.Join(ps, "\n\n")
}

// corpus builds docs of three sources with skewed sizes: manuals has few
// long documents, forum many short ones, dealer a handful.
func corpus(seed uint64, tok *Tokenizer) []Doc {
	r := rand.New(rand.NewPCG(seed, 5))
	var docs []Doc
	add := func(src string, n, minP, maxP int) {
		for i := 0; i < n; i++ {
			text := yardDoc(r, minP+r.IntN(maxP-minP+1))
			docs = append(docs, Doc{ID: fmt.Sprintf("%s-%d", src, i), Text: text, Source: src, File: src + ".jsonl", Line: int64(i + 1),
				Tokens: tok.Count(text), Meta: map[string]any{"lang": "en", "score": float64(i%7) / 7}})
		}
	}
	add("manuals", 60, 3, 12)
	add("forum", 400, 1, 3)
	add("dealer", 80, 1, 4)
	// Interleave sources as inputs would arrive from several files.
	r.Shuffle(len(docs), func(i, j int) { docs[i], docs[j] = docs[j], docs[i] })
	return docs
}

type line struct {
	ID     string  `json:"id"`
	Text   string  `json:"text"`
	Source string  `json:"source"`
	Tokens int     `json:"tokens"`
	Lang   string  `json:"lang"`
	Score  float64 `json:"score"`
}

func readShard(t *testing.T, path string) []line {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	dec, err := zstd.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	defer dec.Close()
	var out []line
	sc := bufio.NewScanner(dec)
	sc.Buffer(nil, 1<<26)
	for sc.Scan() {
		var l line
		if err := json.Unmarshal(sc.Bytes(), &l); err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		out = append(out, l)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

func build(t *testing.T, docs []Doc, opt Options) (*Report, string) {
	t.Helper()
	return buildTo(t, docs, opt, nil)
}

// buildLeftOut is build that also returns the documents the builder
// reported left out, in the order reported.
func buildLeftOut(t *testing.T, docs []Doc, opt Options) (*Report, string, []LeftOut) {
	t.Helper()
	var left []LeftOut
	rep, run := buildTo(t, docs, opt, func(l LeftOut) error { left = append(left, l); return nil })
	return rep, run, left
}

// buildTo builds docs with opt under a fresh run directory, giving the
// builder leftOut (when not nil) as its left-out callback.
func buildTo(t *testing.T, docs []Doc, opt Options, leftOut func(LeftOut) error) (*Report, string) {
	t.Helper()
	run := t.TempDir()
	opt.Dir = filepath.Join(run, "shards")
	opt.TempDir = filepath.Join(run, "tmp")
	if opt.Name == "" {
		opt.Name = "demo"
	}
	b, err := NewBuilder(opt)
	if err != nil {
		t.Fatal(err)
	}
	if leftOut != nil {
		b.SetLeftOut(leftOut)
	}
	for i := range docs {
		if err := b.Add(&docs[i]); err != nil {
			t.Fatal(err)
		}
	}
	rep, err := b.Close()
	if err != nil {
		t.Fatal(err)
	}
	return rep, run
}

func shardBytes(t *testing.T, run string, rep *Report) [][]byte {
	var out [][]byte
	for _, f := range rep.Files {
		b, err := os.ReadFile(filepath.Join(run, f.Path))
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, b)
	}
	return out
}

// Property test (outside check: the mixture and balance
// contract, on generated corpora of 3 sources with skewed sizes, over
// seeds): every shard but the last holds shard_tokens within ±1%, every
// full shard's per-source share is within ±2 percentage points of the
// target, used tokens follow the shares, no source is used beyond its
// available tokens without a budget, and documents are interleaved.
func TestMixBalanceProperties(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	shares := map[string]float64{"manuals": 0.5, "forum": 0.3, "dealer": 0.2}
	for seed := uint64(1); seed <= 6; seed++ {
		t.Run(fmt.Sprint("seed", seed), func(t *testing.T) {
			docs := corpus(seed, tok)
			const T = 6000
			rep, run := build(t, docs, Options{Tokenizer: tok, ShardTokens: T, Mix: shares, Seed: seed})
			if rep.Mix == nil || rep.Mix.Mode != "capped" {
				t.Fatalf("mix report %+v", rep.Mix)
			}
			if len(rep.Files) < 3 {
				t.Fatalf("only %d shards", len(rep.Files))
			}
			var total int64
			worst := 0.0
			defer func() { t.Logf("%d shards, worst share deviation %.4f", len(rep.Files), worst) }()
			for i, f := range rep.Files {
				lines := readShard(t, filepath.Join(run, f.Path))
				var sum int64
				per := map[string]int64{}
				for _, l := range lines {
					if n := tok.Count(l.Text); n != l.Tokens {
						t.Fatalf("%s: line tokens %d, recount %d", l.ID, l.Tokens, n)
					}
					sum += int64(l.Tokens)
					per[l.Source] += int64(l.Tokens)
				}
				if sum != f.Tokens || int64(len(lines)) != f.Docs {
					t.Fatalf("shard %d: report %d tokens/%d docs, file %d/%d", i, f.Tokens, f.Docs, sum, len(lines))
				}
				total += sum
				last := i == len(rep.Files)-1
				if dev := math.Abs(float64(sum-T)) / T; (!last && dev > 0.01) || (last && float64(sum) > T*1.01) {
					t.Errorf("shard %d: %d tokens, want %d ±1%%", i, sum, T)
				}
				if last && float64(sum) < T*0.99 {
					continue
				}
				for src, w := range shares {
					got := float64(per[src]) / float64(sum)
					worst = max(worst, math.Abs(got-w))
					if math.Abs(got-w) > 0.02 {
						t.Errorf("shard %d: %s share %.4f, target %.2f", i, src, got, w)
					}
					if per[src] != f.SourceTokens[src] {
						t.Errorf("shard %d: report %s %d tokens, file %d", i, src, f.SourceTokens[src], per[src])
					}
				}
				// Interleaved, not concatenated: no source holds a long run.
				run, maxRun := 1, 1
				for j := 1; j < len(lines); j++ {
					if lines[j].Source == lines[j-1].Source {
						run++
						maxRun = max(maxRun, run)
					} else {
						run = 1
					}
				}
				if maxRun > len(lines)/2 {
					t.Errorf("shard %d: a run of %d lines from one source out of %d", i, maxRun, len(lines))
				}
			}
			if total != rep.Tokens || total != rep.Mix.TokensUsed {
				t.Errorf("total %d, report %d, mix %d", total, rep.Tokens, rep.Mix.TokensUsed)
			}
			for _, s := range rep.Mix.Sources {
				if s.Used > s.Available {
					t.Errorf("%s used %d > available %d without a budget", s.Source, s.Used, s.Available)
				}
				if math.Abs(s.ShareUsed-shares[s.Source]) > 0.01 {
					t.Errorf("%s overall share %.4f, target %.2f", s.Source, s.ShareUsed, shares[s.Source])
				}
			}
			// The scarcest source (relative to its share) is used up.
			limit := 0.0
			for _, s := range rep.Mix.Sources {
				limit = max(limit, s.Epochs)
			}
			if limit < 0.97 {
				t.Errorf("no source is used up: epochs %+v", rep.Mix.Sources)
			}
		})
	}
}

// Determinism: the output depends on the seed and the documents, not on
// the order documents arrive in (so not on the number of workers either),
// and not on the memory budget that decides how reordering spills.
func TestMixDeterministic(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	shares := map[string]float64{"manuals": 0.4, "forum": 0.4, "dealer": 0.2}
	docs := corpus(11, tok)
	opt := Options{Tokenizer: tok, ShardTokens: 5000, Mix: shares, Seed: 3, TokenFiles: true}
	rep1, run1 := build(t, docs, opt)
	shuffled := slices.Clone(docs)
	rand.New(rand.NewPCG(9, 9)).Shuffle(len(shuffled), func(i, j int) { shuffled[i], shuffled[j] = shuffled[j], shuffled[i] })
	opt2 := opt
	opt2.MemoryBudget = 40 << 10 // many bucket files
	rep2, run2 := build(t, shuffled, opt2)
	a, b := shardBytes(t, run1, rep1), shardBytes(t, run2, rep2)
	if len(a) != len(b) {
		t.Fatalf("%d vs %d shards", len(a), len(b))
	}
	for i := range a {
		if !bytes.Equal(a[i], b[i]) {
			t.Fatalf("shard %d differs between input orders / memory budgets", i)
		}
		if rep1.Files[i].XXH3 != rep2.Files[i].XXH3 || rep1.Files[i].TokenFile.XXH3 != rep2.Files[i].TokenFile.XXH3 {
			t.Fatalf("shard %d digests differ", i)
		}
	}
	opt3 := opt
	opt3.Seed = 4
	rep3, run3 := build(t, docs, opt3)
	c := shardBytes(t, run3, rep3)
	if bytes.Equal(a[0], c[0]) {
		t.Error("a different seed gives the same first shard")
	}
}

// With a budget above what the scarce source holds, max_epochs repeats
// whole documents of that source, and never beyond max_epochs.
func TestMixUpsampleAndCap(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(21, tok)
	avail := map[string]int64{}
	var all int64
	for _, d := range docs {
		avail[d.Source] += int64(d.Tokens)
		all += int64(d.Tokens)
	}
	shares := map[string]float64{"manuals": 0.4, "forum": 0.3, "dealer": 0.3}
	budget := all // dealer (small) needs 0.3·all tokens: several passes
	rep, run := build(t, docs, Options{Tokenizer: tok, ShardTokens: 8000, Mix: shares, BudgetTokens: budget, MaxEpochs: 10, Seed: 1})
	if rep.Mix.Mode != "upsampled" {
		t.Fatalf("mode %q, want upsampled (%s)", rep.Mix.Mode, rep.Mix.Note)
	}
	if math.Abs(float64(rep.Tokens-budget))/float64(budget) > 0.01 {
		t.Errorf("tokens %d, budget %d", rep.Tokens, budget)
	}
	seen := map[string]int{}
	for _, f := range rep.Files {
		for _, l := range readShard(t, filepath.Join(run, f.Path)) {
			seen[strings.Split(l.ID, "~")[0]]++
		}
	}
	for _, s := range rep.Mix.Sources {
		if s.Source == "dealer" && s.Epochs <= 1.5 {
			t.Errorf("dealer epochs %.3f, want > 1.5", s.Epochs)
		}
		if s.Epochs > 10 {
			t.Errorf("%s epochs %.3f > max_epochs", s.Source, s.Epochs)
		}
	}
	repeats := 0
	for _, n := range seen {
		if n > 1 {
			repeats++
		}
	}
	if repeats == 0 {
		t.Error("no document repeated")
	}

	// max_epochs 1: the same budget cannot be met; the total is capped.
	rep2, _ := build(t, docs, Options{Tokenizer: tok, ShardTokens: 8000, Mix: shares, BudgetTokens: budget, MaxEpochs: 1, Seed: 1})
	if rep2.Mix.Mode != "capped" || rep2.Tokens >= budget*9/10 {
		t.Errorf("mode %q tokens %d (budget %d): want capped well below", rep2.Mix.Mode, rep2.Tokens, budget)
	}
	for _, s := range rep2.Mix.Sources {
		if s.Used > s.Available {
			t.Errorf("%s used %d > available %d at max_epochs 1", s.Source, s.Used, s.Available)
		}
	}
}

// Without a mix the shards keep input order, hold shard_tokens ±1%, and
// long documents are split at paragraph boundaries into pieces that
// concatenate back to the original, each split recorded.
func TestInOrderShardsAndSplits(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	r := rand.New(rand.NewPCG(2, 2))
	var docs []Doc
	for i := 0; i < 120; i++ {
		p := 1 + r.IntN(4)
		if i%25 == 0 {
			p = 90 // longer than a shard
		}
		text := yardDoc(r, p)
		docs = append(docs, Doc{ID: fmt.Sprint("d", i), Text: text, Source: "manuals", Tokens: tok.Count(text)})
	}
	const T = 3000
	rep, run := build(t, docs, Options{Tokenizer: tok, ShardTokens: T, MetaKeys: []string{}})
	var got []line
	for i, f := range rep.Files {
		lines := readShard(t, filepath.Join(run, f.Path))
		var sum int64
		for _, l := range lines {
			sum += int64(l.Tokens)
		}
		if i < len(rep.Files)-1 && math.Abs(float64(sum-T)) > T/100 {
			t.Errorf("shard %d: %d tokens", i, sum)
		}
		got = append(got, lines...)
	}
	// Reassemble: pieces of a document are consecutive and concatenate.
	var rebuilt []string
	var ids []string
	for _, l := range got {
		base := strings.SplitN(strings.SplitN(l.ID, "#", 2)[0], "~", 2)[0]
		if len(ids) > 0 && ids[len(ids)-1] == base {
			rebuilt[len(rebuilt)-1] += l.Text
			continue
		}
		ids = append(ids, base)
		rebuilt = append(rebuilt, l.Text)
	}
	if len(rebuilt) != len(docs) {
		t.Fatalf("%d documents after reassembly, want %d", len(rebuilt), len(docs))
	}
	for i, d := range docs {
		if ids[i] != d.ID || rebuilt[i] != d.Text {
			t.Fatalf("document %d (%s) not preserved in order", i, d.ID)
		}
	}
	long := 0
	for _, s := range rep.Splits {
		if s.Reason == "long_document" {
			long++
			if s.Rule != "split_paragraphs" {
				t.Errorf("%s split by %s", s.Doc, s.Rule)
			}
		}
	}
	if long != 5 {
		t.Errorf("%d long-document splits, want 5", long)
	}

	// A budget without a mix keeps a prefix of the input.
	rep2, run2 := build(t, docs, Options{Tokenizer: tok, ShardTokens: T, BudgetTokens: 5000})
	if math.Abs(float64(rep2.Tokens-5000)) > 300 {
		t.Errorf("budget 5000: wrote %d tokens", rep2.Tokens)
	}
	if rep2.BudgetLeftOut == 0 || rep2.DocsWritten+rep2.BudgetLeftOut != int64(len(docs)) {
		t.Errorf("budget 5000: %d documents written + %d left out != %d", rep2.DocsWritten, rep2.BudgetLeftOut, len(docs))
	}
	if rep.DocsWritten != int64(len(docs)) || rep.Docs <= rep.DocsWritten {
		t.Errorf("no budget: %d documents written as %d lines, want %d documents as more lines (splits)", rep.DocsWritten, rep.Docs, len(docs))
	}
	// Each document past the budget is reported left out, in input
	// order, with the budget as its reason: the run turns these into
	// ledger records, so nothing leaves without a word.
	rep3, _, left := buildLeftOut(t, docs, Options{Tokenizer: tok, ShardTokens: T, BudgetTokens: 5000})
	if int64(len(left)) != rep3.BudgetLeftOut || rep3.BudgetLeftOut != rep2.BudgetLeftOut {
		t.Errorf("budget 5000: %d left-out calls, %d counted (without callback %d)", len(left), rep3.BudgetLeftOut, rep2.BudgetLeftOut)
	}
	for i, l := range left {
		want := docs[len(docs)-len(left)+i]
		if l.Doc != want.ID || l.Bytes != len(want.Text) || l.Tokens <= 0 || l.Reason != "total capped at budget_tokens 5000" {
			t.Errorf("left out #%d: %+v, want document %s (%d bytes) with the budget as reason", i, l, want.ID, len(want.Text))
		}
	}
	first := readShard(t, filepath.Join(run2, rep2.Files[0].Path))
	if first[0].ID != docs[0].ID && !strings.HasPrefix(first[0].ID, docs[0].ID+"#") {
		t.Errorf("budget output starts with %s", first[0].ID)
	}
}

// Token files hold exactly the tokenizer's ids of each line, in the
// declared width, at the offsets of the index.
func TestTokenFiles(t *testing.T) {
	for _, enc := range []string{"cl100k_base", "r50k_base"} {
		tok := mustLoad(t, enc)
		docs := corpus(5, tok)[:80]
		rep, run := build(t, docs, Options{Tokenizer: tok, ShardTokens: 4000, TokenFiles: true})
		for _, f := range rep.Files {
			tf := f.TokenFile
			if tf == nil {
				t.Fatal("no token file")
			}
			wantDtype := "uint32"
			if enc == "r50k_base" {
				wantDtype = "uint16"
			}
			if tf.Dtype != wantDtype {
				t.Errorf("%s dtype %s, want %s", enc, tf.Dtype, wantDtype)
			}
			raw, err := os.ReadFile(filepath.Join(run, tf.Path))
			if err != nil {
				t.Fatal(err)
			}
			var idx tokenIndex
			ib, err := os.ReadFile(filepath.Join(run, tf.Index))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(ib, &idx); err != nil {
				t.Fatal(err)
			}
			lines := readShard(t, filepath.Join(run, f.Path))
			if idx.Docs != len(lines) || len(idx.Offsets) != len(lines)+1 {
				t.Fatalf("index docs %d offsets %d, shard %d lines", idx.Docs, len(idx.Offsets), len(lines))
			}
			width := 4
			if tf.Dtype == "uint16" {
				width = 2
			}
			if int64(len(raw)) != idx.Tokens*int64(width) || idx.Tokens != f.Tokens {
				t.Fatalf("bin %d bytes, index %d tokens, shard %d tokens", len(raw), idx.Tokens, f.Tokens)
			}
			for i, l := range lines {
				want := tok.Encode(l.Text, nil)
				var got []uint32
				for k := idx.Offsets[i]; k < idx.Offsets[i+1]; k++ {
					if width == 2 {
						got = append(got, uint32(binary.LittleEndian.Uint16(raw[k*2:])))
					} else {
						got = append(got, binary.LittleEndian.Uint32(raw[k*4:]))
					}
				}
				if idx.IDs[i] != l.ID || !slices.Equal(got, want) {
					t.Fatalf("%s line %d: ids differ", f.Path, i)
				}
			}
		}
	}
}

// Without a tokenizer shards are cut by uncompressed bytes, in order.
func TestByteShards(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 4))
	var docs []Doc
	for i := 0; i < 200; i++ {
		docs = append(docs, Doc{ID: fmt.Sprint("b", i), Text: yardDoc(r, 2), Source: "forum", Meta: map[string]any{"lang": "en", "x": 1}})
	}
	rep, run := build(t, docs, Options{ShardBytes: 8 << 10, MetaKeys: []string{"lang"}})
	if len(rep.Files) < 5 {
		t.Fatalf("%d shards", len(rep.Files))
	}
	n := 0
	for _, f := range rep.Files {
		raw, _ := os.ReadFile(filepath.Join(run, f.Path))
		dec, _ := zstd.NewReader(bytes.NewReader(raw))
		plain, err := io.ReadAll(dec)
		dec.Close()
		if err != nil {
			t.Fatal(err)
		}
		if bytes.Contains(plain, []byte(`"x":`)) || !bytes.Contains(plain, []byte(`"lang":"en"`)) {
			t.Fatal("meta_keys not applied")
		}
		for _, l := range readShard(t, filepath.Join(run, f.Path)) {
			if l.ID != docs[n].ID {
				t.Fatalf("order: %s at %d", l.ID, n)
			}
			n++
		}
	}
	if n != len(docs) {
		t.Fatalf("%d lines, want %d", n, len(docs))
	}
	if _, err := NewBuilder(Options{Dir: t.TempDir(), Mix: map[string]float64{"a": 1}}); err == nil {
		t.Error("mix without tokenizer accepted")
	}
}

func TestMixMissingSource(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(1, tok)[:50]
	run := t.TempDir()
	b, err := NewBuilder(Options{Dir: filepath.Join(run, "shards"), TempDir: run, Tokenizer: tok, Mix: map[string]float64{"manuals": 0.5, "nosuch": 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	for i := range docs {
		b.Add(&docs[i])
	}
	// A source whose documents were all removed does not cost the run:
	// the others are mixed at their relative shares and the report says
	// which source had nothing.
	rep, err := b.Close()
	if err != nil {
		t.Fatalf("missing mix source: %v", err)
	}
	mix := rep.Mix
	if mix == nil || !slices.Equal(mix.Missing, []string{"nosuch"}) || !strings.Contains(mix.Note, "source(s) nosuch have no surviving tokens") {
		t.Fatalf("report %+v", mix)
	}
	for _, src := range mix.Sources {
		if src.Source == "manuals" && (src.Share != 1 || src.ShareUsed != 1 || src.Used == 0) {
			t.Errorf("manuals: %+v", src)
		}
	}
}

func TestPlanCuts(t *testing.T) {
	// 10 units of 100 tokens, shards of 250: cuts at 250/500/750 fall mid-unit.
	ts := slices.Repeat([]int64{100}, 10)
	cuts := planCuts(ts, 250)
	want := []cut{{2, 50}, {4, 100}, {7, 50}}
	if !slices.Equal(cuts, want) {
		t.Errorf("cuts %v, want %v", cuts, want)
	}
	// A tiny remainder joins the last shard.
	if c := planCuts(slices.Repeat([]int64{1}, 2002), 1000); len(c) != 1 {
		t.Errorf("cuts %v, want one", c)
	}
}

// Nothing is left out without a word: a source absent from the mix and a
// source with share 0 are left out whole, the capped sources lose what
// the scarcest one cannot balance, and for every source used + left out
// is what was available.
func TestMixLeftOut(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(21, tok)
	shares := map[string]float64{"manuals": 0.5, "forum": 0.5, "dealer": 0}
	var srcs []string
	for _, d := range docs {
		if !slices.Contains(srcs, d.Source) {
			srcs = append(srcs, d.Source)
		}
	}
	rep, _ := build(t, append(docs, Doc{ID: "extra-1", Text: "An extra source.", Source: "mail", Tokens: 4}), Options{Tokenizer: tok, ShardTokens: 8000, Mix: shares, Seed: 1})
	lines := rep.Mix.LeftOutLines()
	why := map[string]string{}
	for _, s := range rep.Mix.Sources {
		if s.Used+s.LeftOut != s.Available {
			t.Errorf("%s: used %d + left out %d != available %d", s.Source, s.Used, s.LeftOut, s.Available)
		}
		why[s.Source] = s.LeftOutWhy
	}
	if why["mail"] != "not in mix (add it with a share to use it)" || why["dealer"] != "share 0 in mix" {
		t.Errorf("reasons %q", why)
	}
	capped := 0
	for _, src := range []string{"manuals", "forum"} {
		if strings.HasPrefix(why[src], "total capped at ") {
			capped++
		}
	}
	if capped != 1 || len(lines) < 3 {
		t.Errorf("want one capped source and one scarcest: %q\n%s", why, strings.Join(lines, "\n"))
	}
}

// shuffle: without a mix, documents arriving source by source are spread
// over the shards by a keyed hash of their ids: every document once, the
// first shard holds more than one source, the bytes do not depend on the
// order documents arrive in (so not on workers), and the seed changes
// the order.
func TestShuffleWithoutMix(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(5, tok)
	slices.SortStableFunc(docs, func(a, b Doc) int { return strings.Compare(a.Source, b.Source) })
	sources := func(rep *Report, run string, i int) map[string]bool {
		out := map[string]bool{}
		for _, l := range readShard(t, filepath.Join(run, rep.Files[i].Path)) {
			out[l.Source] = true
		}
		return out
	}
	plain, runP := build(t, docs, Options{Tokenizer: tok, ShardTokens: 4000})
	if n := len(sources(plain, runP, 0)); n != 1 {
		t.Fatalf("input order: first shard has %d sources, want 1 (docs sorted by source)", n)
	}
	opt := Options{Tokenizer: tok, ShardTokens: 4000, Shuffle: true, Seed: 7}
	rep, run := build(t, docs, opt)
	if n := len(sources(rep, run, 0)); n < 2 {
		t.Errorf("shuffled: first shard has %d source(s)", n)
	}
	seen := map[string]int{}
	text := map[string]string{}
	for _, f := range rep.Files {
		for _, l := range readShard(t, filepath.Join(run, f.Path)) {
			id, piece, _ := strings.Cut(l.ID, "~") // cut at a shard boundary: ID~1, ID~2
			if piece == "" || piece == "1" {
				seen[id]++
			}
			text[id] += l.Text
		}
	}
	for _, d := range docs {
		if seen[d.ID] != 1 || strings.Join(strings.Fields(text[d.ID]), " ") != strings.Join(strings.Fields(d.Text), " ") {
			t.Fatalf("document %s written %d times, or not whole", d.ID, seen[d.ID])
		}
	}
	if len(seen) != len(docs) || rep.Mix != nil {
		t.Errorf("%d of %d documents; mix report %v", len(seen), len(docs), rep.Mix)
	}
	rev := slices.Clone(docs)
	slices.Reverse(rev)
	rep2, run2 := build(t, rev, opt)
	a, b := shardBytes(t, run, rep), shardBytes(t, run2, rep2)
	if len(a) != len(b) {
		t.Fatalf("%d vs %d shards", len(a), len(b))
	}
	for i := range a {
		if !bytes.Equal(a[i], b[i]) {
			t.Fatalf("shard %d depends on arrival order", i)
		}
	}
	opt.Seed = 8
	rep3, run3 := build(t, docs, opt)
	if bytes.Equal(a[0], shardBytes(t, run3, rep3)[0]) {
		t.Error("another seed gives the same first shard")
	}
}

// Every document the mix places nowhere is reported once, in input order,
// and the reported and the written documents are all the documents, split
// ones counted once (whatever mix of long and short documents). A split
// document the mix wrote only in part is reported with the pieces left
// out: its written text plus the left-out bytes is its whole text, so no
// byte vanishes unrecorded. The report's counts agree with the shards:
// DocsWritten documents, Docs lines, TextBytes bytes of text.
func TestMixReportsLeftOut(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(3, tok)
	partial := 0
	// split_tokens 10 splits nearly every document, so a source's
	// selection ends inside one (a partly written document).
	for _, split := range []int64{0, 10} {
		partial += checkLeftOut(t, docs, Options{Tokenizer: tok, Name: "lo", SplitTokens: split,
			ShardTokens: 2000, Mix: map[string]float64{"manuals": 0.2, "forum": 0.6, "dealer": 0.2}})
	}
	if partial == 0 {
		t.Error("no document partly left out: the case is not exercised")
	}
}

// checkLeftOut builds docs with opt, checks the left-out reports against
// the shards and returns how many documents were partly left out.
func checkLeftOut(t *testing.T, docs []Doc, opt Options) int {
	t.Helper()
	rep, run, all := buildLeftOut(t, docs, opt)
	written := map[string]bool{}
	writtenBytes := map[string]int{}
	var lines, textBytes int64
	for _, f := range rep.Files {
		for _, l := range readShard(t, filepath.Join(run, f.Path)) {
			id, _, _ := strings.Cut(l.ID, "#")
			id, _, _ = strings.Cut(id, "~")
			written[id] = true
			writtenBytes[id] += len(l.Text)
			lines++
			textBytes += int64(len(l.Text))
		}
	}
	if rep.DocsWritten != int64(len(written)) || rep.Docs != lines || rep.TextBytes != textBytes {
		t.Errorf("report: %d documents, %d lines, %d bytes; shards: %d, %d, %d",
			rep.DocsWritten, rep.Docs, rep.TextBytes, len(written), lines, textBytes)
	}
	var left []LeftOut
	partial := 0
	for _, l := range all {
		if l.Pieces == nil {
			left = append(left, l)
			continue
		}
		partial++
		d := docs[slices.IndexFunc(docs, func(d Doc) bool { return d.ID == l.Doc })]
		if !written[l.Doc] {
			t.Errorf("%s partly left out but not written", l.Doc)
		}
		if got := writtenBytes[l.Doc] + l.Bytes; got != len(d.Text) {
			t.Errorf("%s: %d bytes written + %d left out != %d", l.Doc, writtenBytes[l.Doc], l.Bytes, len(d.Text))
		}
	}
	byID := map[string]Doc{}
	order := map[string]int{}
	for i, d := range docs {
		byID[d.ID], order[d.ID] = d, i
	}
	seen := map[string]bool{}
	for i, l := range left {
		d, ok := byID[l.Doc]
		switch {
		case !ok:
			t.Fatalf("left out %q is no input document", l.Doc)
		case written[l.Doc]:
			t.Errorf("%s both written and left out", l.Doc)
		case seen[l.Doc]:
			t.Errorf("%s left out twice", l.Doc)
		case l.Source != d.Source || l.File != d.File || l.Line != d.Line:
			t.Errorf("%s: %+v, input %s %s:%d", l.Doc, l, d.Source, d.File, d.Line)
		case i > 0 && order[l.Doc] < order[left[i-1].Doc]:
			t.Errorf("%s reported out of input order", l.Doc)
		}
		seen[l.Doc] = true
	}
	if len(left) == 0 || len(left)+len(written) != len(docs) {
		t.Errorf("%d left out + %d written != %d documents", len(left), len(written), len(docs))
	}
	return partial
}

// A shuffled output cut by budget_tokens reports each document it leaves
// out, with the budget as the reason, and a mix reports its source's
// left_out_reason: the ledger's record says why, not only that.
func TestLeftOutReason(t *testing.T) {
	tok := mustLoad(t, "cl100k_base")
	docs := corpus(3, tok)
	for _, opt := range []Options{
		{Tokenizer: tok, ShardTokens: 2000, Shuffle: true, Seed: 3, BudgetTokens: 3000},
		{Tokenizer: tok, ShardTokens: 2000, Mix: map[string]float64{"manuals": 0.2, "forum": 0.6, "dealer": 0.2}},
	} {
		opt.Name = "why"
		rep, _, left := buildLeftOut(t, docs, opt)
		if len(left) == 0 {
			t.Fatalf("shuffle %v: nothing left out", opt.Shuffle)
		}
		for _, l := range left {
			want := "total capped at budget_tokens 3000"
			if rep.Mix != nil {
				for _, s := range rep.Mix.Sources {
					if s.Source == l.Source {
						want = s.LeftOutWhy
					}
				}
			}
			if l.Reason == "" || l.Reason != want {
				t.Errorf("shuffle %v: %s left out with reason %q, want %q", opt.Shuffle, l.Doc, l.Reason, want)
			}
		}
	}
}
