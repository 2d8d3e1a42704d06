package stages

import (
	"fmt"
	"path/filepath"
	"strings"

	"winnow/dedup"
)

// The dedup stages are thin wrappers: package dedup holds the indexes and
// their memory story; this file reads parameters, maps the GlobalStage
// phases onto the indexes and turns matches into ledger decisions.
//
// Keys for incremental runs go to RUN/keys/<stage name>.* (formats are
// documented in dedup/exact.go and dedup/near.go); with --against PREV the
// stage reads PREV/keys/<stage name>.* of the same stage name.

// Defaults of the dedup stages.
const (
	// defaultMaxRepeats: a paragraph in more than 10 documents is treated
	// as boilerplate (common practice: footers and banners repeat
	// thousands of times, quoted passages a handful).
	defaultMaxRepeats = 10
	// defaultNearThreshold is the estimated Jaccard that counts as a near
	// copy (common practice for web-scale MinHash dedup).
	defaultNearThreshold = 0.8
)

func init() {
	Register(Kind{
		Name:      "exact_dedup",
		Doc:       "drop exact copies (xxh3-128 of normalized text; keep: chooses the survivor), or with scope: paragraph remove paragraphs repeated across many documents",
		NewGlobal: newExactDedup,
	})
	Register(Kind{
		Name:      "near_dedup",
		Doc:       "drop near copies: MinHash over word n-grams, LSH banding, candidate pairs verified per partition; a document is dropped when similar to an earlier kept one (keep: sets the order, input order by default)",
		NewGlobal: newNearDedup,
	})
}

// stageName returns the spec's name for a stage (the kind by default).
func stageName(p *Params, kind string) string {
	if p.stageName != "" {
		return p.stageName
	}
	n := p.String("name", kind)
	if n == "" {
		return kind
	}
	return n
}

// parseKeep reads the keep key shared by the dedup stages:
//
//	keep: first | longest
//	keep: {sources: [a, b, ...]}
//	keep: {metric: STAGE.METRIC, prefer: max | min}
func parseKeep(p *Params) dedup.KeepRule {
	if !p.Has("keep") {
		return dedup.KeepRule{}
	}
	if !p.IsMapping("keep") {
		switch v := p.String("keep", "first"); v {
		case "first":
		case "longest":
			return dedup.KeepRule{By: dedup.KeepLongest}
		default:
			p.Errorf("keep", "want first, longest, {sources: [a, b, ...]} or {metric: STAGE.METRIC, prefer: max|min}, got %q", v)
		}
		return dedup.KeepRule{}
	}
	sub := p.Sub("keep")
	var r dedup.KeepRule
	switch hasS, hasM := sub.Has("sources"), sub.Has("metric"); {
	case hasS && hasM:
		sub.Errorf("metric", "keep takes sources or metric, not both")
	case hasS:
		r = dedup.KeepRule{By: dedup.KeepSources, Sources: sub.Strings("sources", nil)}
		seen := map[string]bool{}
		for _, src := range r.Sources {
			if src == "" || seen[src] {
				sub.Errorf("sources", "source %q is empty or listed twice", src)
			}
			seen[src] = true
		}
		if len(r.Sources) == 0 {
			sub.Errorf("sources", "want at least one source, most preferred first")
		}
	case hasM:
		r = dedup.KeepRule{By: dedup.KeepMetric, Metric: sub.String("metric", "")}
		r.Max = sub.String("prefer", "max", "max", "min") == "max"
		if st, m, ok := strings.Cut(r.Metric, "."); !ok || st == "" || m == "" {
			sub.Errorf("metric", "want STAGE.METRIC, the name of a metric an earlier stage measures (e.g. quality.word_count), got %q", r.Metric)
		}
	default:
		sub.Errorf("", "keep: want sources: [a, b, ...] or metric: STAGE.METRIC")
	}
	if err := sub.Done(); err != nil {
		p.errs = append(p.errs, err)
	}
	return r
}

