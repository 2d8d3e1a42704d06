package stages

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"winnow/filters/domain"
	"winnow/stages/fsio"
	"winnow/stages/read"
)

// domainStage keeps the documents that look like a domain learned from
// the user's examples (package filters/domain holds the methods: the
// linear classifier of Joulin et al. 2017 and the importance weights of
// Xie et al. 2023). It measures domain_score on every document and drops
// those under min_score, so audit, explain and what-if treat the score
// like any other metric.
//
// `sources: [web]` scores only the documents of those input sources; the
// others pass with a null domain_score.
//
// The model is trained when the stage is built, before the first document
// is read, from `examples` (in-domain documents) and `background` (the
// rest; for importance, the raw pool), both lists of paths or globs in any
// input format winnow reads (JSON Lines with a "text" field, plain text,
// WARC, Parquet; compressed or not). `model: PATH` loads a stored model
// instead. The model is written to RUN/keys/<stage>.model (the bytes of
// domain.Model.MarshalBinary) and listed with its xxh3 under the stage's
// "files" in the manifest (StageFiles). `winnow check` trains and prints
// the k-fold cross-validated accuracy and AUC (Describe).
//
// `keep_fraction: f` (instead of min_score) makes the stage global: it
// keeps the round(f·n) documents of the n reaching it with the largest
// rank keys. The classifier's key is domain_score (ties: earlier document
// first). The importance method samples without replacement in proportion
// to the importance weights, as Xie et al. 2023 resample: the key is the
// log importance weight plus a standard Gumbel variable drawn from the
// seed and the document id (the Gumbel top-k trick, filters/domain), so
// the sample is the same for any number of workers. The rank keys take 16
// bytes per document in memory. domain_score is written to metrics as in
// min_score mode; what-if does not recompute a global stage.
//
// Without `background` (and without `model`), the background is a
// deterministic sample of the documents reaching the stage, drawn before
// the run from the run's own inputs (Env.Inputs): the input files that are
// not among `examples` (and, with `sources`, only those sources' files)
// are read, and the K documents with the lowest xxh3 of their id under
// the run seed are kept (K = max(number of examples, 1000), at most K in
// memory; ties go to the earlier document). Each drawn document passes
// through the per-document stages before this one (Env.Upstream: edits
// applied, drops left out, `only:` scopes respected), so the sample
// resembles what reaches the stage; global stages before it (dedup,
// decontamination) are not applied. A drawn document whose text equals an
// example's is left out. The sample is the same for any number of
// workers; `winnow check` prints its size and where it came from.
type domainStage struct {
	name   string
	rules  []Rule
	model  *domain.Model
	hash   string
	method domain.Method
	opt    domain.Options
	folds  int
	// paths, resolved against the spec's directory, for `winnow check`
	examples, background []string
	modelPath            string
	trainedOn            [2]int
	// sampleBg: no background given, sample the run's inputs.
	sampleBg bool
	inputs   func() ([]read.InputFile, error)
	upstream func(*Doc) bool
	bgInfo   bgSample
	// sources limits scoring to documents of these input sources (nil:
	// all); the others get a null domain_score, which never removes.
	sources map[string]bool
	stored  []StageFile // the model written into the run directory

	// keep_fraction (a global stage): the share of the documents reaching
	// the stage to keep, their rank keys and the cut Reduce decides.
	keepFraction float64
	seed         uint64
	ranked       []rankedDoc
	cutKey       float64
	cutOrder     OrderKey
	keepNone     bool
}

// rankedDoc is one document's rank key in keep_fraction mode: 16 bytes
// resident per document reaching the stage (no spilling).
type rankedDoc struct {
	key   float64
	order OrderKey
}

// Metrics measured by the domain stage.
var domainMetrics = []string{"domain_score"}

// Defaults of the domain stage.
const (
	// defaultDomainMinScore keeps documents the model finds at least as
	// likely in-domain as not (a predicted probability of 0.5; for the
	// importance method, as likely under the examples' model as under the
	// pool's).
	defaultDomainMinScore = 0.5
	// defaultDomainFolds is the cross-validation of `winnow check`
	// (5-fold: common practice).
	defaultDomainFolds = 5
	// maxDomainTrainDocs bounds the documents read from examples and from
	// background, so training memory stays bounded (about 8 bytes per
	// featurised word, at most domain.DefaultMaxWords words a document).
	maxDomainTrainDocs = 100000
)

func init() {
	Register(Kind{
		Name:      "domain",
		Doc:       "keep documents like the examples: hashed n-gram classifier (Joulin et al. 2017) or importance weights (Xie et al. 2023); domain_score in metrics",
		NewGlobal: newDomainKind,
	})
}

