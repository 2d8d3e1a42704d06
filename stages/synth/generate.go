package synth

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"time"

	"winnow/stages/fsio"
)

// How Generate works. Sources are generated one after another in corpus
// order (manuals, forum, dealer, web); inside a source, files fill one
// after another. Corpus order is therefore generation order, and a spec
// that lists the sources' globs in this order reads documents in exactly
// the order of truth.jsonl. Copies are planted from a bounded reservoir of
// earlier originals (uniform reservoir sampling), so every copy comes after
// its original in corpus order and memory does not grow with corpus size:
// the generator holds one document, the reservoir, the eval set and (unless
// Options.OmitTruthDocs) the returned truth records.
//
// Every random choice comes from one PCG stream seeded by Options.Seed, in
// a fixed order; output never depends on time, map order or the format
// (the same seed gives the same documents in every format; only Bytes mode
// stops at a format-dependent count, since it measures serialized bytes).

// Sources are the corpus sources in corpus order.
var Sources = []string{"manuals", "forum", "dealer", "web"}

// Document kinds recorded in TruthDoc.Kind.
const (
	KindManual    = "manual"
	KindForum     = "forum"
	KindDealer    = "dealer"
	KindSpam      = "spam"
	KindForeign   = "foreign"
	KindJunk      = "junk"
	KindExactCopy = "exact_copy"
	KindNearCopy  = "near_copy"
)

// Tuning constants of the corpus mix.
const (
	// reservoirSize originals are kept for copy planting: enough variety
	// for copies of many different documents, a few MB of text at most.
	reservoirSize = 256
	// defaultDocs is the corpus size when neither Docs nor Bytes is set.
	defaultDocs = 1000
	// defaultNearJaccard is the similarity of the main near copies.
	defaultNearJaccard = 0.9
	// minDocsPerFile keeps every corpus file non-empty.
	minDocsPerFile = 1
	// evalPerDocs sizes the eval set: one item per this many documents,
	// clamped to [evalMin, evalMax] (about 100 to 300 items).
	evalPerDocs = 10
	evalMin     = 100
	evalMax     = 300
	// leakShare of the eval items are planted into forum posts, at most
	// one leak thread per leakForumEvery forum originals.
	leakShare      = 0.25
	leakForumEvery = 3
	// leakPairEvery: every leakPairEvery-th leak thread carries two items.
	leakPairEvery = 5
	// dateBase and dateSpan bound document dates (2018-01-01 + 6 years).
	dateBase = 1514764800
	dateSpan = 6 * 365 * 86400
)

// sourceShare is each source's share of documents (Docs) or bytes (Bytes).
var sourceShare = []float64{0.30, 0.30, 0.15, 0.25}

// Per-source kind mix: cumulative probabilities of exact and near copies;
// the rest are the source's own originals (web: spam, foreign, junk).
var copyRates = [][2]float64{
	{0.04, 0.06}, // manuals
	{0.04, 0.06}, // forum
	{0.05, 0.05}, // dealer
	{0.10, 0.08}, // web: mirrors of pages from every source
}

// Web originals: shares of spam, foreign and junk among them.
var webMix = []float64{0.36, 0.42, 0.22}

// Near-copy targets: the main share at Options.NearJaccard, the rest at
// lower similarities so dedup tests can check false positives.
var (
	lowJaccards   = []float64{0.5, 0.3}
	nearMainShare = 0.7
)

const (
	// nearMinWords: originals of near copies have at least this many words
	// (one edit then moves the similarity by about 0.03 at most).
	nearMinWords = 300
	// nearPickTries reservoir entries are tried for a long enough original.
	nearPickTries = 6
)

// avgRecordBytes estimates the serialized size of a document, to size the
// eval set and leak schedule when only Bytes is given (measured on
// generated corpora; exactness is not needed).
var avgRecordBytes = []float64{6300, 1950, 1800, 1350}

// record is one generated document on its way to a corpus file.
type record struct {
	id, source, kind, url, date, lang string
	copyOf, detail, leak, recordID    string
	text                              []byte
	jaccard, target                   float64
	evalItems                         []string
	file                              string
	line                              int
}

// resEntry is a reservoir original.
type resEntry struct {
	id, lang, kind string
	text           []byte
}