// keepPriority computes a document's keep priority at scan time.
func keepPriority(r dedup.KeepRule, d *Doc) uint64 {
	if r.Uniform() {
		return 0
	}
	f := dedup.KeepFacts{Text: d.Text, Source: d.Source}
	if r.By == dedup.KeepMetric {
		f.Metric, f.HasMetric = d.Measured[r.Metric]
	}
	return r.Priority(f)
}

func keepMetrics(r dedup.KeepRule) []string {
	if r.By == dedup.KeepMetric {
		return []string{r.Metric}
	}
	return nil
}

func keysPrefix(dir, name string) string {
	if dir == "" {
		return ""
	}
	return filepath.Join(dir, "keys", name)
}

// keysOut is where a dedup stage writes this run's key files ("": none).
func keysOut(env Env, name string) string {
	if env.NoKeyFiles {
		return ""
	}
	return keysPrefix(env.RunDir, name)
}

// exactDedupStage implements exact_dedup.
type exactDedupStage struct {
	name       string
	norm       dedup.Normalization
	paragraph  bool
	maxRepeats int
	keep       dedup.KeepRule
	against    string
	idx        *dedup.ExactIndex
	para       *dedup.ParagraphIndex
}

// exactKey is exact_dedup's scan key at document scope.
type exactKey struct {
	hash     dedup.Hash128
	priority uint64
}

