package stages

// Eval sets for contamination checks.
//
// An eval set is a named list of items loaded from one or more files:
//
//   - JSONL (one object per line), optionally gzip- or zstd-compressed
//     (detected by magic bytes, not by file name). The item text is made
//     of the configured fields, in the configured order, joined by new
//     lines. A field is a key or a dotted path ("question.stem"); a path
//     through a list visits every element ("choices.text"); a list of
//     strings contributes every string; an object contributes every
//     string inside it, in file order; numbers contribute their literal.
//     With no fields configured, every top-level value except the id
//     field makes up the text, in the record's key order.
//   - plain text, one item per non-blank line ("lines") or one item per
//     blank-line-separated block ("blocks"). "auto" picks JSONL for
//     .jsonl/.json/.ndjson names or content starting with "{", else
//     blocks when the file has a block of several lines, else lines.
//
// Item ids come from id_field (default "id"; strings or numbers). A record
// without it gets "<file name>:<line>", unless id_field was set
// explicitly, which makes a missing id an error. Ids must be unique within
// a set. A malformed line, a record with none of the fields, or an item
// with no words is an error naming the file and line: a contamination
// report that silently skipped items would prove nothing.

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"winnow/dedup"
	"winnow/stages/read"
)

// Eval-set file limits.
const (
	// evalMaxLine is the longest eval line accepted (items are questions
	// and answers; a longer line is almost surely a wrong file).
	evalMaxLine = 64 << 20
)

// EvalSpec says where an eval set is and how to read its items.
type EvalSpec struct {
	// Name labels the set in reports and ledger records.
	Name string
	// Paths are files, globs or directories (relative to Dir).
	Paths []string
	// Dir is the directory relative paths resolve against.
	Dir string
	// Fields make up an item's text (nil: every field but the id).
	Fields []string
	// IDField names the id field; IDExplicit says it was configured, so
	// a record without it is an error.
	IDField    string
	IDExplicit bool
	// Format is auto, jsonl, lines or blocks.
	Format string
}

// EvalFormats lists the accepted eval-set formats.
var EvalFormats = []string{"auto", "jsonl", "lines", "blocks"}

// EvalItem is one loaded eval item.
type EvalItem struct {
	ID   string
	Text string
	File string
	Line int64
}

// EvalSet is a loaded eval set.
type EvalSet struct {
	Name  string
	Files []string // as displayed (relative to the spec directory when inside it)
	Items []EvalItem
}

// LoadEvalSet reads every file of spec, in path order (globs sorted).
func LoadEvalSet(spec EvalSpec) (*EvalSet, error) {
	if spec.IDField == "" {
		spec.IDField = "id"
	}
	if spec.Format == "" {
		spec.Format = "auto"
	}
	set := &EvalSet{Name: spec.Name}
	seen := map[string]string{} // id -> file:line
	if len(spec.Paths) == 0 {
		return nil, fmt.Errorf("eval set %q: no paths", spec.Name)
	}
	for _, pat := range spec.Paths {
		full := pat
		if !filepath.IsAbs(full) && spec.Dir != "" {
			full = filepath.Join(spec.Dir, pat)
		}
		files, err := read.ExpandPath(full)
		if err != nil {
			return nil, fmt.Errorf("eval set %q: path %q: %w", spec.Name, pat, err)
		}
		for _, f := range files {
			disp := f
			if spec.Dir != "" {
				if rel, err := filepath.Rel(spec.Dir, f); err == nil && !strings.HasPrefix(rel, "..") {
					disp = filepath.ToSlash(rel)
				}
			}
			set.Files = append(set.Files, disp)
			items, err := readEvalFile(f, disp, spec)
			if err != nil {
				return nil, fmt.Errorf("eval set %q: %w", spec.Name, err)
			}
			for _, it := range items {
				if prev, dup := seen[it.ID]; dup {
					return nil, fmt.Errorf("eval set %q: %s:%d: duplicate item id %q (first at %s)", spec.Name, disp, it.Line, it.ID, prev)
				}
				seen[it.ID] = fmt.Sprintf("%s:%d", disp, it.Line)
				set.Items = append(set.Items, it)
			}
		}
	}
	if len(set.Items) == 0 {
		return nil, fmt.Errorf("eval set %q: no items in %s", spec.Name, strings.Join(set.Files, ", "))
	}
	return set, nil
}

