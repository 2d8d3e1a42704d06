// Package spec loads a pipeline spec (YAML) with file:line:column errors
// and suggestions, applies --set overrides and builds the spec's stages.
package spec

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"

	"github.com/zeebo/xxh3"
	"gopkg.in/yaml.v3"

	"winnow/filters/langid"
	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/suggest"
)

// DefaultChunkBytes is the default size of an input chunk (chunk_bytes).
const DefaultChunkBytes = 64 << 20

// Spec is a loaded pipeline spec (YAML). See README "Pipeline spec".
type Spec struct {
	// File is the spec's path; Dir its directory, against which relative
	// paths resolve.
	File, Dir string
	Name      string
	Seed      uint64
	// Memory is the byte budget of global stages before they spill.
	Memory int64
	// ChunkBytes is the size of the units of work a run is cut into:
	// consecutive input files of about this many bytes on disk (a larger
	// file is a chunk of its own). Units are fixed by the spec, so a run
	// split across any number of tasks writes the same bytes.
	ChunkBytes int64
	Inputs     []InputSpec
	Stages     []StageSpec
	// Output is the "output" mapping; OutputDir its "dir" key resolved.
	Output    *stages.Params
	OutputDir string
	// Config is the spec as plain data (written to the manifest) and
	// ConfigHash its xxh3 over canonical JSON.
	Config     any
	ConfigHash string
}

// InputSpec is one entry of "inputs".
type InputSpec struct {
	read.ReadOptions
	Paths []string
	// at is the position of the entry, for error messages.
	at *stages.Params
}

// StageSpec is one entry of "stages".
type StageSpec struct {
	Kind   string
	Name   string
	Params *stages.Params
	// Only is the stage's `only:` scope (nil: every document).
	Only *stages.Scope
}

// formatNames are the choices of an input's "format" key.
var formatNames = func() []string {
	var out []string
	for _, f := range read.Formats {
		out = append(out, string(f))
	}
	return out
}()

// LoadSpec reads and validates a spec file: every unknown key, wrong type
// and out-of-range value is an error naming file:line:column. Stage
// parameters are validated by building each stage (with env.Checking set
// when only checking).
func LoadSpec(path string) (*Spec, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseSpec(path, data)
}