// newDomainKind builds the stage; it runs per document (PerDocument)
// unless keep_fraction is set.
func newDomainKind(p *Params, env Env) (GlobalStage, error) {
	s, err := newDomain(p, env)
	if err != nil {
		return nil, err
	}
	return s, nil
}

func newDomain(p *Params, env Env) (*domainStage, error) {
	s := &domainStage{name: stageName(p, "domain")}
	method := p.String("method", "classifier", "classifier", "importance")
	s.method, _ = domain.ParseMethod(method)
	minScore := p.Float("min_score", defaultDomainMinScore, 0, 1)
	s.rules = []Rule{{Name: "domain_score", Key: "min_score", Metric: "domain_score", Cmp: AtLeast, Limit: minScore, Enabled: true}}
	resolve := func(ps []string) []string {
		out := make([]string, len(ps))
		for i, q := range ps {
			if !filepath.IsAbs(q) && env.SpecDir != "" {
				q = filepath.Join(env.SpecDir, q)
			}
			out[i] = q
		}
		return out
	}
	s.examples = resolve(p.Strings("examples", nil))
	s.background = resolve(p.Strings("background", nil))
	if mp := p.String("model", ""); mp != "" {
		s.modelPath = resolve([]string{mp})[0]
	}
	s.opt = domain.Options{Method: s.method, Seed: env.Seed,
		Buckets: int(p.Int("buckets", 0, 0, domain.MaxBuckets))}
	s.folds = int(p.Int("folds", defaultDomainFolds, 2, 100))
	for _, src := range p.Strings("sources", nil) {
		if s.sources == nil {
			s.sources = map[string]bool{}
		}
		s.sources[src] = true
	}
	if p.Has("keep_fraction") {
		s.keepFraction = p.Float("keep_fraction", 0, 0, 1)
		if s.keepFraction <= 0 {
			p.Errorf("keep_fraction", "keep_fraction must be above 0")
		}
		if p.Has("min_score") {
			p.Errorf("keep_fraction", "give min_score or keep_fraction, not both")
		}
		s.seed = env.Seed
	}
	if s.modelPath == "" && len(s.examples) == 0 {
		p.Errorf("examples", "the domain stage needs examples to train on (or model: PATH)")
	}
	if s.modelPath == "" && len(s.background) == 0 {
		s.sampleBg = true
		s.inputs, s.upstream = env.Inputs, env.Upstream
		if s.inputs == nil && !env.Checking {
			// Checking (check, what-if) does not train here; Describe
			// says it when asked.
			p.Errorf("background", "no run inputs to sample a background from here: give background documents (or model: PATH)")
		}
	}
	if err := p.Done(); err != nil {
		return nil, err
	}
	if env.Checking {
		// Validate that the paths name files; training and
		// cross-validation wait for Describe (only `winnow check` asks).
		for _, q := range append(append([]string{}, s.examples...), s.background...) {
			if _, err := read.ExpandPath(q); err != nil {
				return nil, fmt.Errorf("%s: %s: %w", s.name, q, err)
			}
		}
		if s.modelPath != "" {
			if _, err := os.Stat(s.modelPath); err != nil {
				return nil, fmt.Errorf("%s: model: %w", s.name, err)
			}
		}
		return s, nil
	}
	if err := s.load(); err != nil {
		return nil, err
	}
	if env.RunDir != "" {
		b, _ := s.model.MarshalBinary()
		p := filepath.Join(env.RunDir, "keys", s.name+".model")
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			return nil, err
		}
		if err := fsio.WriteFileAtomic(p, b); err != nil {
			return nil, fmt.Errorf("%s: writing the model: %w", s.name, err)
		}
		s.stored = []StageFile{{Path: "keys/" + s.name + ".model", Bytes: int64(len(b)), XXH3: s.hash}}
	}
	return s, nil
}

// load reads the stored model or trains one.
func (s *domainStage) load() error {
	if s.modelPath != "" {
		b, err := os.ReadFile(s.modelPath)
		if err != nil {
			return fmt.Errorf("%s: model: %w", s.name, err)
		}
		var m domain.Model
		if err := m.UnmarshalBinary(b); err != nil {
			return fmt.Errorf("%s: model %s: %w", s.name, s.modelPath, err)
		}
		if m.Method != s.method {
			return fmt.Errorf("%s: model %s was trained with method %s, the spec says %s", s.name, s.modelPath, m.Method, s.method)
		}
		s.model = &m
	} else {
		ex, bg, err := s.readTraining()
		if err != nil {
			return err
		}
		s.trainedOn = [2]int{len(ex), len(bg)}
		if s.model, err = domain.Train(ex, bg, s.opt); err != nil {
			return fmt.Errorf("%s: %w", s.name, err)
		}
	}
	var err error
	s.hash, err = s.model.Hash()
	return err
}

