package stages

// The decontaminate stage: finds eval items in corpus documents and
// flags, drops or cuts the documents that contain them.
//
// Every eval set of the stage goes into one n-gram index (package dedup),
// so a document is scanned once whatever the number of sets, and each
// match is attributed to (eval set, item). Actions:
//
//   - flag: keep the document; the ledger records the match and the
//     output document's meta gets "contaminated": ["<eval>/<item>", ...];
//   - drop: drop the document (rule "contaminated");
//   - cut: the method of Brown et al. 2020: remove each matched span plus
//     cut_margin characters either side, split the document there, drop
//     pieces shorter than min_piece_chars, and drop the whole document
//     (rule "too_many_pieces") when it would be split into more than
//     max_pieces pieces. The kept pieces are joined by a blank line into
//     one edited document (rule "contaminated", changes "pieces" and
//     "chars_removed"); when no piece is long enough the document is
//     dropped (rule "contaminated").
//
// max_doc_frequency > 0 ignores n-grams that occur in more than that many
// corpus documents, as Brown et al. did for frequent n-grams. That needs a
// counting pass over the corpus, so the stage is then a global stage:
// Scan returns the index keys a document matches, Collect counts
// documents per key (4 bytes per index n-gram, independent of corpus
// size), Reduce marks the frequent keys, Apply decides with them ignored.
// With max_doc_frequency 0 (the default) no pass is needed and the stage
// runs per document (PerDocument returns it as a Stage).
//
// The stage also writes OUT/contamination.json (see ContamReport) from
// what Observe saw, in input order; in a split run the report is saved in
// parts and merged (contamsplit.go), and the scan keys of the counting
// pass are stored between phases (keycodec.go).

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"sync/atomic"

	"winnow/dedup"
	"winnow/stages/fsio"
)

// Report and ledger limits.
const (
	// contamExcerptBytes caps the matched text shown per item.
	contamExcerptBytes = 300
	// contamReportDocs caps the document ids listed per item in the
	// report (the count is always complete).
	contamReportDocs = 100
	// contamTableDocs caps the document ids printed per item in tables.
	contamTableDocs = 5
	// contamLedgerItems caps the "items" list of one ledger record.
	contamLedgerItems = 50
	// contamPendingSweep: every this many observed documents, when more
	// than this many match records wait, Observe discards those older
	// than the current document (documents measured but never decided).
	contamPendingSweep = 1024
)

func init() {
	Register(Kind{
		Name:      "decontaminate",
		Doc:       "find eval-set items (word n-gram overlap) and flag, drop or cut the documents that contain them",
		NewGlobal: newDecontaminateKind,
	})
}

// PerDocumenter is implemented by a global stage whose configuration
// needs no counting pass: PerDocument returns a per-document Stage that
// decides exactly as the global stage would, or nil when the global
// phases are needed. A runner may then run the stage in the per-document
// pipeline instead of as a global stage.
type PerDocumenter interface {
	PerDocument() Stage
}

// DecontamConfig holds the decontaminate stage's parameters.
type DecontamConfig struct {
	Ngram int
	// MinItemWords: an item part (question, choice) of fewer normalized
	// words is not matched; an item with no part that long is listed in
	// the report as too short to check (0: DefaultMinItemWords, capped at
	// Ngram).
	MinItemWords    int
	Action          string // flag | drop | cut
	MaxDocFrequency int
	CutMargin       int
	MinPieceChars   int
	MaxPieces       int
}

// DefaultMinItemWords is the default of min_item_words. Brown et al. 2020
// (appendix C) matched each benchmark with N-grams of N words, N being
// the benchmark's 5th-percentile example length, capped at 13 and — from
// memory — never below 8 "due to spurious collisions at lower values".
// Here a part of 13 words or more is matched by its 13-grams, a part of
// 8 to 12 words must occur whole (an N-gram with N its length, inside
// their range), and a shorter part is not matched at all.
const DefaultMinItemWords = 8