// ParseSpec parses spec bytes; path is used in messages and to resolve
// relative paths.
func ParseSpec(path string, data []byte) (*Spec, error) {
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(doc.Content) == 0 {
		return nil, fmt.Errorf("%s: empty spec", path)
	}
	root := doc.Content[0]
	if root.Kind != yaml.MappingNode {
		return nil, fmt.Errorf("%s:%d:%d: the spec must be a mapping", path, root.Line, root.Column)
	}
	abs, _ := filepath.Abs(path)
	s := &Spec{File: path, Dir: filepath.Dir(abs)}
	p := stages.NewParams(path, "spec", root)
	s.Name = p.String("name", "winnow")
	if err := checkName(s.Name); err != nil {
		p.Errorf("name", "%v", err)
	}
	s.Seed = uint64(p.Int("seed", 0, 0, 1<<62))
	s.Memory = p.Size("memory", 1<<30, 1<<10, 1<<44)
	s.ChunkBytes = p.Size("chunk_bytes", DefaultChunkBytes, 1, 1<<44)
	var errs []error
	inputs := p.List("inputs")
	if !p.Has("inputs") || len(inputs) == 0 {
		p.Errorf("inputs", "at least one input is required")
	}
	for _, ip := range inputs {
		in := InputSpec{at: ip}
		in.Source = ip.String("source", "")
		if in.Source == "" {
			ip.Errorf("source", "every input needs a source label")
		}
		in.Paths = ip.Strings("paths", nil)
		if len(in.Paths) == 0 {
			ip.Errorf("paths", "at least one path, glob, directory or \"-\" is required")
		}
		in.Format = read.Format(ip.String("format", string(read.FormatAuto), formatNames...))
		in.TextField = ip.String("text_field", "text")
		if ip.Has("html_field") {
			if ip.Has("text_field") {
				ip.Errorf("html_field", "set text_field (plain text) or html_field (HTML, reduced to its main text), not both")
			}
			in.TextField, in.HTML = ip.String("html_field", ""), true
			if in.TextField == "" {
				ip.Errorf("html_field", "want the name of the field or column that holds HTML")
			}
		}
		in.IDField = ip.String("id_field", "id")
		if ip.Has("meta_fields") {
			in.MetaFields = ip.Strings("meta_fields", nil)
			if in.MetaFields == nil {
				in.MetaFields = []string{}
			}
		}
		in.TextMode = ip.String("text_mode", "file", "file", "blocks")
		in.MaxDocBytes = int(ip.Size("max_doc_bytes", read.DefaultMaxDocBytes, 1<<10, 1<<31))
		if err := ip.Done(); err != nil {
			errs = append(errs, err)
		}
		s.Inputs = append(s.Inputs, in)
	}
	names := map[string]int{}
	for _, sp := range p.List("stages") {
		st := StageSpec{Params: sp}
		st.Kind = sp.String("kind", "")
		sp.Ignore("kind", "name")
		if _, ok := stages.LookupKind(st.Kind); !ok {
			var known []string
			for _, k := range stages.Kinds() {
				known = append(known, k.Name)
			}
			msg := fmt.Sprintf("unknown stage kind %q (known: %s)", st.Kind, strings.Join(known, ", "))
			if n := suggest.Nearest(st.Kind, known); n != "" {
				msg = fmt.Sprintf("unknown stage kind %q (did you mean %q?)", st.Kind, n)
			}
			sp.Errorf("kind", "%s", msg)
			errs = append(errs, sp.Done())
			continue
		}
		st.Name = sp.String("name", st.Kind)
		if err := checkName(st.Name); err != nil {
			sp.Errorf("name", "%v", err)
			errs = append(errs, sp.TakeErrs()...)
			continue
		}
		if reservedNames[st.Name] {
			sp.Errorf("name", "%q is reserved for the runner's own records (read, write, output): choose another name", st.Name)
			errs = append(errs, sp.TakeErrs()...)
			continue
		}
		names[st.Name]++
		if names[st.Name] > 1 {
			if sp.Has("name") {
				sp.Errorf("name", "stage name %q is used twice", st.Name)
			} else {
				st.Name = fmt.Sprintf("%s_%d", st.Kind, names[st.Name])
			}
		}
		sp.SetStageName(st.Name)
		st.Only, errs = parseOnly(sp, s.Inputs, s.Stages, errs)
		s.Stages = append(s.Stages, st)
	}
	s.Output = p.Sub("output")
	if s.Output == nil {
		s.Output = stages.NewParams(path, "spec.output", &yaml.Node{Kind: yaml.MappingNode})
	}
	s.OutputDir = s.Output.String("dir", "")
	if s.OutputDir != "" && !filepath.IsAbs(s.OutputDir) {
		s.OutputDir = filepath.Join(s.Dir, s.OutputDir)
	}
	mix := s.Output.FloatMap("mix")
	errs = append(errs, s.Output.TakeErrs()...)
	if len(mix) > 0 {
		known := map[string]bool{}
		var srcs []string
		for _, in := range s.Inputs {
			if !known[in.Source] {
				srcs = append(srcs, in.Source)
			}
			known[in.Source] = true
		}
		names := make([]string, 0, len(mix))
		for name := range mix {
			names = append(names, name)
		}
		sort.Strings(names)
		for _, name := range names {
			if !known[name] {
				msg := fmt.Sprintf("mix names source %q, which no input has (sources: %s)", name, strings.Join(srcs, ", "))
				if n := suggest.Nearest(name, srcs); n != "" {
					msg += fmt.Sprintf(" (did you mean %q?)", n)
				}
				s.Output.Errorf("mix", "%s", msg)
			}
		}
		errs = append(errs, s.Output.TakeErrs()...)
	}
	if err := p.Done(); err != nil {
		errs = append([]error{err}, errs...)
	}
	errs = append(errs, unreported(errs, nonFinite(path, "spec", root))...)
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	var plain any
	if err := root.Decode(&plain); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	s.Config = jsonable(plain)
	if err := s.hashConfig(); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return s, nil
}

