package stages

// Eval sets for contamination checks.
//
// An eval set is a named list of items loaded from one or more files. The
// format of each file is found from its content, as for inputs: Parquet by
// its magic bytes, then (after gzip or zstd, also found by magic bytes)
// JSON lines when the first non-blank byte is "{", CSV or TSV when the
// name says so (.csv, .tsv, .tab) and the first line is a header of two or
// more columns. Anything else is refused with a message naming the file:
// plain text is read only when format says lines (one item per non-blank
// line) or blocks (one item per blank-line-separated block).
//
// Records (a JSON object, a Parquet row, a CSV/TSV row keyed by the header)
// become items through the configured fields, in order:
//
//   - "question": a string, a number's literal, or every string inside a
//     list or an object, in file order;
//   - "question.stem": a nested field (a list on the way is visited element
//     by element; a key that itself contains dots, like a CSV column
//     "meta.title", is matched whole first);
//   - "choices[label]": the element of the list choices chosen by the
//     field label, an integer counted from 0 or a letter (A is the first);
//     the gold answer of a multiple-choice item.
//
// Every string found is a separate part of the item: a list of choices is
// four texts, not one glued text, so no n-gram spans two choices and a
// short choice is judged on its own length (see
// dedup.ContamBuilder.AddParts). With no fields configured, every
// top-level value except the id field makes up the item. In CSV and TSV a
// cell holding a JSON array or object (as a database's to_json writes a
// list or a struct) is read as that value; an empty cell is no value.
//
// Item ids come from id_field (default "id"; strings or numbers). A record
// without it gets "<file name>:<line>" (the row number for Parquet),
// unless id_field was set explicitly, which makes a missing id an error.
// Ids must be unique within a set. A malformed record, a record with none
// of the fields, an index out of range or an item with no words is an
// error naming the file and line: a contamination report that silently
// skipped items would prove nothing.

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"

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
	// Format is one of EvalFormats.
	Format string
}

// EvalFormats lists the accepted eval-set formats ("auto" sniffs jsonl,
// json (an array of items), parquet, csv or tsv; lines and blocks are
// plain text, never guessed).
var EvalFormats = []string{"auto", "jsonl", "json", "parquet", "csv", "tsv", "lines", "blocks"}

// EvalItem is one loaded eval item.
type EvalItem struct {
	ID string
	// Parts are the item's texts, one per string found (a question, each
	// choice); Text is them joined by new lines, for display.
	Parts []string
	Text  string
	File  string
	Line  int64
}

// EvalSet is a loaded eval set.
type EvalSet struct {
	Name    string
	Files   []string // as displayed (relative to the spec directory when inside it)
	Formats []string // per file, the format read
	Fields  []string // the configured fields (nil: every field but the id)
	Items   []EvalItem
}

