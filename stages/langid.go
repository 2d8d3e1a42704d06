package stages

import (
	"fmt"
	"math"
	"sync"

	"winnow/filters/langid"
)

// langidStage keeps documents written in one of the spec's languages. The
// language is detected among a wider candidate set, by default every
// language the models cover (a detector offered a single language always
// answers that one, so an English-only spec still has to tell German
// apart, and a language left out of the candidates is confidently named
// as its nearest candidate) by package filters/langid, which decides with
// lingua-go's models. The detected code and its confidence go into the
// metrics of every document the stage saw, kept or not ("lang" as a text
// label, "lang_conf" as a metric), so language breakdowns need only
// OUT/metrics/langid.jsonl.zst, and into the document's meta as "lang"
// and "lang_conf" (contract: later stages and
// output readers use these names).
//
// Rules, in the order they are checked (the first failing one drops):
//
//	no_language     letters >= min_letters (20) and letter_share >= min_letter_share (0.5):
//	                a document of fewer letters, or mostly markup, digits or
//	                symbols, is not guessed at
//	language        the detected language is one of `languages` (the ledger's
//	                value is the detected code, its limit the allowed list;
//	                "und" when no candidate could be named)
//	low_confidence  lang_conf >= min_confidence (0.5)
//
// The stage is a ThresholdStage: every rule is a limit on a stored metric
// (language on lang_allowed, 1 when the detected code is allowed), so
// what-if recomputes drops exactly. The language rule is also a LabelRule:
// what-if recomputes lang_allowed from the stored "lang" for another
// `languages`; its ledger value is the code, not the metric.
type langidStage struct {
	opts      langid.Options
	languages []string
	allowed   map[string]bool
	rules     []Rule

	once sync.Once
	det  *langid.Detector
	err  error
}

// Metrics measured by the langid stage, in Decision.Metrics order.
var langidMetrics = []string{"lang_conf", "letters", "letter_share", "script_share", "lang_allowed"}

// Defaults of the langid stage.
const (
	// langidMinLetters: below 20 letters (about four words) there is too
	// little text to name a language reliably (common practice).
	langidMinLetters = 20
	// langidMinLetterShare: a document whose non-space characters are
	// not mostly letters is markup, numbers or symbols.
	langidMinLetterShare = 0.5
	// langidMinConfidence is the default min_confidence.
	langidMinConfidence = 0.5
)

func init() {
	Register(Kind{
		Name: "langid",
		Doc:  "keep documents in the given languages (detected with lingua-go models among candidates); meta lang, lang_conf",
		New:  newLangid,
	})
}