// maxNameLen bounds spec and stage names: they become file names
// (ledger/NAME.jsonl.zst, shards/NAME-00000.jsonl.zst) with room to spare
// under the usual 255-byte limit of a file name.
const maxNameLen = 64

// reservedNames are the ledger and manifest names of the runner's own
// steps; a stage may not take them.
var reservedNames = map[string]bool{"read": true, "write": true, "output": true}

// checkName accepts a plain file name: ASCII letters, digits, '_', '-' and
// '.', not starting with '.', at most maxNameLen bytes. Names become file
// names inside the run directory, so a slash, "..", an absolute path, a NUL
// or a control character could place files elsewhere or break them.
func checkName(name string) error {
	if name == "" {
		return errors.New("want a non-empty name")
	}
	if len(name) > maxNameLen {
		return fmt.Errorf("name is %d bytes long, at most %d allowed (it becomes a file name)", len(name), maxNameLen)
	}
	for i := 0; i < len(name); i++ {
		c := name[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '-' || c == '.'
		if !ok {
			what := fmt.Sprintf("%q", string(rune(c)))
			switch {
			case c == '/' || c == '\\':
				what = "a path separator"
			case c == 0:
				what = "a NUL byte"
			case c < 0x20 || c == 0x7f:
				what = "a control character"
			case c >= 0x80:
				what = "a non-ASCII character"
			}
			return fmt.Errorf("%q must be a plain file name (letters, digits, '_', '-', '.'), it has %s at byte %d", name, what, i)
		}
	}
	if name[0] == '.' {
		return fmt.Errorf("%q must not start with '.' (it becomes a file name; \".\" and \"..\" name directories)", name)
	}
	return nil
}

// nonFinite reports every number in the spec that is NaN or infinite
// (".nan", ".inf", "NaN", "-Inf"): no setting takes one, and the config
// could not be written to the manifest.
func nonFinite(file, at string, n *yaml.Node) []error {
	var errs []error
	switch n.Kind {
	case yaml.ScalarNode:
		var f float64
		if n.Tag == "!!float" && n.Decode(&f) == nil && (math.IsNaN(f) || math.IsInf(f, 0)) {
			errs = append(errs, &stages.SpecError{File: file, Line: n.Line, Column: n.Column, Key: at,
				Msg: fmt.Sprintf("want a finite number, got %q", n.Value)})
		}
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			errs = append(errs, nonFinite(file, at+"."+n.Content[i].Value, n.Content[i+1])...)
		}
	case yaml.SequenceNode:
		for i, c := range n.Content {
			errs = append(errs, nonFinite(file, fmt.Sprintf("%s[%d]", at, i), c)...)
		}
	}
	return errs
}

// unreported returns the errors of more that are not at a position errs
// already names.
func unreported(errs, more []error) []error {
	seen := map[[2]int]bool{}
	var walk func(err error)
	walk = func(err error) {
		var se *stages.SpecError
		if j, ok := err.(interface{ Unwrap() []error }); ok {
			for _, e := range j.Unwrap() {
				walk(e)
			}
		} else if errors.As(err, &se) {
			seen[[2]int{se.Line, se.Column}] = true
		}
	}
	for _, e := range errs {
		walk(e)
	}
	var out []error
	for _, e := range more {
		if se := e.(*stages.SpecError); !seen[[2]int{se.Line, se.Column}] {
			out = append(out, e)
		}
	}
	return out
}

// hashConfig sets ConfigHash to the xxh3 of the config's canonical JSON
// (encoding/json sorts map keys).
func (s *Spec) hashConfig() error {
	canon, err := json.Marshal(s.Config)
	if err != nil {
		return err
	}
	s.ConfigHash = fmt.Sprintf("%016x", xxh3.Hash(canon))
	return nil
}