// LoadEvalSet reads every file of spec, in path order (globs sorted).
func LoadEvalSet(spec EvalSpec) (*EvalSet, error) {
	if spec.IDField == "" {
		spec.IDField = "id"
	}
	if spec.Format == "" {
		spec.Format = "auto"
	}
	set := &EvalSet{Name: spec.Name, Fields: spec.Fields}
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
			items, format, err := readEvalFile(f, disp, spec)
			if err != nil {
				return nil, fmt.Errorf("eval set %q: %w", spec.Name, err)
			}
			set.Formats = append(set.Formats, format)
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

// readEvalFile reads the items of one file and says which format it read.
func readEvalFile(path, disp string, spec EvalSpec) ([]EvalItem, string, error) {
	format := spec.Format
	if format == "" || format == "auto" || format == "parquet" {
		isPQ, err := isParquetFile(path)
		if err != nil {
			return nil, "", err
		}
		switch {
		case isPQ:
			items, err := readEvalParquet(path, disp, spec)
			return items, "parquet", err
		case format == "parquet":
			return nil, "", fmt.Errorf("%s: not a Parquet file (no PAR1 magic bytes)", disp)
		}
	}
	f, err := read.OpenFile(path)
	if err != nil {
		return nil, "", err
	}
	defer f.Close()
	dec, err := read.Decode(f)
	if err != nil {
		return nil, "", fmt.Errorf("%s: %w", disp, err)
	}
	defer dec.Close()
	br := bufio.NewReaderSize(dec, 256<<10)
	if format == "" || format == "auto" {
		if format, err = sniffEvalFormat(disp, br); err != nil {
			return nil, "", err
		}
	}
	var items []EvalItem
	switch format {
	case "csv", "tsv":
		items, err = readEvalCSV(br, disp, format, spec)
	case "json":
		items, err = readEvalArray(br, disp, spec)
	default:
		spec.Format = format
		items, err = parseEvalItems(br, disp, spec)
	}
	return items, format, err
}

// isParquetFile reports whether the file at path starts and ends with the
// Parquet magic bytes.
func isParquetFile(path string) (bool, error) {
	f, err := os.Open(path)
	if err != nil {
		return false, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() || st.Size() < 12 {
		return false, err
	}
	var head, tail [4]byte
	if _, err := f.ReadAt(head[:], 0); err != nil {
		return false, err
	}
	if _, err := f.ReadAt(tail[:], st.Size()-4); err != nil {
		return false, err
	}
	return string(head[:]) == "PAR1" && string(tail[:]) == "PAR1", nil
}

// sniffEvalFormat tells jsonl, csv or tsv from the decompressed content
// and the name, or refuses the file.
func sniffEvalFormat(disp string, br *bufio.Reader) (string, error) {
	head, _ := br.Peek(64 << 10)
	t := bytes.TrimLeft(bytes.TrimPrefix(head, []byte("\ufeff")), " \t\r\n")
	if len(t) > 0 && t[0] == '{' {
		return "jsonl", nil
	}
	if len(t) > 0 && t[0] == '[' {
		return "json", nil // an array of items
	}
	name := strings.ToLower(disp)
	for _, suf := range []string{".gz", ".gzip", ".zst", ".zstd"} {
		name = strings.TrimSuffix(name, suf)
	}
	first, _, _ := bytes.Cut(t, []byte("\n"))
	first = bytes.TrimRight(first, "\r")
	switch ext := filepath.Ext(name); {
	case ext == ".csv" && bytes.Contains(first, []byte(",")):
		return "csv", nil
	case (ext == ".tsv" || ext == ".tab") && bytes.Contains(first, []byte("\t")):
		return "tsv", nil
	}
	what := "plain text"
	switch {
	case len(t) == 0:
		what = "empty"
	case bytes.IndexByte(head, 0) >= 0:
		what = "binary data"
	}
	return "", fmt.Errorf("%s: cannot read as an eval set: %s; eval files are JSON lines, a JSON array of items, Parquet, or CSV/TSV with a header row "+
		"(named .csv, .tsv), optionally gzip or zstd; for plain text set format: lines or blocks", disp, what)
}

// parseEvalItems reads items from decompressed bytes r in spec.Format
// (jsonl, lines or blocks); disp names the file in ids and errors.
func parseEvalItems(r io.Reader, disp string, spec EvalSpec) ([]EvalItem, error) {
	br, ok := r.(*bufio.Reader)
	if !ok {
		br = bufio.NewReaderSize(r, 256<<10)
	}
	format := spec.Format // resolved by readEvalFile, never auto
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
				items = append(items, EvalItem{ID: fmt.Sprintf("%s:%d", base, l.n), Text: l.text, Parts: []string{l.text}, File: disp, Line: l.n})
			}
		}
	case "blocks":
		items = append(items, evalBlocks(lines, base, disp)...)
	case "jsonl":
	default:
		return nil, fmt.Errorf("%s: unknown eval format %q (want %s)", disp, format, strings.Join(EvalFormats, " | "))
	}
	if err := checkEvalWords(items, disp); err != nil {
		return nil, err
	}
	return items, nil
}