// DefaultDecontamConfig returns the published defaults: 13-grams, items
// of at least 8 words, and the cut rule of Brown et al. 2020 (200
// characters, 200 characters, 10 pieces).
func DefaultDecontamConfig() DecontamConfig {
	return DecontamConfig{Ngram: 13, MinItemWords: DefaultMinItemWords, Action: "drop", CutMargin: 200, MinPieceChars: 200, MaxPieces: 10}
}

// minItemWords is the effective min_item_words of cfg.
func (cfg DecontamConfig) minItemWords() int {
	if cfg.MinItemWords <= 0 {
		return min(DefaultMinItemWords, cfg.Ngram)
	}
	return cfg.MinItemWords
}

// Decontaminate is the decontaminate stage. It implements Stage (when
// MaxDocFrequency is 0), GlobalStage, Observer and Finisher.
type Decontaminate struct {
	name     string
	cfg      DecontamConfig
	idx      *dedup.ContamIndex
	sets     []*EvalSet
	setStats []evalIndexStat
	// per index item: its set and its position in the set
	itemSet []int32
	itemPos []int32
	pool    sync.Pool

	// global mode
	df      []uint32
	ignore  []uint64
	ignored int
	// ignoredKnown: Reduce ran (or a merged report part said how many
	// n-grams were ignored).
	ignoredKnown bool

	// report, fed by Observe on one goroutine
	rep     contamReportState
	pending sync.Map // OrderKey -> *contamDocMatch
	npend   atomic.Int64
}

// evalIndexStat is what indexing found about one eval set.
type evalIndexStat struct {
	tooShort []string // ids of the items with no part of MinItemWords words
	ngrams   int      // n-grams and whole parts indexed
}

// contamDocMatch is what Process found in one document, kept until
// Observe records it in the report.
type contamDocMatch struct {
	items    []dedup.ContamItemMatch // credited items, most matched first
	excerpts []string                // per credited item
	shared   []uint32                // items matched only through credited items' n-grams
	matches  int                     // distinct matched windows
}

func newDecontaminateKind(p *Params, env Env) (GlobalStage, error) {
	cfg := DefaultDecontamConfig()
	cfg.Ngram = int(p.Int("ngram", int64(cfg.Ngram), 1, 64))
	cfg.MinItemWords = int(p.Int("min_item_words", int64(min(cfg.MinItemWords, cfg.Ngram)), 1, 1<<20))
	cfg.Action = p.String("action", cfg.Action, "drop", "cut", "flag")
	cfg.MaxDocFrequency = int(p.Int("max_doc_frequency", 0, 0, 1<<40))
	cfg.CutMargin = int(p.Int("cut_margin", int64(cfg.CutMargin), 0, 1<<20))
	cfg.MinPieceChars = int(p.Int("min_piece_chars", int64(cfg.MinPieceChars), 0, 1<<30))
	cfg.MaxPieces = int(p.Int("max_pieces", int64(cfg.MaxPieces), 0, 1<<20))
	var specs []EvalSpec
	names := map[string]bool{}
	lst := p.List("evals")
	if len(lst) == 0 && p.Has("evals") {
		p.Errorf("evals", "want at least one eval set")
	} else if !p.Has("evals") {
		p.Errorf("evals", "missing: list the eval sets to check against (name, paths, fields)")
	}
	for _, e := range lst {
		spec := EvalSpec{Dir: env.SpecDir}
		spec.Name = e.String("name", "")
		spec.Paths = e.Strings("paths", nil)
		spec.Fields = e.Strings("fields", nil)
		spec.IDExplicit = e.Has("id_field")
		spec.IDField = e.String("id_field", "id")
		spec.Format = e.String("format", "auto", EvalFormats...)
		switch {
		case spec.Name == "":
			e.Errorf("name", "missing: each eval set needs a name")
		case names[spec.Name]:
			e.Errorf("name", "eval set %q named twice", spec.Name)
		}
		names[spec.Name] = true
		if len(spec.Paths) == 0 {
			e.Errorf("paths", "missing: each eval set needs paths")
		}
		if err := e.Done(); err != nil {
			p.errs = append(p.errs, err)
			continue
		}
		specs = append(specs, spec)
	}
	if err := p.Done(); err != nil {
		return nil, err
	}
	var sets []*EvalSet
	for _, spec := range specs {
		set, err := LoadEvalSet(spec)
		if err != nil {
			return nil, fmt.Errorf("%s.evals: %w", p.Path(), err)
		}
		sets = append(sets, set)
	}
	d, err := NewDecontaminate("decontaminate", cfg, sets)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", p.Path(), err)
	}
	return d, nil
}