// generator is the state of one Generate call.
type generator struct {
	o     Options
	g     *gen
	ne    nearEditor
	res   []resEntry
	seen  int // originals offered to the reservoir
	seq   int // global document number
	evals []EvalItem
	// leak schedule
	leakOrder  []int   // eval item indexes in planting order
	leakNext   int     // next index into leakOrder
	leakThread int     // leak threads planted
	leakStride float64 // forum originals between leak threads
	leakMax    int     // leak threads planned
	forumOrig  int     // forum originals generated so far
	nearBuf    []byte
	rec        record
}

func (o *Options) normalize() error {
	if o.Dir == "" {
		return errors.New("synth: Options.Dir is empty")
	}
	if o.Format == "" {
		o.Format = FormatJSONLZstd
	}
	ok := false
	for _, f := range Formats {
		ok = ok || f == o.Format
	}
	if !ok {
		return fmt.Errorf("synth: unknown format %q (want one of jsonl.zst, jsonl.gz, txt, warc)", o.Format)
	}
	if o.NearJaccard == 0 {
		o.NearJaccard = defaultNearJaccard
	}
	if !(o.NearJaccard > 0 && o.NearJaccard < 1) {
		return fmt.Errorf("synth: NearJaccard %v out of range (0, 1)", o.NearJaccard)
	}
	if o.Files == 0 {
		o.Files = 1
	}
	if o.Files < 0 || o.Files > 99999 {
		return fmt.Errorf("synth: Files %d out of range [1, 99999]", o.Files)
	}
	if o.Docs < 0 || o.Bytes < 0 {
		return errors.New("synth: Docs and Bytes must not be negative")
	}
	if o.Docs > 0 && o.Bytes > 0 {
		return errors.New("synth: set Docs or Bytes, not both")
	}
	if o.Docs == 0 && o.Bytes == 0 {
		o.Docs = defaultDocs
	}
	return nil
}