// readEvalArray reads a JSON array of item objects ("[{...}, ...]", on
// one line or over many); item n (from 1) is line n in ids and errors.
func readEvalArray(r io.Reader, disp string, spec EvalSpec) ([]EvalItem, error) {
	dec := json.NewDecoder(r)
	dec.UseNumber()
	if tok, err := dec.Token(); err != nil || tok != json.Delim('[') {
		return nil, fmt.Errorf("%s: not a JSON array of items (%v)", disp, err)
	}
	base := filepath.Base(disp)
	var items []EvalItem
	for n := int64(1); dec.More(); n++ {
		node, err := decodeJSONNode(dec, 0)
		if err != nil {
			return nil, fmt.Errorf("%s: item %d: invalid JSON: %v", disp, n, err)
		}
		it, err := objectItem(node, base, disp, n, spec, "want a JSON object")
		if err != nil {
			return nil, fmt.Errorf("%s: item %d: %w", disp, n, err)
		}
		items = append(items, it)
	}
	if _, err := dec.Token(); err != nil {
		return nil, fmt.Errorf("%s: JSON array not closed: %v", disp, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("%s: data after the closing \"]\" of the JSON array", disp)
	}
	if err := checkEvalWords(items, disp); err != nil {
		return nil, err
	}
	return items, nil
}

// checkEvalWords refuses an item with no words at all.
func checkEvalWords(items []EvalItem, disp string) error {
	for _, it := range items {
		if dedup.NormalizeWords(it.Text) == "" {
			return fmt.Errorf("%s:%d: item %q has no words", disp, it.Line, it.ID)
		}
	}
	return nil
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
			text := strings.Join(cur, "\n")
			items = append(items, EvalItem{ID: fmt.Sprintf("%s:%d", base, first), Text: text, Parts: []string{text}, File: disp, Line: first})
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
	root, err := decodeEvalJSON(line)
	if err != nil {
		return EvalItem{}, err
	}
	return objectItem(root, base, "", ln, spec, "want a JSON object")
}

// objectItem makes the item of one object of file disp (a JSON line, an
// array element or a Parquet row; base is the file's name in default
// ids); anything but an object is refused with notObject.
func objectItem(root *jsonNode, base, disp string, ln int64, spec EvalSpec, notObject string) (EvalItem, error) {
	if root.kind != 'o' {
		return EvalItem{}, errors.New(notObject)
	}
	it, err := evalItemFromNode(root, base, ln, spec)
	it.File = disp
	return it, err
}

// decodeEvalJSON decodes one complete JSON value.
func decodeEvalJSON(b []byte) (*jsonNode, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	root, err := decodeJSONNode(dec, 0)
	if err != nil {
		return nil, fmt.Errorf("invalid JSON: %v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, errors.New("invalid JSON: data after the value")
	}
	return root, nil
}

// evalItemFromNode makes an item of one record (an object node), whatever
// file format it came from.
func evalItemFromNode(root *jsonNode, base string, ln int64, spec EvalSpec) (EvalItem, error) {
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
	strs := 0 // parts that came from strings, not numbers
	if spec.Fields == nil {
		var empty, numeric []string
		for i, k := range root.keys {
			if k == spec.IDField {
				continue
			}
			v := root.vals[i]
			switch {
			case v.kind == 's' && strings.TrimSpace(v.str) == "":
				empty = append(empty, strconv.Quote(k))
			case v.kind == 'n':
				numeric = append(numeric, fmt.Sprintf("%q (%s)", k, v.str))
			case v.kind == 's':
				strs++
			case v.kind == 'o' || v.kind == 'a':
				strs++ // nested text is taken as it comes
			}
			parts = root.vals[i].texts(parts)
		}
		if strs == 0 {
			// Only numbers or empty strings: the item would be a few
			// digits long and match nearly anything, or nothing.
			var why []string
			if len(numeric) > 0 {
				why = append(why, "field(s) "+strings.Join(numeric, ", ")+" are numbers")
			}
			if len(empty) > 0 {
				why = append(why, "field(s) "+strings.Join(empty, ", ")+" are empty strings")
			}
			if len(why) == 0 {
				return it, fmt.Errorf("item %q has no text fields", it.ID)
			}
			return it, fmt.Errorf("item %q has no text: %s (set fields: to the text fields)", it.ID, strings.Join(why, "; "))
		}
	} else {
		var nodes []*jsonNode
		for _, f := range spec.Fields {
			var err error
			nodes, err = resolveEvalField(root, f, nodes[:0])
			if err != nil {
				return it, fmt.Errorf("item %q: %w", it.ID, err)
			}
			for _, v := range nodes {
				switch {
				case v.kind == 'n':
					return it, fmt.Errorf("item %q: field %q is a number (%s), want text", it.ID, f, v.str)
				case v.kind == 's' && strings.TrimSpace(v.str) == "":
					return it, fmt.Errorf("item %q: field %q is an empty string", it.ID, f)
				case v.kind == 'z':
					return it, fmt.Errorf("item %q: field %q is null", it.ID, f)
				case v.kind == 'b':
					return it, fmt.Errorf("item %q: field %q is a boolean, want text", it.ID, f)
				}
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
	it.Parts = parts
	it.Text = strings.Join(parts, "\n")
	return it, nil
}

// resolveEvalField appends the nodes of one configured field: a dotted
// path, or "list[index]" choosing one element of a list by the value of
// another field (an integer from 0 or a letter, A being the first).
func resolveEvalField(root *jsonNode, field string, out []*jsonNode) ([]*jsonNode, error) {
	listPath, idxPath, ok := splitIndexedField(field)
	if !ok {
		return root.resolve(field, out), nil
	}
	idxs := root.resolve(idxPath, nil)
	if len(idxs) == 0 || idxs[0].kind == 'z' {
		return out, nil // no answer given: the field contributes nothing
	}
	if len(idxs) > 1 || (idxs[0].kind != 'n' && idxs[0].kind != 's') {
		return out, fmt.Errorf("field %s: %q is not one integer or letter", field, idxPath)
	}
	lists := root.resolve(listPath, nil)
	if len(lists) != 1 || lists[0].kind != 'a' {
		return out, fmt.Errorf("field %s: %q is not a list", field, listPath)
	}
	list := lists[0]
	i, err := evalChoiceIndex(idxs[0].str)
	if err != nil {
		return out, fmt.Errorf("field %s: %s %w", field, idxPath, err)
	}
	if i >= len(list.vals) {
		return out, fmt.Errorf("field %s: %s %q is out of range for %d elements", field, idxPath, idxs[0].str, len(list.vals))
	}
	return append(out, list.vals[i]), nil
}

// splitIndexedField splits "choices[label]" into "choices" and "label".
func splitIndexedField(field string) (list, index string, ok bool) {
	if !strings.HasSuffix(field, "]") {
		return "", "", false
	}
	i := strings.LastIndexByte(field, '[')
	if i <= 0 || i+2 >= len(field) {
		return "", "", false
	}
	return field[:i], field[i+1 : len(field)-1], true
}

// evalChoiceIndex reads an answer index: "2" is 2, "C" or "c" is 2.
func evalChoiceIndex(s string) (int, error) {
	s = strings.TrimSpace(s)
	if n, err := strconv.Atoi(s); err == nil {
		if n < 0 {
			return 0, fmt.Errorf("%q is negative", s)
		}
		return n, nil
	}
	if len(s) == 1 {
		switch c := s[0]; {
		case c >= 'A' && c <= 'Z':
			return int(c - 'A'), nil
		case c >= 'a' && c <= 'z':
			return int(c - 'a'), nil
		}
	}
	return 0, fmt.Errorf("%q is not an integer or a letter A-Z", s)
}

// readEvalCSV reads a CSV or TSV file with a header row: every row is a
// record keyed by the header.
func readEvalCSV(r io.Reader, disp, format string, spec EvalSpec) ([]EvalItem, error) {
	cr := csv.NewReader(r)
	if format == "tsv" {
		cr.Comma = '\t'
	}
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, fmt.Errorf("%s: empty %s file (want a header row)", disp, strings.ToUpper(format))
		}
		return nil, fmt.Errorf("%s: %w", disp, err)
	}
	header = slices.Clone(header)
	header[0] = strings.TrimPrefix(header[0], "\ufeff")
	seen := map[string]bool{}
	for i, h := range header {
		if h == "" || seen[h] {
			return nil, fmt.Errorf("%s:1: header column %d is empty or repeated (%q)", disp, i+1, h)
		}
		seen[h] = true
	}
	base := filepath.Base(disp)
	var items []EvalItem
	for {
		row, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", disp, err) // csv.ParseError names the line
		}
		ln, _ := cr.FieldPos(0)
		root := &jsonNode{kind: 'o'}
		for i, cell := range row {
			root.keys = append(root.keys, header[i])
			root.vals = append(root.vals, evalCellNode(cell))
		}
		it, err := evalItemFromNode(root, base, int64(ln), spec)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %w", disp, ln, err)
		}
		it.File = disp
		items = append(items, it)
	}
	if err := checkEvalWords(items, disp); err != nil {
		return nil, err
	}
	return items, nil
}

// evalCellNode reads one CSV cell: a JSON array or object when it holds
// one, no value when empty, else a string.
func evalCellNode(cell string) *jsonNode {
	t := strings.TrimSpace(cell)
	if t == "" {
		return &jsonNode{kind: 'z'}
	}
	if t[0] == '[' || t[0] == '{' {
		if n, err := decodeEvalJSON([]byte(t)); err == nil {
			return n
		}
	}
	return &jsonNode{kind: 's', str: cell}
}

// readEvalParquet reads a Parquet file row by row (one batch in memory);
// the row number is the item's line.
func readEvalParquet(path, disp string, spec EvalSpec) ([]EvalItem, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	pf, err := parquet.OpenFile(f, st.Size())
	if err != nil {
		return nil, fmt.Errorf("%s: parquet: %w", disp, err)
	}
	r := parquet.NewGenericReader[any](pf)
	defer r.Close()
	base := filepath.Base(disp)
	schema := pf.Schema()
	buf := make([]any, 64)
	var items []EvalItem
	var ln int64
	for {
		n, err := r.Read(buf)
		for _, v := range buf[:n] {
			ln++
			it, err := objectItem(parquetNode(v, schema), base, disp, ln, spec, "not a record")
			if err != nil {
				return nil, fmt.Errorf("%s: row %d: %w", disp, ln, err)
			}
			items = append(items, it)
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: row %d: parquet: %w", disp, ln+1, err)
		}
	}
	if err := checkEvalWords(items, disp); err != nil {
		return nil, err
	}
	return items, nil
}

// parquetNode converts one decoded Parquet value to a node; the fields of
// a record keep the schema's order (node describes v; nil when unknown).
func parquetNode(v any, node parquet.Node) *jsonNode {
	switch x := v.(type) {
	case nil:
		return &jsonNode{kind: 'z'}
	case string:
		return &jsonNode{kind: 's', str: x}
	case []byte:
		return &jsonNode{kind: 's', str: string(x)}
	case bool:
		return &jsonNode{kind: 'b', str: strconv.FormatBool(x)}
	case map[string]any:
		n := &jsonNode{kind: 'o'}
		var order []string
		children := map[string]parquet.Node{}
		if node != nil && !node.Leaf() {
			for _, f := range node.Fields() {
				order = append(order, f.Name())
				children[f.Name()] = f
			}
		}
		var rest []string
		for k := range x {
			if _, ok := children[k]; !ok {
				rest = append(rest, k)
			}
		}
		sort.Strings(rest)
		for _, k := range append(order, rest...) {
			if val, ok := x[k]; ok {
				n.keys = append(n.keys, k)
				n.vals = append(n.vals, parquetNode(val, children[k]))
			}
		}
		return n
	case []any:
		elem := parquetListElement(node)
		n := &jsonNode{kind: 'a'}
		for _, e := range x {
			n.vals = append(n.vals, parquetNode(e, elem))
		}
		return n
	case float32, float64:
		return &jsonNode{kind: 'n', str: fmt.Sprint(x)}
	default:
		return &jsonNode{kind: 'n', str: fmt.Sprint(x)}
	}
}

// parquetListElement returns the element node of a LIST group
// (group (LIST) { repeated group list { element } }), or nil.
func parquetListElement(node parquet.Node) parquet.Node {
	for node != nil && !node.Leaf() && len(node.Fields()) == 1 {
		node = node.Fields()[0]
	}
	return node
}