// NewDecontaminate builds the stage over loaded eval sets.
func NewDecontaminate(name string, cfg DecontamConfig, sets []*EvalSet) (*Decontaminate, error) {
	switch cfg.Action {
	case "flag", "drop", "cut":
	default:
		return nil, fmt.Errorf("action %q: want drop, cut or flag", cfg.Action)
	}
	if cfg.Ngram < 1 {
		return nil, fmt.Errorf("ngram %d: want at least 1", cfg.Ngram)
	}
	d := &Decontaminate{name: name, cfg: cfg, sets: sets, setStats: make([]evalIndexStat, len(sets))}
	b := dedup.NewContamBuilder(cfg.Ngram)
	for si, set := range sets {
		st := &d.setStats[si]
		for pos, it := range set.Items {
			parts := it.Parts
			if parts == nil {
				parts = []string{it.Text}
			}
			_, words, keys, err := b.AddParts(parts, cfg.minItemWords())
			if err != nil {
				return nil, fmt.Errorf("eval set %q item %q: %w", set.Name, it.ID, err)
			}
			if words == 0 {
				st.tooShort = append(st.tooShort, it.ID)
			}
			st.ngrams += keys
			d.itemSet = append(d.itemSet, int32(si))
			d.itemPos = append(d.itemPos, int32(pos))
		}
	}
	d.idx = b.Build()
	d.pool.New = func() any { return d.idx.NewScanner() }
	if cfg.MaxDocFrequency > 0 {
		d.df = make([]uint32, d.idx.KeyCount())
	}
	d.rep.init(d)
	return d, nil
}

// Name returns the stage name.
func (d *Decontaminate) Name() string { return d.name }

// Kind returns "decontaminate".
func (d *Decontaminate) Kind() string { return "decontaminate" }

// Index returns the stage's n-gram index.
func (d *Decontaminate) Index() *dedup.ContamIndex { return d.idx }

// PerDocument returns d as a per-document Stage when no counting pass is
// needed (MaxDocFrequency 0), else nil.
func (d *Decontaminate) PerDocument() Stage {
	if d.cfg.MaxDocFrequency > 0 {
		return nil
	}
	return d
}

// Describe summarizes the index for `winnow check`: one line per eval
// set (items, fields, items too short to check, n-grams indexed), a
// warning for the sets with items too short, and the index.
func (d *Decontaminate) Describe() string {
	var sb strings.Builder
	for si, set := range d.sets {
		st := d.setStats[si]
		fields := "every field but the id"
		if set.Fields != nil {
			fields = strings.Join(set.Fields, ", ")
		}
		fmt.Fprintf(&sb, "eval set %s (%s, %s): %d items; fields %s; %d too short to check (< %d words); %d n-grams indexed\n",
			set.Name, strings.Join(set.Files, ", "), strings.Join(slices.Compact(slices.Clone(set.Formats)), "+"),
			len(set.Items), fields, len(st.tooShort), d.cfg.minItemWords(), st.ngrams)
	}
	for si, set := range d.sets {
		if n := len(d.setStats[si].tooShort); n > 0 {
			fmt.Fprintf(&sb, "warning: eval set %s: %d of %d items have no part of %d words or more and will not be checked (min_item_words); "+
				"they are listed in contamination.json as too_short_to_check\n", set.Name, n, len(set.Items), d.cfg.minItemWords())
		}
	}
	fmt.Fprintf(&sb, "%d-gram index of %d items in %d eval sets: %d n-grams, %.1f MB (%.1f bytes/n-gram)",
		d.cfg.Ngram, d.idx.Items(), len(d.sets), d.idx.KeyCount(), float64(d.idx.Bytes())/1e6, d.idx.BytesPerNgram())
	if l := d.idx.ShortLengths(); len(l) > 0 {
		fmt.Fprintf(&sb, "; parts shorter than %d words matched whole (lengths %v)", d.cfg.Ngram, l)
	}
	if d.cfg.MaxDocFrequency > 0 {
		fmt.Fprintf(&sb, "; n-grams in more than %d documents ignored (global counting pass)", d.cfg.MaxDocFrequency)
	}
	return sb.String()
}

