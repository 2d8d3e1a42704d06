package audit

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// Run is an opened run directory: its manifest and where its ledger,
// metrics and inputs are.
type Run struct {
	// Dir is the run directory (absolute).
	Dir      string
	Manifest *record.Manifest
	// Steps are the run's stages between "read" and "write", in order.
	Steps []*StepInfo
	// SpecDir is the directory relative input and eval paths resolve
	// against (given, or guessed from the run directory and output.dir).
	SpecDir string
	// Spec is the manifest's config parsed back into a spec, with paths
	// resolved against SpecDir; nil when it could not be parsed (SpecErr).
	Spec    *spec.Spec
	SpecErr error
	// Inputs describes each manifest input: where it is now and whether
	// it still matches the run (same size).
	Inputs []InputState
	// Contam is OUT/contamination.json, or nil.
	Contam    *stages.ContamReport
	ContamErr error
	// Notes are problems found while opening (unreadable files...).
	Notes []string

	inputIndex map[string]int
	rules      map[string]rulesEntry
	replays    map[string]replayEntry
	ledgerOnly []string // ledger files of stages that are not steps (besides read)
}

// StepInfo is one stage of the run.
type StepInfo struct {
	Index int
	Name  string
	Kind  string
	// Global is true for a stage that decided after seeing every
	// document (dedup, counting contamination): documents removed before
	// it were not measured by the stages after it.
	Global bool
	// Counters are the manifest's flow numbers of the stage.
	Counters *record.Counters
	// MetricsPath is OUT/metrics/<name>.jsonl.zst ("" when absent);
	// MetricNames are the names found in it, in file order (filled by
	// the first walk).
	MetricsPath string
	MetricNames []string
	// LedgerPath is OUT/ledger/<name>.jsonl.zst ("" when absent).
	LedgerPath string
	// Spec is the stage's entry in the spec (nil for the tokenize stage
	// the output section implies).
	Spec *spec.StageSpec
}

// InputState is one input file of the run, as found now.
type InputState struct {
	record.InputSummary
	// Path is where the file is looked for now.
	Path string
	// Status is "ok", "missing", "changed" (size differs from the run)
	// or "stdin".
	Status  string
	Options read.ReadOptions
}

// OpenOptions tune Open.
type OpenOptions struct {
	// SpecDir overrides the guessed spec directory.
	SpecDir string
}

// Open reads dir/manifest.json and finds the run's ledger and metrics
// files. It fails only when the manifest cannot be read.
func Open(dir string, opt OpenOptions) (*Run, error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return nil, err
	}
	m, err := record.ReadManifest(abs)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s is not a run directory: no manifest.json", dir)
		}
		return nil, err
	}
	r := &Run{Dir: abs, Manifest: m, inputIndex: map[string]int{}}
	for i, in := range m.Inputs {
		if _, dup := r.inputIndex[in.Path]; !dup {
			r.inputIndex[in.Path] = i
		}
	}
	r.SpecDir = opt.SpecDir
	if r.SpecDir == "" {
		r.SpecDir = r.guessSpecDir()
	} else if r.SpecDir, err = filepath.Abs(r.SpecDir); err != nil {
		return nil, err
	}
	r.parseSpec()
	for i, c := range m.Stages {
		if i == 0 && c.Name == "read" || i == len(m.Stages)-1 && c.Name == "write" {
			continue
		}
		st := &StepInfo{Index: len(r.Steps), Name: c.Name, Kind: c.Kind, Counters: c}
		if p := filepath.Join(abs, "metrics", c.Name+".jsonl.zst"); fileExists(p) {
			st.MetricsPath = p
		}
		if p := filepath.Join(abs, "ledger", c.Name+".jsonl.zst"); fileExists(p) {
			st.LedgerPath = p
		}
		if r.Spec != nil {
			for j := range r.Spec.Stages {
				if r.Spec.Stages[j].Name == c.Name {
					st.Spec = &r.Spec.Stages[j]
				}
			}
		}
		// A stage that wrote metrics ran per document. A registered
		// global kind without metrics ran as a global stage; an unknown
		// kind without metrics is treated as global, the cautious choice
		// (what-if then does not assume shadow measurements across it).
		if st.MetricsPath == "" {
			k, ok := stages.LookupKind(c.Kind)
			st.Global = !ok || k.NewGlobal != nil
			if ok && k.New != nil {
				st.Global = false
			}
		}
		// A global stage may also write metrics (domain with
		// keep_fraction); the manifest says how it ran.
		if c.Global {
			st.Global = true
		}
		r.Steps = append(r.Steps, st)
	}
	known := map[string]bool{"read": true}
	for _, s := range r.Steps {
		known[s.Name] = true
	}
	entries, _ := os.ReadDir(filepath.Join(abs, "ledger"))
	for _, e := range entries {
		name := strings.TrimSuffix(e.Name(), ".jsonl.zst")
		if name == e.Name() || known[name] {
			continue
		}
		r.ledgerOnly = append(r.ledgerOnly, name)
	}
	sort.Strings(r.ledgerOnly)
	r.resolveInputs()
	cp := filepath.Join(abs, "contamination.json")
	if fileExists(cp) {
		r.Contam, r.ContamErr = stages.ReadContamReport(cp)
		if r.ContamErr != nil {
			r.Notes = append(r.Notes, fmt.Sprintf("contamination report unreadable: %v", r.ContamErr))
		}
	}
	return r, nil
}

