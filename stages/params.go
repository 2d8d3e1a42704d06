package stages

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"winnow/stages/fsio"
	"winnow/stages/suggest"

	"gopkg.in/yaml.v3"
)

// Params gives a stage constructor typed access to its YAML mapping. Each
// getter marks its key as known; Done then reports every key that no getter
// asked for as an error naming file:line:column and the nearest known key.
// Every error names the key's position, so a user can jump to it.
type Params struct {
	file  string
	path  string // e.g. "stages[2]"
	node  *yaml.Node
	known map[string]bool
	errs  []error
	// Overrides replace values by key before the YAML is consulted (what-if
	// and --set use them); values are strings parsed like YAML scalars.
	overrides map[string]string
	// stageName is the stage's final name in the run (set by the spec
	// loader, which numbers repeated kinds).
	stageName string
}

// StageName returns the name the stage has in the run (its "name" key, or
// its kind numbered when repeated); "" outside a spec.
func (p *Params) StageName() string { return p.stageName }

// SetStageName sets the name StageName returns (the spec loader does).
func (p *Params) SetStageName(name string) { p.stageName = name }

// NewParams wraps a YAML mapping node. path prefixes key names in errors.
func NewParams(file, path string, node *yaml.Node) *Params {
	return &Params{file: file, path: path, node: node, known: map[string]bool{}}
}

// ParamsFromMap builds Params from plain values (tests, programmatic use).
func ParamsFromMap(m map[string]any) *Params {
	var n yaml.Node
	if err := n.Encode(m); err != nil {
		panic(err)
	}
	return NewParams("<map>", "params", &n)
}

// SetOverride makes key read as the YAML scalar value, whatever the file says.
func (p *Params) SetOverride(key, value string) {
	if p.overrides == nil {
		p.overrides = map[string]string{}
	}
	p.overrides[key] = value
}

// Path returns the dotted location of these params, e.g. "stages[2]".
func (p *Params) Path() string { return p.path }

// Has reports whether key is present in the mapping (and marks it known).
func (p *Params) Has(key string) bool {
	p.known[key] = true
	_, v := p.lookup(key)
	return v != nil
}

func (p *Params) lookup(key string) (*yaml.Node, *yaml.Node) {
	if s, ok := p.overrides[key]; ok {
		return nil, &yaml.Node{Kind: yaml.ScalarNode, Value: s, Tag: guessTag(s)}
	}
	if p.node == nil || p.node.Kind != yaml.MappingNode {
		return nil, nil
	}
	for i := 0; i+1 < len(p.node.Content); i += 2 {
		if p.node.Content[i].Value == key {
			return p.node.Content[i], p.node.Content[i+1]
		}
	}
	return nil, nil
}

func guessTag(s string) string {
	var n yaml.Node
	if err := yaml.Unmarshal([]byte(s), &n); err == nil && len(n.Content) == 1 {
		return n.Content[0].Tag
	}
	return "!!str"
}

// Errorf records an error located at key's value (or at the mapping when
// the key is absent).
func (p *Params) Errorf(key, format string, args ...any) {
	_, v := p.lookup(key)
	p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf(format, args...)))
}

func (p *Params) errAt(n *yaml.Node, key, msg string) error {
	if n == nil || n.Line == 0 {
		n = p.node
	}
	line, col := 0, 0
	if n != nil {
		line, col = n.Line, n.Column
	}
	name := p.path
	if key != "" {
		name += "." + key
	}
	return &SpecError{File: p.file, Line: line, Column: col, Key: name, Msg: msg}
}

// SpecError is a configuration error at a position of the spec file.
type SpecError struct {
	File         string
	Line, Column int
	Key          string
	Msg          string
}

func (e *SpecError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("%s:%d:%d: %s: %s", e.File, e.Line, e.Column, e.Key, e.Msg)
	}
	return fmt.Sprintf("%s: %s: %s", e.File, e.Key, e.Msg)
}

// Float returns the number at key, def when absent, and records an error
// when the value is not a number or lies outside [min, max].
func (p *Params) Float(key string, def, min, max float64) float64 {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	if v.Kind != yaml.ScalarNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a number"))
		return def
	}
	f, err := strconv.ParseFloat(strings.ReplaceAll(v.Value, "_", ""), 64)
	if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("want a finite number, got %q", v.Value)))
		return def
	}
	if f < min || f > max {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("%v is out of range [%v, %v]", f, min, max)))
		return def
	}
	return f
}

// Int returns the integer at key, def when absent, with a range check.
func (p *Params) Int(key string, def, min, max int64) int64 {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	if v.Kind != yaml.ScalarNode {
		p.errs = append(p.errs, p.errAt(v, key, "want an integer"))
		return def
	}
	i, err := strconv.ParseInt(strings.ReplaceAll(v.Value, "_", ""), 10, 64)
	if err != nil {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("want an integer, got %q", v.Value)))
		return def
	}
	if i < min || i > max {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("%d is out of range [%d, %d]", i, min, max)))
		return def
	}
	return i
}

// Size returns the byte size at key: an integer or a string with a unit
// ("512MiB", "2GB"), def when absent, with a range check.
func (p *Params) Size(key string, def, min, max int64) int64 {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	n, err := fsio.ParseSize(v.Value)
	if v.Kind != yaml.ScalarNode || err != nil {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("want a size such as 4096 or 512MiB, got %q", v.Value)))
		return def
	}
	if n < min || n > max {
		p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("%d bytes is out of range [%d, %d]", n, min, max)))
		return def
	}
	return n
}