// TooShort returns, per eval set, the ids of the items too short to check.
func (d *Decontaminate) TooShort() [][]string {
	out := make([][]string, len(d.sets))
	for i, st := range d.setStats {
		out[i] = st.tooShort
	}
	return out
}

// MetricNames lists the per-document measurements.
func (d *Decontaminate) MetricNames() []string {
	return []string{"contam_ngrams", "contam_items"}
}

// Process decides about one document (per-document mode).
func (d *Decontaminate) Process(doc *Doc) Decision {
	return d.decide(doc, nil)
}

// Scan returns the sorted, distinct index keys doc matches ([]uint32, nil
// when none) for document-frequency counting.
func (d *Decontaminate) Scan(doc *Doc) any {
	sc := d.pool.Get().(*dedup.ContamScanner)
	defer d.pool.Put(sc)
	hits := sc.Scan(doc.Text, nil)
	if len(hits) == 0 {
		return nil
	}
	keys := make([]uint32, len(hits))
	for i, h := range hits {
		keys[i] = h.Key
	}
	slices.Sort(keys)
	return slices.Compact(keys)
}

// Collect counts one document for each key it matched.
func (d *Decontaminate) Collect(order OrderKey, id string, keys any) error {
	ks, _ := keys.([]uint32)
	if d.df == nil {
		return nil
	}
	for _, k := range ks {
		if int(k) >= len(d.df) {
			return fmt.Errorf("decontaminate: key %d out of range for document %s", k, id)
		}
		if d.df[k] < ^uint32(0) {
			d.df[k]++
		}
	}
	return nil
}

// Reduce marks the keys found in more than MaxDocFrequency documents.
func (d *Decontaminate) Reduce() error {
	if d.df == nil {
		return nil
	}
	d.ignore = make([]uint64, (len(d.df)+63)/64)
	d.ignored = 0
	for k, n := range d.df {
		if int(n) > d.cfg.MaxDocFrequency {
			d.ignore[k>>6] |= 1 << (k & 63)
			d.ignored++
		}
	}
	d.df = nil
	d.ignoredKnown = true
	return nil
}

// Apply decides about one document with frequent n-grams ignored.
func (d *Decontaminate) Apply(doc *Doc) Decision {
	return d.decide(doc, d.ignore)
}

// Close releases the index.
func (d *Decontaminate) Close() error { return nil }

func (d *Decontaminate) itemLabel(item uint32) string {
	set := d.sets[d.itemSet[item]]
	return set.Name + "/" + set.Items[d.itemPos[item]].ID
}