func fileExists(p string) bool {
	st, err := os.Stat(p)
	return err == nil && !st.IsDir()
}

// StepByName returns the step with the given name (or kind when no name
// matches), or nil.
func (r *Run) StepByName(name string) *StepInfo {
	for _, s := range r.Steps {
		if s.Name == name {
			return s
		}
	}
	for _, s := range r.Steps {
		if s.Kind == name {
			return s
		}
	}
	return nil
}

// TokenStep returns the step that counted tokens (kind "tokenize" with a
// "tokens" metric file), or nil.
func (r *Run) TokenStep() *StepInfo {
	for _, s := range r.Steps {
		if s.Kind == "tokenize" && s.MetricsPath != "" {
			return s
		}
	}
	return nil
}

// configOutputDir returns the config's output.dir ("" when unset).
func (r *Run) configOutputDir() string {
	cfg, _ := r.Manifest.Config.(map[string]any)
	out, _ := cfg["output"].(map[string]any)
	d, _ := out["dir"].(string)
	return d
}

// guessSpecDir picks the directory relative paths of the run's spec
// resolved against: the run directory minus the spec's output.dir when
// the run was written there, else the run's parent, else the working
// directory; the first candidate under which the first relative input
// exists wins.
func (r *Run) guessSpecDir() string {
	var cands []string
	if d := r.configOutputDir(); d != "" && !filepath.IsAbs(d) {
		rel := filepath.Clean(d)
		if strings.HasSuffix(r.Dir, string(filepath.Separator)+rel) {
			cands = append(cands, strings.TrimSuffix(r.Dir, string(filepath.Separator)+rel))
		}
	}
	cands = append(cands, filepath.Dir(r.Dir))
	if wd, err := os.Getwd(); err == nil {
		cands = append(cands, wd)
	}
	for _, in := range r.Manifest.Inputs {
		if in.Path == "-" || filepath.IsAbs(in.Path) {
			continue
		}
		for _, c := range cands {
			if fileExists(filepath.Join(c, filepath.FromSlash(in.Path))) {
				return c
			}
		}
		break
	}
	return cands[0]
}

// parseSpec rebuilds the spec from the manifest's config. The path given
// to ParseSpec only sets the directory paths resolve against.
func (r *Run) parseSpec() {
	data, err := json.Marshal(r.Manifest.Config)
	if err != nil {
		r.SpecErr = err
		return
	}
	r.Spec, r.SpecErr = spec.ParseSpec(r.configPath(), data)
	if r.SpecErr != nil {
		r.Notes = append(r.Notes, fmt.Sprintf("the manifest's config does not parse with this winnow (%v): thresholds cannot be rebuilt", r.SpecErr))
	}
}

func (r *Run) configPath() string {
	return filepath.Join(r.SpecDir, "manifest.json#config")
}

// freshSpec parses the config again (Params keep state, so every build
// with other overrides starts from a fresh parse) and applies sets.
func (r *Run) freshSpec(sets []string) (*spec.Spec, error) {
	data, err := json.Marshal(r.Manifest.Config)
	if err != nil {
		return nil, err
	}
	s, err := spec.ParseSpec(r.configPath(), data)
	if err != nil {
		return nil, err
	}
	if err := spec.ApplySets(s, sets); err != nil {
		return nil, err
	}
	return s, nil
}

// Built is a stage rebuilt from the config.
type Built struct {
	Stage  stages.Stage
	Global stages.GlobalStage
}

// Rules returns the stage's threshold rules, or nil when it is not a
// ThresholdStage.
func (b Built) Rules() []stages.Rule {
	if t, ok := b.Stage.(stages.ThresholdStage); ok {
		return t.Rules()
	}
	return nil
}

// Threshold reports whether the stage decides by a rule table.
func (b Built) Threshold() bool {
	_, ok := b.Stage.(stages.ThresholdStage)
	return ok
}