func readEvalFile(path, disp string, spec EvalSpec) ([]EvalItem, error) {
	f, err := read.OpenFile(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	dec, err := read.Decode(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", disp, err)
	}
	defer dec.Close()
	items, err := parseEvalItems(dec, disp, spec)
	if err != nil {
		return nil, err
	}
	return items, nil
}

// parseEvalItems reads items from decompressed bytes r; disp names the
// file in ids and errors.
func parseEvalItems(r io.Reader, disp string, spec EvalSpec) ([]EvalItem, error) {
	br := bufio.NewReaderSize(r, 256<<10)
	format := spec.Format
	if format == "auto" || format == "" {
		format = guessEvalFormat(disp, br)
	}
	var lines []evalLine
	var items []EvalItem
	base := filepath.Base(disp)
	var ln int64
	for {
		line, err := readEvalLine(br)
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %w", disp, ln+1, err)
		}
		ln++
		line = bytes.TrimRight(line, "\r\n")
		if ln == 1 {
			line = bytes.TrimPrefix(line, []byte("\ufeff")) // byte-order mark
		}
		if format != "jsonl" {
			lines = append(lines, evalLine{ln, string(line)})
			continue
		}
		if len(bytes.TrimSpace(line)) == 0 {
			continue
		}
		it, perr := parseEvalJSON(line, base, ln, spec)
		if perr != nil {
			return nil, fmt.Errorf("%s:%d: %w", disp, ln, perr)
		}
		it.File = disp
		items = append(items, it)
	}
	switch format {
	case "lines":
		for _, l := range lines {
			if strings.TrimSpace(l.text) != "" {
				items = append(items, EvalItem{ID: fmt.Sprintf("%s:%d", base, l.n), Text: l.text, File: disp, Line: l.n})
			}
		}
	case "blocks":
		items = append(items, evalBlocks(lines, base, disp)...)
	case "jsonl":
	default:
		return nil, fmt.Errorf("%s: unknown eval format %q (want %s)", disp, format, strings.Join(EvalFormats, " | "))
	}
	for _, it := range items {
		if dedup.NormalizeWords(it.Text) == "" {
			return nil, fmt.Errorf("%s:%d: item %q has no words", disp, it.Line, it.ID)
		}
	}
	return items, nil
}

type evalLine struct {
	n    int64
	text string
}

func evalBlocks(lines []evalLine, base, disp string) []EvalItem {
	var items []EvalItem
	var cur []string
	var first int64
	flush := func() {
		if len(cur) > 0 {
			items = append(items, EvalItem{ID: fmt.Sprintf("%s:%d", base, first), Text: strings.Join(cur, "\n"), File: disp, Line: first})
		}
		cur = cur[:0]
	}
	for _, l := range lines {
		if strings.TrimSpace(l.text) == "" {
			flush()
			continue
		}
		if len(cur) == 0 {
			first = l.n
		}
		cur = append(cur, l.text)
	}
	flush()
	return items
}

// readEvalLine returns the next line (with its newline), at most
// evalMaxLine bytes.
func readEvalLine(br *bufio.Reader) ([]byte, error) {
	var out []byte
	for {
		frag, err := br.ReadSlice('\n')
		if len(out)+len(frag) > evalMaxLine {
			return nil, fmt.Errorf("line longer than %d bytes", evalMaxLine)
		}
		switch {
		case err == bufio.ErrBufferFull:
			out = append(out, frag...)
		case err == nil:
			if out == nil {
				return frag, nil
			}
			return append(out, frag...), nil
		case err == io.EOF:
			out = append(out, frag...)
			if len(out) == 0 {
				return nil, io.EOF
			}
			return out, nil
		default:
			return nil, err
		}
	}
}

// guessEvalFormat picks jsonl, blocks or lines from the name and content.
func guessEvalFormat(disp string, br *bufio.Reader) string {
	name := strings.ToLower(disp)
	for _, suf := range []string{".gz", ".zst", ".zstd", ".gzip"} {
		name = strings.TrimSuffix(name, suf)
	}
	for _, suf := range []string{".jsonl", ".json", ".ndjson"} {
		if strings.HasSuffix(name, suf) {
			return "jsonl"
		}
	}
	head, _ := br.Peek(1 << 20)
	if t := bytes.TrimLeft(head, " \t\r\n\ufeff"); len(t) > 0 && t[0] == '{' {
		return "jsonl"
	}
	// Blocks when some block has two or more lines, else one item per line.
	prevText := false
	for _, l := range bytes.Split(head, []byte("\n")) {
		isText := len(bytes.TrimSpace(l)) > 0
		if isText && prevText {
			return "blocks"
		}
		prevText = isText
	}
	return "lines"
}

// jsonNode is a JSON value that keeps object keys in file order.
type jsonNode struct {
	str  string // string, or a number's literal
	kind byte   // 's' string, 'n' number, 'b' bool, 'z' null, 'o' object, 'a' array
	keys []string
	vals []*jsonNode
}