// decide scans doc and turns its matches into a decision.
func (d *Decontaminate) decide(doc *Doc, ignore []uint64) Decision {
	sc := d.pool.Get().(*dedup.ContamScanner)
	defer d.pool.Put(sc)
	hits := sc.Scan(doc.Text, ignore)
	if len(hits) == 0 {
		return Decision{Metrics: []float64{0, 0}}
	}
	// Distinct matched windows (hits of several items at one window are
	// adjacent), and their byte spans for cutting.
	var spans [][2]int
	windows := 0
	for i, h := range hits {
		if i > 0 && h.Start == hits[i-1].Start && h.End == hits[i-1].End {
			continue
		}
		windows++
		if d.cfg.Action == "cut" {
			a, b := sc.ByteSpan(h.Start, h.End)
			spans = append(spans, [2]int{a, b})
		}
	}
	m := d.summarize(sc, hits, windows)
	items := m.items
	if _, loaded := d.pending.Swap(doc.Order, m); !loaded {
		d.npend.Add(1)
	}

	top := items[0].Item
	extra := map[string]any{
		"eval":    d.sets[d.itemSet[top]].Name,
		"item":    d.sets[d.itemSet[top]].Items[d.itemPos[top]].ID,
		"matches": windows,
	}
	if len(items) > 1 {
		labels := make([]string, 0, min(len(items), contamLedgerItems))
		for _, it := range items[:min(len(items), contamLedgerItems)] {
			labels = append(labels, d.itemLabel(it.Item))
		}
		extra["items"] = labels
		if len(items) > contamLedgerItems {
			extra["items_total"] = len(items)
		}
	}
	metrics := []float64{float64(windows), float64(len(items))}
	var dec Decision
	switch d.cfg.Action {
	case "flag":
		labels := make([]string, 0, len(items))
		for _, it := range items {
			labels = append(labels, d.itemLabel(it.Item))
		}
		dec = Decision{Action: Keep, Rule: "contaminated", Value: windows, Meta: map[string]any{"contaminated": labels}}
	case "drop":
		dec = DropDoc("contaminated", windows, nil)
	case "cut":
		r := dedup.CutSpans(doc.Text, spans, d.cfg.CutMargin, d.cfg.MinPieceChars, d.cfg.MaxPieces)
		switch {
		case r.TooMany:
			dec = DropDoc("too_many_pieces", r.Split, d.cfg.MaxPieces)
		case len(r.Pieces) == 0:
			dec = DropDoc("contaminated", windows, nil)
			dec.Changes = map[string]int{"pieces": 0, "chars_removed": r.Removed}
		default:
			dec = EditDoc("contaminated", strings.Join(r.Pieces, "\n\n"), map[string]int{"pieces": len(r.Pieces), "chars_removed": r.Removed})
			dec.Value = windows // as for the drop and the flag of the same rule
		}
	}
	dec.Extra = extra
	dec.Metrics = metrics
	return dec
}

// Observe adds one decided document to the contamination report. It is
// called on one goroutine, in input order.
func (d *Decontaminate) Observe(doc *Doc, dec *Decision) {
	d.rep.docs++
	v, ok := d.pending.LoadAndDelete(doc.Order)
	if ok {
		d.npend.Add(-1)
	}
	d.rep.sinceSweep++
	if d.rep.sinceSweep >= contamPendingSweep && d.npend.Load() > contamPendingSweep {
		d.rep.sinceSweep = 0
		// Matches of documents that will never be observed (measured but
		// not decided): every key before this one is stale.
		d.pending.Range(func(k, _ any) bool {
			if k.(OrderKey) < doc.Order {
				if _, gone := d.pending.LoadAndDelete(k); gone {
					d.npend.Add(-1)
				}
			}
			return true
		})
	}
	if dec == nil || dec.Extra == nil || dec.Extra["eval"] == nil {
		return
	}
	m, _ := v.(*contamDocMatch)
	if m == nil {
		// Not from this stage's Process/Apply (or already consumed):
		// rescan; the text is the one the decision was made on unless
		// an edit was applied before Observe.
		m = d.match(doc.Text)
		if m == nil {
			return
		}
	}
	d.rep.add(doc, dec, m)
}

// match scans text without deciding (for the report).
func (d *Decontaminate) match(text string) *contamDocMatch {
	sc := d.pool.Get().(*dedup.ContamScanner)
	defer d.pool.Put(sc)
	hits := sc.Scan(text, d.ignore)
	if len(hits) == 0 {
		return nil
	}
	return d.summarize(sc, hits, len(hits))
}

// summarize attributes hits to items: the items credited with matches of
// their own (see dedup.SummarizeHits), most matched first, and apart the
// items whose matched n-grams all belong to a credited item too.
func (d *Decontaminate) summarize(sc *dedup.ContamScanner, hits []dedup.ContamHit, windows int) *contamDocMatch {
	all := dedup.SummarizeHits(hits)
	m := &contamDocMatch{matches: windows}
	for _, it := range all {
		if it.Distinct == 0 {
			m.shared = append(m.shared, it.Item)
			continue
		}
		m.items = append(m.items, it)
		m.excerpts = append(m.excerpts, sc.Excerpt(it.Start, it.End, contamExcerptBytes))
	}
	return m
}