func (s *domainStage) readTraining() (ex, bg []string, err error) {
	if ex, err = readTexts(s.examples, maxDomainTrainDocs); err != nil {
		return nil, nil, fmt.Errorf("%s: examples: %w", s.name, err)
	}
	if s.sampleBg {
		if s.inputs == nil {
			return nil, nil, fmt.Errorf("%s: no run inputs to sample a background from here: give background documents (or model: PATH)", s.name)
		}
		inputs, err := s.inputs()
		if err != nil {
			return nil, nil, fmt.Errorf("%s: background from the run's inputs: %w", s.name, err)
		}
		k := max(len(ex), minDomainSample)
		bg, s.bgInfo, err = sampleBackground(inputs, s.examples, ex, s.sources, s.opt.Seed, k, s.upstream)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: examples: %w", s.name, err)
		}
		if len(bg) == 0 {
			return nil, nil, fmt.Errorf("%s: the sample of the run's inputs holds no background document (every input is an example, or earlier stages drop them all): give background", s.name)
		}
		return ex, bg, nil
	}
	if bg, err = readTexts(s.background, maxDomainTrainDocs); err != nil {
		return nil, nil, fmt.Errorf("%s: background: %w", s.name, err)
	}
	return ex, bg, nil
}

// readTexts returns the texts of the documents in paths (globs and
// directories expanded, files in sorted order), at most max of them. Any
// unreadable file or record is an error naming it: training data is small
// and its user wants to know.
func readTexts(paths []string, max int) ([]string, error) {
	var out []string
	for _, pat := range paths {
		files, err := read.ExpandPath(pat)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", pat, err)
		}
		for _, file := range files {
			err := readFileTexts(file, func(text string) bool {
				out = append(out, text)
				return len(out) < max
			})
			if err != nil {
				return nil, err
			}
			if len(out) >= max {
				return out, nil
			}
		}
	}
	return out, nil
}

func readFileTexts(file string, emit func(string) bool) error {
	f, err := read.OpenFile(file)
	if err != nil {
		return err
	}
	defer f.Close()
	var rr read.RecordReader
	if read.GuessFormat(file, nil) == read.FormatParquet {
		osf, ok := f.(*os.File)
		if !ok {
			return fmt.Errorf("%s: parquet cannot be read from standard input", file)
		}
		if rr, err = read.NewParquetReader(osf, file, 0, read.ReadOptions{TextField: "text"}); err != nil {
			return fmt.Errorf("%s: %w", file, err)
		}
	} else {
		dec, err := read.Decode(f)
		if err != nil {
			return fmt.Errorf("%s: %w", file, err)
		}
		defer dec.Close()
		if rr, _, err = read.NewRecordReader(dec, file, 0, read.ReadOptions{TextField: "text"}); err != nil {
			return fmt.Errorf("%s: %w", file, err)
		}
	}
	for {
		rec, err := rr.Next()
		if rec.Issue != nil && rec.Doc == nil {
			return rec.Issue
		}
		if rec.Doc != nil && !emit(rec.Doc.Text) {
			return nil
		}
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return fmt.Errorf("%s: %w", file, err)
		}
	}
}

func (s *domainStage) Name() string          { return s.name }
func (s *domainStage) Kind() string          { return "domain" }
func (s *domainStage) MetricNames() []string { return domainMetrics }

// Rules returns the min_score rule (none in keep_fraction mode, where the
// stage is global).
func (s *domainStage) Rules() []Rule {
	if s.keepFraction > 0 {
		return nil
	}
	return s.rules
}

// Process scores the document and applies min_score. A document of a
// source the stage is not limited to gets a null score (NaN), which keeps
// it, in what-if too.
func (s *domainStage) Process(d *Doc) Decision {
	if s.sources != nil && !s.sources[d.Source] {
		return Decision{Metrics: []float64{math.NaN()}}
	}
	score := s.model.Score(d.Text)
	return ApplyRules(s.rules, domainMetrics, []float64{score})
}

// StageFiles lists the model written into the run directory, for the
// manifest (nil when the stage was built without a run directory).
func (s *domainStage) StageFiles() []StageFile { return s.stored }