// Generate writes a synthetic corpus to opts.Dir and returns what it
// planted. Layout:
//
//	Dir/<source>/<source>-00000.<ext>   corpus files (.jsonl.zst, .jsonl.gz, .warc.gz)
//	Dir/evals/hull-qa.jsonl             the held-out eval set
//	Dir/truth.jsonl                     one TruthDoc per document, in corpus order
//	Dir/gen.json                        options, counts and sizes of the corpus
//
// (txt: Dir/<source>/<id>.txt, one file per document.) With Docs set,
// sources get 30/30/15/25% of the documents (at least Files per source);
// with Bytes set they get that share of the uncompressed serialized bytes.
// Corpus files of an earlier Generate in the same Dir (same naming
// pattern) that this call does not rewrite are removed first, so globs
// over Dir/<source>/ see only this corpus.
func Generate(opts Options) (*Truth, error) {
	if err := opts.normalize(); err != nil {
		return nil, err
	}
	if err := os.MkdirAll(opts.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("synth: %w", err)
	}
	gn := &generator{o: opts, g: newGen(opts.Seed)}
	truth := &Truth{Files: map[string][]string{}, Counts: map[string]int{}, SourceBytes: map[string]int64{}}

	// Plan sizes.
	counts := make([]int, len(Sources))
	budgets := make([]int64, len(Sources))
	var expected, forumExpected float64
	if opts.Docs > 0 {
		cum := 0.0
		prev := 0
		for i, s := range sourceShare {
			cum += s
			c := int(math.Round(cum * float64(opts.Docs)))
			counts[i] = max(c-prev, opts.Files*minDocsPerFile)
			prev = c
			expected += float64(counts[i])
		}
		forumExpected = float64(counts[1])
	} else {
		for i, s := range sourceShare {
			budgets[i] = max(int64(s*float64(opts.Bytes)), 1)
			n := float64(budgets[i]) / avgRecordBytes[i]
			expected += n
			if i == 1 {
				forumExpected = n
			}
		}
	}
	forumOrigExpected := forumExpected * (1 - copyRates[1][0] - copyRates[1][1])

	// Eval set and leak schedule.
	nEval := min(max(int(expected)/evalPerDocs, evalMin), evalMax)
	gn.evals = gn.g.makeEvals(nEval)
	gn.leakOrder = gn.g.r.Perm(nEval)
	wantItems := int(float64(nEval) * leakShare)
	gn.leakMax = min(wantItems*leakPairEvery/(leakPairEvery+1), int(forumOrigExpected)/leakForumEvery)
	if gn.leakMax > 0 {
		gn.leakStride = forumOrigExpected * 0.9 / float64(gn.leakMax)
	}
	evalPath := filepath.Join(opts.Dir, "evals", EvalName+".jsonl")
	if err := writeEvals(evalPath, gn.evals); err != nil {
		return nil, err
	}
	truth.EvalPath = evalPath

	tf, err := fsio.CreateAtomic(filepath.Join(opts.Dir, "truth.jsonl"))
	if err != nil {
		return nil, fmt.Errorf("synth: %w", err)
	}
	defer tf.Abort()

	ext := fileExt(opts.Format)
	files := opts.Files
	if opts.Format == FormatTxt {
		files = 1 // one file per document anyway
	}
	var total int64
	for si, src := range Sources {
		// Corpus files of an earlier Generate that this one will not
		// replace go first, so globs over the source see only this corpus.
		keep := map[string]bool{}
		for fi := 0; fi < files && opts.Format != FormatTxt; fi++ {
			keep[src+"-"+string(appendPadded(nil, int64(fi), 5))+ext] = true
		}
		if err := removeStale(filepath.Join(opts.Dir, src), src, keep); err != nil {
			return nil, err
		}
		var srcRaw int64
		done := 0
		for fi := 0; fi < files; fi++ {
			name := src + "-" + string(appendPadded(nil, int64(fi), 5)) + ext
			rel := filepath.ToSlash(filepath.Join(src, name))
			w, err := newCorpusWriter(opts.Format, opts.Dir, rel, opts.Seed)
			if err != nil {
				return nil, fmt.Errorf("synth: %s: %w", rel, err)
			}
			line := 0
			for {
				if opts.Docs > 0 {
					if done >= counts[si]*(fi+1)/files {
						break
					}
				} else if line >= minDocsPerFile && srcRaw+w.raw() >= budgets[si]*int64(fi+1)/int64(files) {
					break
				}
				rec := gn.next(si)
				line++
				rec.line = line
				f, err := w.write(rec)
				if err != nil {
					w.abort()
					return nil, fmt.Errorf("synth: %w", err)
				}
				rec.file = f
				if opts.Format == FormatTxt {
					rec.line = 1
				}
				td := rec.truth()
				if err := writeTruthLine(tf, &td); err != nil {
					w.abort()
					return nil, fmt.Errorf("synth: truth.jsonl: %w", err)
				}
				if !opts.OmitTruthDocs {
					truth.Docs = append(truth.Docs, td)
				}
				truth.Counts[rec.kind]++
				truth.NumDocs++
				done++
			}
			srcRaw += w.raw()
			if err := w.commit(); err != nil {
				return nil, fmt.Errorf("synth: %w", err)
			}
			if opts.Format == FormatTxt {
				truth.Files[src] = append(truth.Files[src], filepath.Join(opts.Dir, src))
			} else {
				truth.Files[src] = append(truth.Files[src], filepath.Join(opts.Dir, filepath.FromSlash(rel)))
			}
		}
		truth.SourceBytes[src] = srcRaw
		total += srcRaw
	}
	truth.Bytes = total
	truth.EvalItems = len(gn.evals)
	if err := tf.Commit(); err != nil {
		return nil, fmt.Errorf("synth: truth.jsonl: %w", err)
	}
	if err := writeGenInfo(filepath.Join(opts.Dir, "gen.json"), opts, truth); err != nil {
		return nil, err
	}
	return truth, nil
}

// next generates the next document of source si.
func (gn *generator) next(si int) *record {
	g := gn.g
	r := &gn.rec
	*r = record{source: Sources[si], lang: "en", evalItems: r.evalItems[:0]}
	r.id = Sources[si] + "-" + string(appendPadded(nil, int64(gn.seq), 8))
	gn.seq++
	r.date = time.Unix(dateBase+g.r.Int64N(dateSpan), 0).UTC().Format(time.RFC3339)

	x := g.r.Float64()
	rates := copyRates[si]
	switch {
	case x < rates[0] && len(gn.res) > 0:
		gn.exactCopy(r)
	case x < rates[0]+rates[1] && len(gn.res) > 0:
		if !gn.nearCopy(r) {
			gn.exactCopy(r)
		}
	default:
		gn.original(si, r)
	}
	if gn.o.Format == FormatWARC {
		r.recordID = recordID(gn.o.Seed, r.id)
	}
	return r
}