// BuildStep constructs step from the run's config with sets applied
// ("stage.key=value"). checking builds as `winnow check` does (no model
// loading); stages whose constructors need files (eval sets, tokenizer
// files) fail when those are gone.
func (r *Run) BuildStep(st *StepInfo, sets []string, checking bool) (Built, error) {
	if st.Spec == nil {
		return Built{}, fmt.Errorf("stage %s is not in the run's config", st.Name)
	}
	s, err := r.freshSpec(sets)
	if err != nil {
		return Built{}, err
	}
	var sp *spec.StageSpec
	for i := range s.Stages {
		if s.Stages[i].Name == st.Name {
			sp = &s.Stages[i]
		}
	}
	if sp == nil {
		return Built{}, fmt.Errorf("stage %s is not in the run's config", st.Name)
	}
	k, ok := stages.LookupKind(sp.Kind)
	if !ok {
		return Built{}, fmt.Errorf("stage kind %q is not known to this winnow", sp.Kind)
	}
	env := stages.Env{SpecDir: r.SpecDir, Seed: s.Seed, MemoryBudget: s.Memory, Checking: checking, TempDir: os.TempDir()}
	if k.New != nil {
		stg, err := k.New(sp.Params, env)
		if err != nil {
			return Built{}, fmt.Errorf("rebuilding stage %s: %w", st.Name, err)
		}
		return Built{Stage: stg}, nil
	}
	g, err := k.NewGlobal(sp.Params, env)
	if err != nil {
		return Built{}, fmt.Errorf("rebuilding stage %s: %w", st.Name, err)
	}
	b := Built{Global: g}
	if pd, ok := g.(stages.PerDocumenter); ok {
		b.Stage = pd.PerDocument()
	}
	return b, nil
}

// resolveInputs finds each manifest input on disk and the read options it
// was read with.
func (r *Run) resolveInputs() {
	var files map[string]read.InputFile
	if r.Spec != nil {
		if fs, err := spec.ResolveInputs(r.Spec); err == nil {
			files = map[string]read.InputFile{}
			for _, f := range fs {
				files[f.Display] = f
			}
		}
	}
	for _, in := range r.Manifest.Inputs {
		st := InputState{InputSummary: in, Path: in.Path}
		if f, ok := files[in.Path]; ok {
			st.Path = f.Path
			st.Options = *f.Options
		} else {
			if in.Path != "-" && !filepath.IsAbs(in.Path) {
				st.Path = filepath.Join(r.SpecDir, filepath.FromSlash(in.Path))
			}
			if r.Spec != nil {
				for _, is := range r.Spec.Inputs {
					if is.Source == in.Source {
						st.Options = is.ReadOptions
						break
					}
				}
			}
		}
		if st.Options.Source == "" {
			st.Options = read.ReadOptions{Source: in.Source, Format: in.Format, TextField: "text", IDField: "id"}
		}
		switch fi, err := os.Stat(st.Path); {
		case in.Path == "-":
			st.Status = "stdin"
		case err != nil:
			st.Status = "missing"
		case fi.Size() != in.Bytes:
			st.Status = "changed"
		default:
			st.Status = "ok"
		}
		r.Inputs = append(r.Inputs, st)
	}
}

// orderOf returns the order key of a ledger record (input index from its
// file, record index from its line).
func (r *Run) orderOf(rec *Record) (stages.OrderKey, bool) {
	i, ok := r.inputIndex[rec.File]
	if !ok {
		return 0, false
	}
	return stages.MakeOrderKey(i, rec.Line), true
}

type rulesEntry struct {
	rules []stages.Rule
	err   error
}

// StepRules returns the run's own threshold rules of a step, rebuilt from
// the config (checking mode, cached); nil for a stage that is not a
// threshold stage or could not be rebuilt (the error says why).
func (r *Run) StepRules(st *StepInfo) ([]stages.Rule, error) {
	if e, ok := r.rules[st.Name]; ok {
		return e.rules, e.err
	}
	if r.rules == nil {
		r.rules = map[string]rulesEntry{}
	}
	var e rulesEntry
	if st.Global || st.Spec == nil {
		e.err = fmt.Errorf("stage %s has no threshold rules", st.Name)
	} else if b, err := r.BuildStep(st, nil, true); err != nil {
		e.err = err
	} else {
		e.rules = b.Rules()
		if e.rules == nil {
			e.err = fmt.Errorf("stage %s (%s) is not a threshold stage", st.Name, st.Kind)
		}
	}
	r.rules[st.Name] = e
	return e.rules, e.err
}