// Describe trains the model (under `winnow check` it is not trained when
// the stage is built) and reports its k-fold cross-validated accuracy and
// AUC on the examples against the background, and the model's size.
func (s *domainStage) Describe() string {
	var b strings.Builder
	if s.modelPath != "" {
		if s.model == nil {
			if err := s.load(); err != nil {
				return "error: " + err.Error()
			}
		}
		fmt.Fprintf(&b, "model %s (%s, %d buckets, %d bytes, xxh3 %s)", s.modelPath, s.model.Method, s.model.Buckets(), s.model.SizeBytes(), s.hash)
		if len(s.examples) == 0 || len(s.background) == 0 {
			// Cross-validation needs both sets given.
			return b.String()
		}
		b.WriteString("\n")
	}
	ex, bg, err := s.readTraining()
	if err != nil {
		return "error: " + err.Error()
	}
	cv, err := domain.CrossValidate(ex, bg, s.folds, s.opt)
	if err != nil {
		return "error: " + err.Error()
	}
	opt := s.opt
	buckets := opt.Buckets
	if buckets == 0 {
		buckets = domain.DefaultClassifierBuckets
		if s.method == domain.Importance {
			buckets = domain.DefaultImportanceBuckets
		}
	}
	fmt.Fprintf(&b, "%s on %d examples and %d background documents, %d buckets (model %d bytes)\n", s.method, len(ex), len(bg), buckets, 4*buckets)
	if s.sampleBg {
		fmt.Fprintf(&b, "%s\n", s.bgInfo)
	} else {
		fmt.Fprintf(&b, "background: %d documents from %s\n", len(bg), strings.Join(s.background, ", "))
	}
	fmt.Fprintf(&b, "%d-fold cross-validation: accuracy %.3f, AUC %.3f", cv.Folds, cv.Accuracy, cv.AUC)
	if s.keepFraction > 0 {
		how := "the highest domain_score"
		if s.method == domain.Importance {
			how = "a sample in proportion to the importance weights (Gumbel top-k)"
		}
		fmt.Fprintf(&b, "\nkeep_fraction %g: keeps %s of the documents reaching the stage", s.keepFraction, how)
	}
	return b.String()
}

// PerDocument returns the stage as a per-document Stage unless
// keep_fraction makes it global.
func (s *domainStage) PerDocument() Stage {
	if s.keepFraction > 0 {
		return nil
	}
	return s
}

// rankKey returns the document's score and rank key, and false for a
// document outside `sources`.
func (s *domainStage) rankKey(d *Doc) (score, key float64, ok bool) {
	if s.sources != nil && !s.sources[d.Source] {
		return math.NaN(), 0, false
	}
	score, logit, n := s.model.Eval(d.Text)
	if s.method != domain.Importance {
		return score, score, true
	}
	logW := (logit - float64(s.model.Bias)) * float64(n)
	return score, domain.GumbelKey(logW, s.seed, d.ID), true
}

// Scan computes the document's rank key (nil outside `sources`).
func (s *domainStage) Scan(d *Doc) any {
	if _, key, ok := s.rankKey(d); ok {
		return key
	}
	return nil
}

// Collect keeps the rank keys in input order.
func (s *domainStage) Collect(order OrderKey, id string, keys any) error {
	if key, ok := keys.(float64); ok {
		s.ranked = append(s.ranked, rankedDoc{key, order})
	}
	return nil
}

// Reduce finds the cut: the smallest kept key (and, among equal keys, the
// latest kept order key).
func (s *domainStage) Reduce() error {
	k := domain.KeepCount(s.keepFraction, len(s.ranked))
	if k == 0 {
		s.keepNone = true
		return nil
	}
	keys := make([]float64, len(s.ranked))
	for i, r := range s.ranked {
		keys[i] = r.key
	}
	// TopK breaks ties by index, and Collect ran in input order.
	top := domain.TopK(keys, k)
	last := s.ranked[top[len(top)-1]]
	s.cutKey, s.cutOrder = last.key, last.order
	s.ranked = nil
	return nil
}

// Apply keeps the documents at or above the cut.
func (s *domainStage) Apply(d *Doc) Decision {
	score, key, ok := s.rankKey(d)
	if !ok {
		return Decision{Metrics: []float64{score}}
	}
	if !s.keepNone && (key > s.cutKey || key == s.cutKey && d.Order <= s.cutOrder) {
		return Decision{Metrics: []float64{score}}
	}
	dec := DropDoc("keep_fraction", roundMetric(key), roundMetric(s.cutKey))
	dec.Metrics = []float64{score}
	return dec
}

// Close releases the rank keys.
func (s *domainStage) Close() error {
	s.ranked = nil
	return nil
}