// original generates a source's own document and offers it to the
// reservoir.
func (gn *generator) original(si int, r *record) {
	g := gn.g
	g.reset()
	switch si {
	case 0:
		r.kind = KindManual
		g.manual()
		r.url = "https://docs.larkspur-marine.example/manuals/" + r.id
	case 1:
		r.kind = KindForum
		var leak []byte
		if gn.leakThread < gn.leakMax && float64(gn.forumOrig) >= (float64(gn.leakThread)+0.5)*gn.leakStride {
			leak = gn.plantLeak(r)
		}
		gn.forumOrig++
		g.reset() // plantLeak draws from the same stream but builds its own buffer
		g.forumThread(leak)
		r.url = "https://forum.larkspur-marine.example/t/" + r.id
	case 2:
		r.kind = KindDealer
		g.dealerPage()
		r.url = "https://" + g.dealer.domain + "/pages/" + r.id
	default:
		x := g.r.Float64()
		switch {
		case x < webMix[0]:
			r.kind = KindSpam
			r.detail = spamKinds[g.intn(len(spamKinds))]
			g.spam(r.detail)
			r.url = "https://" + spamDomains[g.intn(len(spamDomains))] + "/" + r.id
		case x < webMix[0]+webMix[1]:
			r.kind = KindForeign
			r.lang = foreignLangs[g.intn(len(foreignLangs))]
			g.foreign(r.lang)
			r.url = "https://" + foreignDomain(r.lang) + "/" + r.id
		default:
			r.kind = KindJunk
			g.junk()
			r.url = "https://" + junkDomains[g.intn(len(junkDomains))] + "/p/" + r.id
		}
	}
	r.text = g.b
	if r.leak == "" && r.kind != KindJunk {
		gn.offer(r)
	}
}

var (
	spamDomains  = []string{"best-boat-deals.example", "cheap-marine-parts.example", "yacht-bargains.example"}
	junkDomains  = []string{"boatlinks.example", "marine-directory.example", "harbour-news.example"}
	mirrorDomain = []string{"mirror1.boatarchive.example", "mirror2.boatarchive.example", "cache.sailingpages.example"}
)

func foreignDomain(lang string) string {
	switch lang {
	case "de":
		return "bootsforum.example"
	case "fr":
		return "forum-nautique.example"
	}
	return "foro-nautico.example"
}

// offer puts an original into the reservoir (uniform reservoir sampling).
func (gn *generator) offer(r *record) {
	gn.seen++
	slot := len(gn.res)
	if slot >= reservoirSize {
		slot = gn.g.intn(gn.seen)
		if slot >= reservoirSize {
			return
		}
	} else {
		gn.res = append(gn.res, resEntry{})
	}
	e := &gn.res[slot]
	e.id, e.lang, e.kind = r.id, r.lang, r.kind
	e.text = append(e.text[:0], r.text...)
}

func (gn *generator) exactCopy(r *record) {
	e := &gn.res[gn.g.intn(len(gn.res))]
	r.kind = KindExactCopy
	r.copyOf = e.id
	r.lang = e.lang
	r.detail = e.kind
	r.text = e.text
	r.jaccard = 1
	r.url = "https://" + mirrorDomain[gn.g.intn(len(mirrorDomain))] + "/" + r.id
}

func (gn *generator) nearCopy(r *record) bool {
	g := gn.g
	target := gn.o.NearJaccard
	if !g.chance(nearMainShare) {
		target = lowJaccards[g.intn(len(lowJaccards))]
	}
	// One edit moves the similarity of a text of S shingles by about 10/S,
	// so near copies need originals of nearMinWords words to land within
	// a few hundredths of the target.
	var e *resEntry
	for try := 0; try < nearPickTries; try++ {
		c := &gn.res[g.intn(len(gn.res))]
		if countWords(c.text) >= nearMinWords {
			e = c
			break
		}
	}
	if e == nil {
		return false
	}
	out, ok := g.nearCopy(&gn.ne, string(e.text), target, gn.nearBuf[:0])
	if !ok {
		return false
	}
	gn.nearBuf = out
	r.kind = KindNearCopy
	r.copyOf = e.id
	r.lang = e.lang
	r.detail = e.kind
	r.text = out
	r.target = target
	if gn.ne.exact == nil {
		gn.ne.exact = make(map[string]uint8)
	}
	r.jaccard = roundJ(shingleJaccard(gn.ne.exact, string(e.text), string(out), ShingleN))
	r.url = "https://" + mirrorDomain[g.intn(len(mirrorDomain))] + "/" + r.id
	return true
}

// countWords counts whitespace-separated words.
func countWords(b []byte) int {
	n := 0
	in := false
	for _, c := range b {
		if isSpace(c) {
			in = false
		} else if !in {
			in = true
			n++
		}
	}
	return n
}

// roundJ keeps recorded similarities to 6 decimals, enough for any test
// and short in the truth file.
func roundJ(j float64) float64 { return math.Round(j*1e6) / 1e6 }