// Bool returns the boolean at key, def when absent.
func (p *Params) Bool(key string, def bool) bool {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	switch strings.ToLower(v.Value) {
	case "true", "yes", "on":
		if v.Kind == yaml.ScalarNode {
			return true
		}
	case "false", "no", "off":
		if v.Kind == yaml.ScalarNode {
			return false
		}
	}
	p.errs = append(p.errs, p.errAt(v, key, fmt.Sprintf("want true or false, got %q", v.Value)))
	return def
}

// String returns the string at key, def when absent. When choices is not
// empty the value must be one of them.
func (p *Params) String(key, def string, choices ...string) string {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	if v.Kind != yaml.ScalarNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a string"))
		return def
	}
	if len(choices) > 0 {
		for _, c := range choices {
			if v.Value == c {
				return c
			}
		}
		msg := fmt.Sprintf("%q is not one of %s", v.Value, strings.Join(choices, " | "))
		if s := nearest(v.Value, choices); s != "" {
			msg += fmt.Sprintf(" (did you mean %q?)", s)
		}
		p.errs = append(p.errs, p.errAt(v, key, msg))
		return def
	}
	return v.Value
}

// Strings returns the list of strings at key (a single scalar counts as a
// one-element list), def when absent.
func (p *Params) Strings(key string, def []string) []string {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return def
	}
	if v.Kind == yaml.ScalarNode {
		if v.Value == "" {
			return nil
		}
		if p.overrides[key] != "" {
			return strings.Split(v.Value, ",")
		}
		return []string{v.Value}
	}
	if v.Kind != yaml.SequenceNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a list of strings"))
		return def
	}
	out := make([]string, 0, len(v.Content))
	for _, c := range v.Content {
		if c.Kind != yaml.ScalarNode {
			p.errs = append(p.errs, p.errAt(c, key, "want a string"))
			continue
		}
		out = append(out, c.Value)
	}
	return out
}

// FloatMap returns a mapping of names to numbers at key (e.g. mix shares).
func (p *Params) FloatMap(key string) map[string]float64 {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return nil
	}
	if v.Kind != yaml.MappingNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a mapping of name: number"))
		return nil
	}
	out := map[string]float64{}
	for i := 0; i+1 < len(v.Content); i += 2 {
		k, val := v.Content[i], v.Content[i+1]
		f, err := strconv.ParseFloat(strings.ReplaceAll(val.Value, "_", ""), 64)
		if err != nil || val.Kind != yaml.ScalarNode || math.IsNaN(f) || math.IsInf(f, 0) {
			p.errs = append(p.errs, p.errAt(val, key+"."+k.Value, fmt.Sprintf("want a finite number >= 0, got %q", val.Value)))
			continue
		}
		if f < 0 {
			p.errs = append(p.errs, p.errAt(val, key+"."+k.Value, fmt.Sprintf("%v: must not be negative", f)))
			continue
		}
		out[k.Value] = f
	}
	return out
}

// List returns the items of the sequence at key as Params (each item must
// be a mapping), e.g. the eval sets of a decontaminate stage.
func (p *Params) List(key string) []*Params {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return nil
	}
	if v.Kind != yaml.SequenceNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a list"))
		return nil
	}
	var out []*Params
	for i, c := range v.Content {
		sub := NewParams(p.file, fmt.Sprintf("%s.%s[%d]", p.path, key, i), c)
		if c.Kind != yaml.MappingNode {
			p.errs = append(p.errs, p.errAt(c, key, "want a mapping"))
			continue
		}
		out = append(out, sub)
	}
	return out
}

// IsMapping reports whether the value at key is a mapping (and marks the
// key known).
func (p *Params) IsMapping(key string) bool {
	p.known[key] = true
	_, v := p.lookup(key)
	return v != nil && v.Kind == yaml.MappingNode
}

// Sub returns the mapping at key as Params (nil when absent).
func (p *Params) Sub(key string) *Params {
	p.known[key] = true
	_, v := p.lookup(key)
	if v == nil {
		return nil
	}
	if v.Kind != yaml.MappingNode {
		p.errs = append(p.errs, p.errAt(v, key, "want a mapping"))
		return nil
	}
	return NewParams(p.file, p.path+"."+key, v)
}

// Ignore marks keys as known without reading them (keys handled elsewhere,
// such as "kind" and "name").
func (p *Params) Ignore(keys ...string) {
	for _, k := range keys {
		p.known[k] = true
	}
}

// Fail records err as an error at key.
func (p *Params) Fail(key string, err error) {
	p.Errorf(key, "%v", err)
}

// TakeErrs returns and clears the errors recorded so far (without the
// unknown-key check of Done).
func (p *Params) TakeErrs() []error {
	e := p.errs
	p.errs = nil
	return e
}

// Done reports all errors so far, plus one per unknown key with the nearest
// known key suggested. Sub-params' errors are reported by their own Done.
func (p *Params) Done() error {
	errs := p.errs
	if p.node != nil && p.node.Kind == yaml.MappingNode {
		var names []string
		for k := range p.known {
			names = append(names, k)
		}
		sort.Strings(names)
		for i := 0; i+1 < len(p.node.Content); i += 2 {
			k := p.node.Content[i]
			if p.known[k.Value] {
				continue
			}
			msg := "unknown key"
			if s := nearest(k.Value, names); s != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", s)
			} else if len(names) > 0 {
				msg += " (known: " + strings.Join(names, ", ") + ")"
			}
			errs = append(errs, p.errAt(k, k.Value, msg))
		}
	}
	for k := range p.overrides {
		if !p.known[k] {
			errs = append(errs, fmt.Errorf("%s.%s: unknown key set from the command line", p.path, k))
		}
	}
	return errors.Join(errs...)
}

func nearest(s string, candidates []string) string { return suggest.Nearest(s, candidates) }
