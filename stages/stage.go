package stages

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"winnow/stages/read"
)

// Action is what a stage decided about one document.
type Action uint8

// The three decisions a stage can make.
const (
	Keep Action = iota // pass the document on unchanged
	Drop               // remove the document; Rule says why
	Edit               // replace the text; Changes says what changed
)

// String returns "keep", "drop" or "edit", the words the ledger uses.
func (a Action) String() string {
	switch a {
	case Drop:
		return "drop"
	case Edit:
		return "edit"
	}
	return "keep"
}

// Decision is a stage's verdict on one document.
//
// A drop names the rule that failed, the measured value and the limit it was
// held against. An edit carries the new text and counts of what changed
// (e.g. {"lines_removed": 3}). Extra holds stage-specific ledger fields
// ("of", "similarity", "eval", "item", "matches"...); they are merged into
// the ledger record as top-level keys.
type Decision struct {
	Action  Action
	Rule    string
	Value   any
	Limit   any
	Text    string
	Changes map[string]int
	Extra   map[string]any
	// Metrics are the values the stage measured on this document, aligned
	// with the stage's MetricNames(). They are written to OUT/metrics/ for
	// every document the stage saw, kept or not.
	Metrics []float64
	// Labels are text values measured with the metrics (the langid
	// stage's detected "lang"), written beside them to OUT/metrics/.
	Labels map[string]string
	// Meta is merged into the document's Meta (language, confidence...);
	// for a removed document only later stages' shadow measurement sees
	// it. It is not written to the ledger.
	Meta map[string]any
	// Tokens, when > 0, becomes the document's token count.
	Tokens int
}

// KeepDoc is the decision to pass a document on unchanged.
func KeepDoc() Decision { return Decision{} }

// DropDoc is the decision to remove a document because rule measured value
// against limit.
func DropDoc(rule string, value, limit any) Decision {
	return Decision{Action: Drop, Rule: rule, Value: value, Limit: limit}
}

// EditDoc is the decision to replace the document's text; rule names the
// edit and changes counts what changed.
func EditDoc(rule, text string, changes map[string]int) Decision {
	return Decision{Action: Edit, Rule: rule, Text: text, Changes: changes}
}

// Stage is a per-document stage: a pure function of one document and the
// stage's configuration. Process may be called from many goroutines at once
// and must not keep state between calls; it must not modify d (the runner
// applies edits).
type Stage interface {
	// Name is the stage's name in the ledger and manifest (its kind, or
	// the spec's "name" key when a kind is used twice).
	Name() string
	// Kind is the registered kind the stage was built from.
	Kind() string
	// MetricNames lists the metrics Process returns in Decision.Metrics,
	// in order. A stage that measures nothing returns nil.
	MetricNames() []string
	// Process decides about one document.
	Process(d *Doc) Decision
}

// Cmp says on which side of a limit a measured value keeps the document.
type Cmp uint8

// Comparison kinds for threshold rules.
const (
	AtLeast Cmp = iota // keep when value >= limit (a minimum)
	AtMost             // keep when value <= limit (a maximum)
	Below              // keep when value < limit (a strict maximum)
	Above              // keep when value > limit (a strict minimum)
)

// Keeps reports whether value keeps the document under limit.
func (c Cmp) Keeps(value, limit float64) bool {
	if math.IsNaN(value) {
		return true // a metric that does not apply never removes
	}
	switch c {
	case AtLeast:
		return value >= limit
	case AtMost:
		return value <= limit
	case Below:
		return value < limit
	case Above:
		return value > limit
	}
	return true
}

// String returns the comparison as an operator that keeps the document.
func (c Cmp) String() string {
	return [...]string{">=", "<=", "<", ">"}[c]
}

// Rule is one threshold of a threshold stage: the document is dropped with
// rule Name when Metric does not satisfy Cmp against Limit. Key is the spec
// key that sets Limit (what-if uses it: "quality.fewest_words=80"). Rules are
// evaluated in table order; the first failing rule is the one recorded.
type Rule struct {
	Name    string
	Key     string
	Metric  string
	Cmp     Cmp
	Limit   float64
	Enabled bool
}

// ThresholdStage is a stage whose keep/drop decision is a fixed table of
// rules over its metrics. What-if recomputes its decisions from the stored
// metrics alone, so such a stage must decide exactly as ApplyRules does.
type ThresholdStage interface {
	Stage
	Rules() []Rule
}

// LabelRule is a rule on a text label rather than a number: a document
// passes when its Label (a text value the stage stores with its metrics)
// is one of Allowed. The stage stores the test's outcome, 1 or 0, as
// Metric, and its rule table has a rule Rule that keeps Metric >= 1, so
// ApplyRules decides it like any limit. What-if recomputes Metric from the
// stored label for another Allowed, set through Key.
type LabelRule struct {
	Rule, Key, Metric, Label string
	Allowed                  []string
}