// plantLeak chooses the eval items of the next leak thread and returns the
// post text.
func (gn *generator) plantLeak(r *record) []byte {
	n := 1
	if gn.leakThread%leakPairEvery == leakPairEvery-1 {
		n = 2
	}
	if gn.leakNext+n > len(gn.leakOrder) {
		return nil
	}
	kind := leakKinds[gn.leakThread%len(leakKinds)]
	gn.leakThread++
	items := make([]EvalItem, n)
	for i := range items {
		it := gn.evals[gn.leakOrder[gn.leakNext]]
		gn.leakNext++
		items[i] = it
		r.evalItems = append(r.evalItems, it.ID)
	}
	r.leak = kind
	return gn.g.leakText(items, kind)
}

func (r *record) truth() TruthDoc {
	td := TruthDoc{
		ID: r.id, Source: r.source, File: r.file, Line: r.line, Kind: r.kind, CopyOf: r.copyOf,
		Jaccard: r.jaccard, Target: r.target, Lang: r.lang, Leak: r.leak, Detail: r.detail,
		URL: r.url, RecordID: r.recordID,
	}
	if r.kind == KindExactCopy {
		td.Jaccard = 1
	}
	if len(r.evalItems) > 0 {
		td.EvalItems = append([]string(nil), r.evalItems...)
	}
	return td
}

func writeTruthLine(f *fsio.AtomicFile, td *TruthDoc) error {
	b, err := json.Marshal(td)
	if err != nil {
		return err
	}
	b = append(b, '\n')
	_, err = f.Write(b)
	return err
}

func writeEvals(path string, items []EvalItem) error {
	var b []byte
	for i := range items {
		line, err := json.Marshal(&items[i])
		if err != nil {
			return fmt.Errorf("synth: eval item %s: %w", items[i].ID, err)
		}
		b = append(b, line...)
		b = append(b, '\n')
	}
	if err := fsio.WriteFileAtomic(path, b); err != nil {
		return fmt.Errorf("synth: %s: %w", path, err)
	}
	return nil
}

// genInfo is Dir/gen.json.
type genInfo struct {
	Seed        uint64           `json:"seed"`
	Format      string           `json:"format"`
	Docs        int              `json:"docs"`
	Bytes       int64            `json:"bytes"`
	Files       int              `json:"files_per_source"`
	NearJaccard float64          `json:"near_jaccard"`
	Sources     []string         `json:"sources"`
	SourceBytes map[string]int64 `json:"source_bytes"`
	Counts      map[string]int   `json:"counts"`
	EvalItems   int              `json:"eval_items"`
}

func writeGenInfo(path string, o Options, t *Truth) error {
	b, err := json.MarshalIndent(genInfo{
		Seed: o.Seed, Format: o.Format, Docs: t.NumDocs, Bytes: t.Bytes, Files: o.Files,
		NearJaccard: o.NearJaccard, Sources: Sources, SourceBytes: t.SourceBytes, Counts: t.Counts,
		EvalItems: t.EvalItems,
	}, "", "  ")
	if err != nil {
		return fmt.Errorf("synth: gen.json: %w", err)
	}
	if err := fsio.WriteFileAtomic(path, append(b, '\n')); err != nil {
		return fmt.Errorf("synth: gen.json: %w", err)
	}
	return nil
}

// staleName matches the generator's own corpus files: <source>-00000.<ext>
// and txt documents <source>-00000042.txt (and their temp files).
var staleName = regexp.MustCompile(`^(?:\.tmp-)?([a-z]+)-(?:[0-9]{5}(?:\.jsonl\.zst|\.jsonl\.gz|\.warc\.gz)|[0-9]{8,}\.txt)$`)

// removeStale deletes corpus files of an earlier Generate in dir that this
// call will not rewrite (keep); only names of the generator's own pattern
// are touched.
func removeStale(dir, src string, keep map[string]bool) error {
	ents, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("synth: %w", err)
	}
	written := keep
	var stale []string
	for _, e := range ents {
		m := staleName.FindStringSubmatch(e.Name())
		if m == nil || m[1] != src || written[e.Name()] {
			continue
		}
		stale = append(stale, e.Name())
	}
	sort.Strings(stale)
	for _, n := range stale {
		if err := os.RemoveAll(filepath.Join(dir, n)); err != nil {
			return fmt.Errorf("synth: remove stale %s: %w", filepath.Join(dir, n), err)
		}
	}
	return nil
}