// Finish writes runDir/contamination.json.
func (d *Decontaminate) Finish(runDir string) error {
	data, err := json.MarshalIndent(d.Report(), "", "  ")
	if err != nil {
		return fmt.Errorf("contamination report: %w", err)
	}
	path := filepath.Join(runDir, "contamination.json")
	if err := fsio.WriteFileAtomic(path, append(data, '\n')); err != nil {
		return fmt.Errorf("contamination report: %w", err)
	}
	return nil
}

// contamReportState accumulates the report.
type contamReportState struct {
	d                       *Decontaminate
	docs                    int64
	affected                int64
	dropped, edited, flaged int64
	setDocs                 []int64
	items                   map[uint32]*ContamItemReport
	shared                  map[uint32]bool
	sinceSweep              int
}

func (r *contamReportState) init(d *Decontaminate) {
	r.d = d
	r.setDocs = make([]int64, len(d.sets))
	r.items = map[uint32]*ContamItemReport{}
	r.shared = map[uint32]bool{}
}

func (r *contamReportState) add(doc *Doc, dec *Decision, m *contamDocMatch) {
	r.affected++
	switch dec.Action {
	case Drop:
		r.dropped++
	case Edit:
		r.edited++
	default:
		r.flaged++
	}
	seenSet := map[int32]bool{}
	for i, it := range m.items {
		s := r.d.itemSet[it.Item]
		if !seenSet[s] {
			seenSet[s] = true
			r.setDocs[s]++
		}
		ir := r.items[it.Item]
		if ir == nil {
			set := r.d.sets[s]
			ir = &ContamItemReport{Item: set.Items[r.d.itemPos[it.Item]].ID, Text: m.excerpts[i]}
			r.items[it.Item] = ir
		}
		ir.DocCount++
		ir.Matches += int64(it.Count)
		if len(ir.Docs) < contamReportDocs {
			ir.Docs = append(ir.Docs, doc.ID)
		}
	}
	for _, it := range m.shared {
		r.shared[it] = true
	}
}

// Report returns the contamination report so far.
func (d *Decontaminate) Report() *ContamReport {
	r := &d.rep
	out := &ContamReport{
		Stage: d.name, Ngram: d.cfg.Ngram, MinItemWords: d.cfg.minItemWords(), Action: d.cfg.Action,
		MaxDocFrequency: d.cfg.MaxDocFrequency, IgnoredNgrams: d.ignored,
		IndexNgrams: d.idx.KeyCount(), IndexBytesPer: roundMetric(d.idx.BytesPerNgram()),
		DocsScanned: r.docs, DocsAffected: r.affected,
		DocsDropped: r.dropped, DocsEdited: r.edited, DocsFlagged: r.flaged,
	}
	keys := make([]uint32, 0, len(r.items))
	for k := range r.items {
		keys = append(keys, k)
	}
	slices.Sort(keys) // index order = set order, then file order
	item := uint32(0)
	for si, set := range d.sets {
		st := ContamEvalStat{Name: set.Name, Files: set.Files, Items: len(set.Items), DocsAffected: r.setDocs[si],
			Contaminated: []ContamItemReport{}, TooShort: append([]string{}, d.setStats[si].tooShort...)}
		st.ItemsTooShort = len(st.TooShort)
		for range set.Items {
			if w := d.idx.ItemWords(int(item)); w > 0 && w < d.cfg.Ngram {
				st.ShortItems++
			}
			if r.shared[item] && r.items[item] == nil {
				st.ItemsSharedOnly++
			}
			item++
		}
		for _, k := range keys {
			if int(d.itemSet[k]) == si {
				st.Contaminated = append(st.Contaminated, *r.items[k])
			}
		}
		st.ItemsContaminated = len(st.Contaminated)
		if checked := st.Items - st.ItemsTooShort; checked > 0 {
			st.Percent = roundMetric(100 * float64(st.ItemsContaminated) / float64(checked))
		}
		out.Evals = append(out.Evals, st)
	}
	return out
}