// LabelRuler is a ThresholdStage with rules on labels.
type LabelRuler interface {
	ThresholdStage
	LabelRules() []LabelRule
}

// ApplyRules returns the decision of rules over metrics named by names:
// the first enabled rule whose metric fails its limit drops the document.
func ApplyRules(rules []Rule, names []string, metrics []float64) Decision {
	for _, r := range rules {
		if !r.Enabled {
			continue
		}
		i := indexOf(names, r.Metric)
		if i < 0 || i >= len(metrics) {
			continue
		}
		if !r.Cmp.Keeps(metrics[i], r.Limit) {
			return Decision{Action: Drop, Rule: r.Name, Value: roundMetric(metrics[i]), Limit: r.Limit, Metrics: metrics}
		}
	}
	return Decision{Metrics: metrics}
}

func indexOf(names []string, s string) int {
	for i, n := range names {
		if n == s {
			return i
		}
	}
	return -1
}

// roundMetric rounds a measured value to 6 significant decimals for the
// ledger, so records stay short and stable across platforms.
func roundMetric(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	return math.Round(v*1e6) / 1e6
}

// GlobalStage is a stage that must see every document before it can decide
// (deduplication, frequency-filtered contamination). It runs in three
// phases so that one process and a cluster run the same code:
//
//   - Scan computes a document's compact keys. It is pure and runs on any
//     worker, in any order.
//   - Collect receives the keys in input order on one goroutine and keeps
//     what Reduce needs (spilling to disk under the memory budget).
//   - Reduce decides, after the last Collect, which documents to remove.
//   - Apply returns the decision for one document; it is pure after Reduce
//     and runs on any worker.
type GlobalStage interface {
	Name() string
	Kind() string
	Scan(d *Doc) any
	Collect(order OrderKey, id string, keys any) error
	Reduce() error
	Apply(d *Doc) Decision
	// Close releases temp files and memory.
	Close() error
}

// KeyCodec is implemented by global stages whose scan keys can be stored
// between the phases of a split run (see stages/run "phases"): Scan runs in
// one process, the keys go to a file, and Collect runs in another process.
// DecodeKeys(AppendKeys(nil, k)) must give keys that Collect treats exactly
// as k (a nil Scan result included); DecodeKeys must not keep b, whose
// bytes are reused for the next document. Without a codec the next phase scans
// the stored documents again (correct, but Scan's work is repeated).
type KeyCodec interface {
	AppendKeys(b []byte, keys any) []byte
	DecodeKeys(b []byte) (any, error)
}

// Feed calls collect with every document's scan keys, in input order:
// exactly the sequence of Collect calls a single process makes. It may be
// called more than once.
type Feed func(collect func(order OrderKey, id string, keys any) error) error

// SplitReducer is implemented by global stages whose Reduce can be cut
// into a fixed number of parts that separate processes reduce: a split
// run's reduce phase hands the parts out to its tasks, and every task of
// the next phase loads all the parts' results instead of reducing. A task
// then holds only its parts' share of the keys.
type SplitReducer interface {
	// ReduceParts is the number of parts, fixed by the stage's
	// parameters (never by the number of tasks).
	ReduceParts() int
	// ReduceSome reduces the parts ps (ascending, a subset of
	// 0..ReduceParts()-1) from the keys feed delivers, keeping only what
	// those parts need, and returns one result per part of ps, in order.
	// Results are deterministic bytes.
	ReduceSome(ps []int, feed Feed) ([][]byte, error)
	// LoadReduced takes every part's result, in part order, and makes
	// Apply decide every document exactly as after Collect and Reduce in
	// one process. Unless the stage was built with Env.NoKeyFiles it also
	// writes the run's key files, byte-identical to those Reduce writes;
	// for that it may call feed.
	LoadReduced(results [][]byte, feed Feed) error
}

// ReportSplitter is implemented by Observer stages whose run-wide report
// can be built in parts: in a split run each unit of work observes a range
// of consecutive documents and saves its part (SaveReport returns the part
// observed since the last save and starts a new, empty part); the process
// that finishes the run merges the parts in input order (MergeReport) and
// then calls Finish. Observing every document in one process, or in parts
// saved and merged in order, must give byte-identical Finish output.
type ReportSplitter interface {
	SaveReport() ([]byte, error)
	MergeReport(part []byte) error
}

// Observer is implemented by stages that aggregate over the whole run
// (e.g. a contamination report). Observe is called on one goroutine, in
// input order, with every document the stage decided about (not shadow
// measurements) and its decision.
type Observer interface {
	Observe(d *Doc, dec *Decision)
}

// Finisher is implemented by stages that write a run-level file when the
// run ends (e.g. OUT/contamination.json). Finish is called once, after the
// last document, with the run directory.
type Finisher interface {
	Finish(runDir string) error
}

// StageFile is a file a stage wrote into the run directory (a trained
// model, stored keys), recorded in the stage's manifest entry.
type StageFile struct {
	// Path is relative to the run directory, slash-separated.
	Path  string `json:"path"`
	Bytes int64  `json:"bytes"`
	XXH3  string `json:"xxh3"`
}