func newLangid(p *Params, env Env) (Stage, error) {
	s := &langidStage{allowed: map[string]bool{}}
	langs := p.Strings("languages", nil)
	if !p.Has("languages") {
		p.Errorf("languages", "required: the ISO 639-1 codes a document may be kept in, e.g. [en]")
	} else if len(langs) == 0 {
		p.Errorf("languages", "want at least one language code")
	}
	for _, c := range langs {
		code, err := langid.CanonicalCode(c)
		if err != nil {
			p.Errorf("languages", "%v", err)
			continue
		}
		if !s.allowed[code] {
			s.allowed[code] = true
			s.languages = append(s.languages, code)
		}
	}
	cands := p.Strings("candidates", langid.SupportedCodes())
	inCands := map[string]bool{}
	candsOK := true
	for _, c := range cands {
		code, err := langid.CanonicalCode(c)
		if err != nil {
			p.Errorf("candidates", "%v", err)
			candsOK = false
			continue
		}
		inCands[code] = true
	}
	if candsOK {
		if len(cands) == 0 {
			p.Errorf("candidates", "want at least one language code")
		}
		for _, code := range s.languages {
			if !inCands[code] {
				p.Errorf("candidates", "must include the kept language %q (detection only names candidates)", code)
			}
		}
	}
	s.opts.Candidates = cands
	minConf := p.Float("min_confidence", langidMinConfidence, 0, 1)
	minLetters := p.Int("min_letters", langidMinLetters, 0, math.MaxInt32)
	minShare := p.Float("min_letter_share", langidMinLetterShare, 0, 1)
	s.opts.Windows = int(p.Int("sample_windows", langid.DefaultWindows, 1, langid.MaxWindows))
	s.opts.MaxWindows = int(p.Int("max_sample_windows", int64(max(langid.DefaultMaxWindows, s.opts.Windows)), 1, langid.MaxWindows))
	if s.opts.MaxWindows < s.opts.Windows {
		p.Errorf("max_sample_windows", "%d is less than sample_windows (%d)", s.opts.MaxWindows, s.opts.Windows)
	}
	s.opts.WindowChars = int(p.Int("window_chars", langid.DefaultWindowChars, 50, langid.MaxWindowChars))
	s.opts.LowAccuracy = p.Bool("low_accuracy", false)
	s.rules = []Rule{
		{Name: "no_language", Key: "min_letters", Metric: "letters", Cmp: AtLeast, Limit: float64(minLetters), Enabled: minLetters > 0},
		{Name: "no_language", Key: "min_letter_share", Metric: "letter_share", Cmp: AtLeast, Limit: minShare, Enabled: minShare > 0},
		// No key sets this limit: `languages` is a set, not a number
		// (LabelRules: what-if varies it through the stored label).
		{Name: "language", Key: "", Metric: "lang_allowed", Cmp: AtLeast, Limit: 1, Enabled: true},
		{Name: "low_confidence", Key: "min_confidence", Metric: "lang_conf", Cmp: AtLeast, Limit: minConf, Enabled: minConf > 0},
	}
	if err := p.Done(); err != nil {
		return nil, err
	}
	if !env.Checking && !env.LazyModels {
		// Build now (loads lingua's models once per process), so the
		// first documents do not pay for it and errors surface here.
		if _, err := s.detector(); err != nil {
			return nil, fmt.Errorf("%s: %w", p.Path(), err)
		}
	}
	return s, nil
}

// detector returns the shared detector, built on first use.
func (s *langidStage) detector() (*langid.Detector, error) {
	s.once.Do(func() { s.det, s.err = langid.New(s.opts) })
	return s.det, s.err
}

func (s *langidStage) Name() string          { return "langid" }
func (s *langidStage) Kind() string          { return "langid" }
func (s *langidStage) MetricNames() []string { return langidMetrics }
func (s *langidStage) Rules() []Rule         { return s.rules }

// LabelRules: the language rule keeps a document whose stored "lang" is one
// of `languages`.
func (s *langidStage) LabelRules() []LabelRule {
	return []LabelRule{{Rule: "language", Key: "languages", Metric: "lang_allowed", Label: "lang", Allowed: s.languages}}
}

// Process detects the document's language and applies the rules.
func (s *langidStage) Process(d *Doc) Decision {
	det, err := s.detector()
	if err != nil { // unreachable: New built the detector (outside `check`)
		dec := DropDoc("detector_error", nil, nil) // the message goes in extra: value stays numeric in this ledger
		dec.Extra = map[string]any{"error": err.Error()}
		return dec
	}
	r := det.Detect(d.Text)
	conf := langidRound(r.Confidence)
	allowed := 0.0
	if s.allowed[r.Lang] {
		allowed = 1
	}
	metrics := []float64{conf, float64(r.Letters), langidRound(r.LetterShare), langidRound(r.ScriptShare), allowed}
	dec := ApplyRules(s.rules, langidMetrics, metrics)
	if dec.Action == Drop && dec.Rule == "language" {
		dec.Value = r.Lang
		dec.Limit = s.languages
	}
	dec.Meta = map[string]any{"lang": r.Lang, "lang_conf": conf}
	dec.Labels = map[string]string{"lang": r.Lang} // lang_conf is a metric
	return dec
}

// langidRound rounds to 4 decimals: the precision of lang_conf in meta, used
// for the metrics too so that what-if sees the values the rules saw.
func langidRound(v float64) float64 { return math.Round(v*1e4) / 1e4 }