// decodeJSONNode reads one value from dec.
func decodeJSONNode(dec *json.Decoder, depth int) (*jsonNode, error) {
	if depth > 64 {
		return nil, errors.New("JSON nested too deeply")
	}
	tok, err := dec.Token()
	if err != nil {
		return nil, err
	}
	switch t := tok.(type) {
	case json.Delim:
		n := &jsonNode{}
		switch t {
		case '{':
			n.kind = 'o'
			for dec.More() {
				kt, err := dec.Token()
				if err != nil {
					return nil, err
				}
				k, _ := kt.(string)
				v, err := decodeJSONNode(dec, depth+1)
				if err != nil {
					return nil, err
				}
				n.keys = append(n.keys, k)
				n.vals = append(n.vals, v)
			}
		case '[':
			n.kind = 'a'
			for dec.More() {
				v, err := decodeJSONNode(dec, depth+1)
				if err != nil {
					return nil, err
				}
				n.vals = append(n.vals, v)
			}
		default:
			return nil, fmt.Errorf("unexpected %v", t)
		}
		if _, err := dec.Token(); err != nil { // closing delimiter
			return nil, err
		}
		return n, nil
	case string:
		return &jsonNode{kind: 's', str: t}, nil
	case json.Number:
		return &jsonNode{kind: 'n', str: t.String()}, nil
	case bool:
		return &jsonNode{kind: 'b', str: fmt.Sprint(t)}, nil
	case nil:
		return &jsonNode{kind: 'z'}, nil
	}
	return nil, fmt.Errorf("unexpected token %v", tok)
}

// get returns the value at key, or nil.
func (n *jsonNode) get(key string) *jsonNode {
	if n == nil || n.kind != 'o' {
		return nil
	}
	for i, k := range n.keys {
		if k == key {
			return n.vals[i]
		}
	}
	return nil
}

// resolve appends the nodes at a dotted path below n; a list on the way
// is visited element by element. A key that itself contains dots is
// matched whole first.
func (n *jsonNode) resolve(path string, out []*jsonNode) []*jsonNode {
	if n == nil {
		return out
	}
	if n.kind == 'a' {
		for _, v := range n.vals {
			out = v.resolve(path, out)
		}
		return out
	}
	if v := n.get(path); v != nil {
		return append(out, v)
	}
	for i := strings.IndexByte(path, '.'); i >= 0; {
		if v := n.get(path[:i]); v != nil {
			return v.resolve(path[i+1:], out)
		}
		j := strings.IndexByte(path[i+1:], '.')
		if j < 0 {
			break
		}
		i += 1 + j
	}
	return out
}

// texts appends every string and number inside n, in file order.
func (n *jsonNode) texts(out []string) []string {
	switch n.kind {
	case 's', 'n':
		if strings.TrimSpace(n.str) != "" {
			out = append(out, n.str)
		}
	case 'o', 'a':
		for _, v := range n.vals {
			out = v.texts(out)
		}
	}
	return out
}

func parseEvalJSON(line []byte, base string, ln int64, spec EvalSpec) (EvalItem, error) {
	dec := json.NewDecoder(bytes.NewReader(line))
	dec.UseNumber()
	root, err := decodeJSONNode(dec, 0)
	if err != nil {
		return EvalItem{}, fmt.Errorf("invalid JSON: %v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return EvalItem{}, errors.New("invalid JSON: data after the object")
	}
	if root.kind != 'o' {
		return EvalItem{}, errors.New("want a JSON object")
	}
	it := EvalItem{Line: ln}
	switch idv := root.get(spec.IDField); {
	case idv != nil && (idv.kind == 's' || idv.kind == 'n') && idv.str != "":
		it.ID = idv.str
	case idv != nil && idv.kind != 'z':
		return it, fmt.Errorf("id field %q is not a string or number", spec.IDField)
	case spec.IDExplicit:
		return it, fmt.Errorf("no id field %q", spec.IDField)
	default:
		it.ID = fmt.Sprintf("%s:%d", base, ln)
	}
	var parts []string
	if spec.Fields == nil {
		for i, k := range root.keys {
			if k != spec.IDField {
				parts = root.vals[i].texts(parts)
			}
		}
	} else {
		var nodes []*jsonNode
		for _, f := range spec.Fields {
			nodes = root.resolve(f, nodes[:0])
			for _, v := range nodes {
				parts = v.texts(parts)
			}
		}
	}
	if len(parts) == 0 {
		if spec.Fields == nil {
			return it, fmt.Errorf("item %q has no text fields", it.ID)
		}
		return it, fmt.Errorf("item %q has none of the fields %s (set fields:)", it.ID, strings.Join(spec.Fields, ", "))
	}
	it.Text = strings.Join(parts, "\n")
	return it, nil
}