// jsonable converts YAML-decoded maps (map[string]any with nested
// map[any]any-free values) into values encoding/json accepts.
func jsonable(v any) any {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			x[k] = jsonable(e)
		}
		return x
	case map[any]any:
		m := map[string]any{}
		for k, e := range x {
			m[fmt.Sprint(k)] = jsonable(e)
		}
		return m
	case []any:
		for i, e := range x {
			x[i] = jsonable(e)
		}
	}
	return v
}

// BuildStages constructs every stage of the spec. Each stage's parameter
// errors are collected, so `check` reports all of them at once.
func (s *Spec) BuildStages(env stages.Env) ([]Step, error) {
	if env.SpecDir == "" {
		env.SpecDir = s.Dir
	}
	if env.Seed == 0 {
		env.Seed = s.Seed
	}
	if env.MemoryBudget == 0 {
		env.MemoryBudget = s.Memory
	}
	// The memory budget is the whole run's: split it between global stages.
	globals := int64(0)
	for _, st := range s.Stages {
		if k, ok := stages.LookupKind(st.Kind); ok && k.NewGlobal != nil {
			globals++
		}
	}
	if globals > 1 {
		env.MemoryBudget /= globals
	}
	if env.Inputs == nil {
		env.Inputs = func() ([]read.InputFile, error) { return ResolveInputs(s) }
	}
	var steps []Step
	var errs []error
	for _, st := range s.Stages {
		k, _ := stages.LookupKind(st.Kind)
		var step Step
		var err error
		env.Upstream = upstream(steps[:len(steps):len(steps)])
		if k.New != nil {
			step.Stage, err = k.New(st.Params, env)
		} else {
			step.Global, err = k.NewGlobal(st.Params, env)
			// A global kind may run per document in some
			// configurations (no counting pass needed).
			if pd, ok := step.Global.(stages.PerDocumenter); ok && err == nil {
				if s := pd.PerDocument(); s != nil {
					step.Stage, step.Global = s, nil
				}
			}
		}
		if err == nil {
			err = checkMetricUses(st.Params, step, steps)
		}
		if err != nil {
			errs = append(errs, err)
			continue
		}
		if st.Only != nil && step.Global != nil {
			st.Params.Errorf("only", "only: applies to per-document stages; %s compares documents with each other here", st.Kind)
			errs = append(errs, st.Params.TakeErrs()...)
			continue
		}
		if ts, ok := step.Stage.(stages.ThresholdStage); ok {
			if err := checkRuleOrder(st.Params, ts.Rules()); err != nil {
				errs = append(errs, err)
				continue
			}
		}
		step.Name = st.Name
		step.Only = st.Only
		steps = append(steps, step)
	}
	return steps, errors.Join(errs...)
}

// upstream returns the function that passes a document through the
// per-document steps built so far (stages.Env.Upstream): each applies
// within its `only:` scope; an edit replaces the text, meta and tokens
// are merged, a drop (or a panicking stage) ends it with false. Global
// steps are skipped: they compare documents with each other.
func upstream(earlier []Step) func(d *stages.Doc) bool {
	if len(earlier) == 0 {
		return nil
	}
	return func(d *stages.Doc) (kept bool) {
		defer func() {
			if recover() != nil {
				kept = false
			}
		}()
		for _, st := range earlier {
			if st.Stage == nil || !st.Only.Match(d) {
				continue
			}
			dec := st.Stage.Process(d)
			switch dec.Action {
			case stages.Drop:
				return false
			case stages.Edit:
				d.Text = dec.Text
			}
			for k, v := range dec.Meta {
				d.SetMeta(k, v)
			}
			if dec.Tokens > 0 {
				d.Tokens = dec.Tokens
			}
		}
		return true
	}
}