// FileWriter is implemented by stages that write files into the run
// directory when they are built; the manifest lists them with their hashes.
type FileWriter interface {
	StageFiles() []StageFile
}

// MetricUser is implemented by global stages that read metrics measured by
// earlier stages at scan time (e.g. a dedup keep rule preferring a higher
// quality score). UsesMetrics names them "stage.metric"; the runner checks
// that an earlier stage measures each one and records the values into
// Doc.Measured.
type MetricUser interface {
	UsesMetrics() []string
}

// Describer is implemented by stages that have something to show in
// `winnow check` beyond their parameters (e.g. an LSH S-curve).
type Describer interface {
	Describe() string
}

// Scope is a per-document stage's `only:` (its sources and the detected
// languages it applies to): a document outside passes the stage
// untouched and is not measured by it. An empty list does not restrict.
type Scope struct {
	Sources   []string `json:"sources,omitempty"`
	Languages []string `json:"languages,omitempty"`
}

// Match reports whether d is inside the scope: its source is one of
// Sources and its meta "lang" (from the langid stage) one of Languages.
func (s *Scope) Match(d *Doc) bool {
	if s == nil {
		return true
	}
	if len(s.Sources) > 0 && !slices.Contains(s.Sources, d.Source) {
		return false
	}
	if len(s.Languages) > 0 {
		lang, _ := d.Meta["lang"].(string)
		if !slices.Contains(s.Languages, lang) {
			return false
		}
	}
	return true
}

// String describes the scope, e.g. "sources web, forum; languages en".
func (s *Scope) String() string {
	var parts []string
	if len(s.Sources) > 0 {
		parts = append(parts, "sources "+strings.Join(s.Sources, ", "))
	}
	if len(s.Languages) > 0 {
		parts = append(parts, "languages "+strings.Join(s.Languages, ", "))
	}
	return strings.Join(parts, "; ")
}

// Env is what a stage constructor may use besides its own parameters.
type Env struct {
	// SpecDir is the directory of the spec file; relative paths in stage
	// parameters (eval sets, tokenizer files) are resolved against it.
	SpecDir string
	// RunDir is the output directory of the run (may be "" for `check`).
	RunDir string
	// TempDir is a directory for spill files, removed after the run.
	TempDir string
	// MemoryBudget is the number of bytes global stages may hold before
	// spilling sorted runs to TempDir.
	MemoryBudget int64
	// Seed is the run seed.
	Seed uint64
	// Against is a previous run directory whose kept documents' keys
	// incremental dedup compares with ("" for none).
	Against string
	// Checking is true under `winnow check`: constructors validate and
	// may skip expensive loading.
	Checking bool
	// LazyModels asks constructors to load large models on first use
	// rather than at once: a task of a split run builds every stage but
	// runs only its phase's.
	LazyModels bool
	// NoKeyFiles tells global stages not to write the run's key files
	// (keys/): in a split run only the task that runs the first unit of
	// the phase after a global stage writes them (the others would write
	// the same bytes).
	NoKeyFiles bool
	// Inputs returns the run's resolved input files (nil: unknown). The
	// domain stage draws its default background from them. Set by
	// spec.BuildStages.
	Inputs func() ([]read.InputFile, error)
	// Upstream passes d through the per-document stages that come before
	// the stage being built, in spec order and within their `only:`
	// scopes, applying edits and meta as the runner does; it returns
	// false when one of them drops d. Global stages before are not
	// applied. Set by spec.BuildStages for each stage (nil: none).
	Upstream func(d *Doc) bool
}

// Kind describes one registered stage kind.
type Kind struct {
	// Name is the spec's "kind" value.
	Name string
	// Doc is one line describing the stage, shown by `winnow check`.
	Doc string
	// New builds a per-document stage from its parameters. Exactly one of
	// New and NewGlobal is set.
	New func(p *Params, env Env) (Stage, error)
	// NewGlobal builds a global stage.
	NewGlobal func(p *Params, env Env) (GlobalStage, error)
}

var registry = map[string]Kind{}

// Register adds a stage kind to the table that specs are validated
// against. It panics on a duplicate name (a programming error).
func Register(k Kind) {
	if _, dup := registry[k.Name]; dup {
		panic(fmt.Sprintf("stages: kind %q registered twice", k.Name))
	}
	if (k.New == nil) == (k.NewGlobal == nil) {
		panic(fmt.Sprintf("stages: kind %q must set exactly one of New and NewGlobal", k.Name))
	}
	registry[k.Name] = k
}

// Kinds returns the registered kinds sorted by name.
func Kinds() []Kind {
	out := make([]Kind, 0, len(registry))
	for _, k := range registry {
		out = append(out, k)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out
}

// LookupKind returns the registered kind with the given name.
func LookupKind(name string) (Kind, bool) {
	k, ok := registry[name]
	return k, ok
}