func newExactDedup(p *Params, env Env) (GlobalStage, error) {
	s := &exactDedupStage{name: stageName(p, "exact_dedup")}
	scope := p.String("scope", "document", "document", "paragraph")
	s.paragraph = scope == "paragraph"
	s.norm.FoldPunct = p.Bool("fold_punct", false)
	s.norm.FoldDigits = p.Bool("fold_digits", false)
	s.maxRepeats = int(p.Int("max_repeats", defaultMaxRepeats, 1, 1<<40))
	if p.Has("max_repeats") && !s.paragraph {
		p.Errorf("max_repeats", "max_repeats applies only to scope: paragraph")
	}
	s.keep = parseKeep(p)
	if p.Has("keep") && s.paragraph {
		p.Errorf("keep", "keep applies only to scope: document (scope: paragraph removes a repeated paragraph from every document, so no copy survives)")
	}
	if err := p.Done(); err != nil {
		return nil, err
	}
	if env.Checking {
		return s, nil
	}
	if s.paragraph {
		// Paragraph counts are not carried between runs (see
		// dedup/paragraph.go), so Against does not apply.
		s.para = dedup.NewParagraphIndex(dedup.ParagraphOptions{
			Norm: s.norm, MaxRepeats: s.maxRepeats, TempDir: env.TempDir, MemoryBudget: env.MemoryBudget,
		})
		return s, nil
	}
	opt := dedup.ExactOptions{
		Norm: s.norm, TempDir: env.TempDir, MemoryBudget: env.MemoryBudget,
		KeysOut: keysOut(env, s.name),
	}
	if env.Against != "" {
		s.against = env.Against
		opt.Against = keysPrefix(env.Against, s.name)
	}
	idx, err := dedup.NewExactIndex(opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	s.idx = idx
	return s, nil
}

func (s *exactDedupStage) Name() string { return s.name }
func (s *exactDedupStage) Kind() string { return "exact_dedup" }

// Scan returns the document's dedup.Hash128 (document scope) or its sorted
// distinct paragraph hashes (paragraph scope); nil when there is nothing
// to compare.
func (s *exactDedupStage) Scan(d *Doc) any {
	if s.paragraph {
		hs := dedup.ParagraphHashes(d.Text, s.norm, nil)
		if len(hs) == 0 {
			return nil
		}
		return hs
	}
	h, ok := dedup.ExactHash(d.Text, s.norm)
	if !ok {
		return nil
	}
	return exactKey{h, keepPriority(s.keep, d)}
}

// UsesMetrics names the metric a keep rule reads.
func (s *exactDedupStage) UsesMetrics() []string { return keepMetrics(s.keep) }

// Collect adds one document's scan keys to the index, in input order.
func (s *exactDedupStage) Collect(order OrderKey, id string, keys any) error {
	if keys == nil {
		return nil
	}
	if s.paragraph {
		hs, ok := keys.([]uint64)
		if !ok {
			return fmt.Errorf("%s: unexpected scan key %T", s.name, keys)
		}
		return s.para.Add(hs)
	}
	k, ok := keys.(exactKey)
	if !ok {
		return fmt.Errorf("%s: unexpected scan key %T", s.name, keys)
	}
	return s.idx.AddPriority(uint64(order), id, k.hash, k.priority)
}

// Reduce decides which documents are duplicates and writes the run's keys.
func (s *exactDedupStage) Reduce() error {
	if s.paragraph {
		return s.para.Reduce()
	}
	return s.idx.Reduce()
}

// Apply returns the decision Reduce made for d.
func (s *exactDedupStage) Apply(d *Doc) Decision {
	if s.paragraph {
		text, n := s.para.Strip(d.Text)
		if n == 0 {
			return KeepDoc()
		}
		if text == "" {
			dec := DropDoc("repeated_paragraph", n, s.maxRepeats)
			dec.Changes = map[string]int{"paragraphs_removed": n}
			return dec
		}
		dec := EditDoc("repeated_paragraph", text, map[string]int{"paragraphs_removed": n})
		dec.Value, dec.Limit = n, s.maxRepeats // the same value type as the drop of the same rule
		return dec
	}
	m, ok := s.idx.Lookup(uint64(d.Order))
	if !ok {
		return KeepDoc()
	}
	dec := DropDoc("exact_duplicate", nil, nil)
	dec.Extra = map[string]any{"of": m.Of}
	if m.Against {
		dec.Extra["against"] = s.against
	}
	return dec
}

// Close removes the index's temp files.
func (s *exactDedupStage) Close() error {
	var err error
	if s.idx != nil {
		err = s.idx.Close()
	}
	if s.para != nil {
		if perr := s.para.Close(); err == nil {
			err = perr
		}
	}
	return err
}

// Describe says what is compared and how much memory it takes.
func (s *exactDedupStage) Describe() string {
	if s.paragraph {
		return fmt.Sprintf("paragraph scope: paragraphs (blank-line separated, normalized with fold_punct=%v fold_digits=%v) found in more than %d documents are removed from every document; 8 bytes per (document, distinct paragraph) in memory up to the budget, then spilled\n",
			s.norm.FoldPunct, s.norm.FoldDigits, s.maxRepeats)
	}
	return fmt.Sprintf("xxh3-128 of text case-folded, whitespace collapsed, fold_punct=%v fold_digits=%v; of each group of copies the survivor is: %s; memory: 32 bytes/doc on disk in %d hash partitions, sorted one at a time in reduce (about 0.5 bytes/doc resident, an external sort past the budget), 16 bytes per removed doc\n",
		s.norm.FoldPunct, s.norm.FoldDigits, s.keep, dedup.KeyPartitions)
}

// nearDedupStage implements near_dedup.
type nearDedupStage struct {
	name    string
	opt     dedup.NearOptions
	band    dedup.Banding
	keep    dedup.KeepRule
	against string
	idx     *dedup.NearIndex
}

func newNearDedup(p *Params, env Env) (GlobalStage, error) {
	s := &nearDedupStage{name: stageName(p, "near_dedup")}
	o := &s.opt
	o.NGram = int(p.Int("ngram", 5, 1, 64))
	o.Permutations = int(p.Int("permutations", 128, 1, 1024))
	o.Bands = int(p.Int("bands", 16, 1, 1024))
	o.Threshold = p.Float("threshold", defaultNearThreshold, 0, 1)
	o.VerifyExact = p.String("verify", "signature", "signature", "exact") == "exact"
	s.keep = parseKeep(p)
	bd, err := dedup.NewBanding(o.Permutations, o.Bands)
	if err != nil {
		p.Errorf("bands", "%v", err)
	}
	s.band = bd
	if err := p.Done(); err != nil {
		return nil, err
	}
	o.Seed = env.Seed
	o.TempDir = env.TempDir
	o.MemoryBudget = env.MemoryBudget
	if env.Checking {
		return s, nil
	}
	o.KeysOut = keysOut(env, s.name)
	if env.Against != "" {
		s.against = env.Against
		o.Against = keysPrefix(env.Against, s.name)
	}
	idx, err := dedup.NewNearIndex(*o)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	s.idx = idx
	return s, nil
}

func (s *nearDedupStage) Name() string { return s.name }
func (s *nearDedupStage) Kind() string { return "near_dedup" }

// Scan returns the document's *dedup.NearKey (nil for a text without
// words).
func (s *nearDedupStage) Scan(d *Doc) any {
	k := s.idx.Key(d.Text)
	if k == nil {
		return nil
	}
	k.Priority = keepPriority(s.keep, d)
	return k
}

// UsesMetrics names the metric a keep rule reads.
func (s *nearDedupStage) UsesMetrics() []string { return keepMetrics(s.keep) }

// Collect adds one document's scan keys to the index, in input order.
func (s *nearDedupStage) Collect(order OrderKey, id string, keys any) error {
	if keys == nil {
		return s.idx.Add(uint64(order), id, nil)
	}
	k, ok := keys.(*dedup.NearKey)
	if !ok {
		return fmt.Errorf("%s: unexpected scan key %T", s.name, keys)
	}
	return s.idx.Add(uint64(order), id, k)
}

// Reduce decides which documents are duplicates and writes the run's keys.
func (s *nearDedupStage) Reduce() error { return s.idx.Reduce() }

// Apply returns the decision Reduce made for d.
func (s *nearDedupStage) Apply(d *Doc) Decision {
	m, ok := s.idx.Lookup(uint64(d.Order))
	if !ok {
		return KeepDoc()
	}
	dec := DropDoc("near_duplicate", nil, nil)
	dec.Extra = map[string]any{"of": m.Of, "similarity": m.Similarity}
	if m.Against {
		dec.Extra["against"] = s.against
	}
	return dec
}

// Close removes the index's temp files.
func (s *nearDedupStage) Close() error {
	if s.idx == nil {
		return nil
	}
	return s.idx.Close()
}

// Describe prints the parameters and the banding's S-curve.
func (s *nearDedupStage) Describe() string {
	var sb strings.Builder
	verify := "estimated Jaccard (fraction of equal signature values)"
	if s.opt.VerifyExact {
		verify = "exact Jaccard of hashed shingle sets (spilled to disk)"
	}
	fmt.Fprintf(&sb, "MinHash %d permutations over word %d-grams; candidates verified by %s >= %.2f\n",
		s.opt.Permutations, s.opt.NGram, verify, s.opt.Threshold)
	if s.band.Bands > 0 {
		sb.WriteString(s.band.SCurve())
		fmt.Fprintf(&sb, "candidate pairs per band-key partition (%d partitions); each member of a band bucket is compared with the first %d members in keep order\n",
			dedup.KeyPartitions, dedup.DefaultBucketCap)
		fmt.Fprintf(&sb, "a document is dropped when similar to an earlier kept one; keep order: %s\n", s.keep)
		fmt.Fprintf(&sb, "memory: band keys (%d bytes/doc) and signatures (%d bytes/doc) on disk; reduce sorts one partition at a time (about %d bytes/doc resident, an external sort past the budget), 1 bit/doc, a table of verified pairs (8-16 bytes/doc, at most budget/16)\n",
			8*s.band.Bands, 4*s.opt.Permutations, 16*s.band.Bands/dedup.KeyPartitions)
	}
	return sb.String()
}