// checkMetricUses checks that every metric a stage reads at scan time
// (stages.MetricUser, e.g. a dedup keep rule) is measured by an earlier
// per-document stage; the error points at the stage's keep key.
func checkMetricUses(p *stages.Params, step Step, earlier []Step) error {
	var mu stages.MetricUser
	if step.Global != nil {
		mu, _ = step.Global.(stages.MetricUser)
	} else {
		mu, _ = step.Stage.(stages.MetricUser)
	}
	if mu == nil {
		return nil
	}
	for _, name := range mu.UsesMetrics() {
		stage, metric, _ := strings.Cut(name, ".")
		var known []string
		found := false
		for _, e := range earlier {
			if e.Stage == nil {
				continue
			}
			for _, m := range e.Stage.MetricNames() {
				known = append(known, e.Name+"."+m)
				found = found || e.Name == stage && m == metric
			}
		}
		if !found {
			msg := fmt.Sprintf("metric %q is not measured by an earlier stage", name)
			if s := suggest.Nearest(name, known); s != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", s)
			} else if len(known) == 0 {
				msg += " (no earlier stage measures anything)"
			}
			p.Errorf("keep", "%s", msg)
			return p.Done()
		}
	}
	return nil
}

// Step is one built stage of a pipeline: exactly one of Stage and Global.
type Step struct {
	Name   string
	Stage  stages.Stage
	Global stages.GlobalStage
	// Only scopes a per-document stage (nil: every document).
	Only *stages.Scope
}

// parseOnly reads a stage's `only:` mapping, `sources: [...]` and/or
// `languages: [...]`: sources must be input sources, languages ISO 639-1
// codes the language detector knows, and a stage scoped by language needs
// a langid stage before it (the language is its meta "lang"). BuildStages
// refuses a scope on a global stage (dedup compares documents with each
// other).
func parseOnly(sp *stages.Params, inputs []InputSpec, before []StageSpec, errs []error) (*stages.Scope, []error) {
	o := sp.Sub("only")
	if o == nil {
		return nil, errs
	}
	sc := &stages.Scope{Sources: o.Strings("sources", nil), Languages: o.Strings("languages", nil)}
	if len(sc.Sources) == 0 && len(sc.Languages) == 0 {
		o.Errorf("", "want sources: [...] and/or languages: [...]")
	}
	var srcs []string
	known := map[string]bool{}
	for _, in := range inputs {
		if !known[in.Source] {
			srcs = append(srcs, in.Source)
		}
		known[in.Source] = true
	}
	for _, src := range sc.Sources {
		if !known[src] {
			msg := fmt.Sprintf("source %q is not an input source (sources: %s)", src, strings.Join(srcs, ", "))
			if n := suggest.Nearest(src, srcs); n != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", n)
			}
			o.Errorf("sources", "%s", msg)
		}
	}
	for i, l := range sc.Languages {
		code, err := langid.CanonicalCode(l)
		if err != nil {
			o.Errorf("languages", "%v", err)
			continue
		}
		sc.Languages[i] = code
	}
	if len(sc.Languages) > 0 && !slices.ContainsFunc(before, func(st StageSpec) bool { return st.Kind == "langid" }) {
		o.Errorf("languages", "needs a langid stage before this one (the language is the one it detects)")
	}
	if err := o.Done(); err != nil {
		errs = append(errs, err)
	}
	return sc, errs
}

// checkRuleOrder reports a minimum above a maximum of the same metric
// (min_chars: 500 with max_chars: 100): no document could pass both, so
// the stage would drop everything. The error is at the minimum's key.
func checkRuleOrder(p *stages.Params, rules []stages.Rule) error {
	for _, lo := range rules {
		if !lo.Enabled || (lo.Cmp != stages.AtLeast && lo.Cmp != stages.Above) {
			continue
		}
		for _, hi := range rules {
			if !hi.Enabled || hi.Metric != lo.Metric || (hi.Cmp != stages.AtMost && hi.Cmp != stages.Below) {
				continue
			}
			bad := lo.Limit > hi.Limit
			if lo.Cmp == stages.Above || hi.Cmp == stages.Below {
				bad = lo.Limit >= hi.Limit
			}
			if !bad {
				continue
			}
			key := lo.Key
			if !p.Has(key) {
				key = hi.Key
			}
			p.Errorf(key, "%s %v is above %s %v: no document could keep both (%s %s %v and %s %v), so the stage would drop everything",
				lo.Key, lo.Limit, hi.Key, hi.Limit, lo.Metric, lo.Cmp, lo.Limit, hi.Cmp, hi.Limit)
		}
	}
	return errors.Join(p.TakeErrs()...)
}
