package stages

import (
	"path/filepath"
	"sort"
	"winnow/stages/jsonl"

	"winnow/stages/fsio"
)

// LedgerRecord is one decision in OUT/ledger/<stage>.jsonl.zst. The field
// names are a contract (see README "Run directory"):
//
//	{"doc","source","file","line","stage","rule","action","value","limit",
//	 ...extra keys such as "of","similarity","eval","item","matches",
//	 "changes"}
type LedgerRecord struct {
	Doc    string
	Source string
	File   string
	Line   int64
	Stage  string
	Rule   string
	Action string
	Value  any
	Limit  any
	// Changes counts what an edit changed.
	Changes map[string]int
	// Extra keys are written after the fixed ones, sorted by name.
	Extra map[string]any
}

// AppendJSON appends the record as one JSON line.
func (r *LedgerRecord) AppendJSON(b []byte) []byte {
	j := jsonl.Object{B: b}
	j.Begin()
	j.Str("doc", r.Doc)
	j.Str("source", r.Source)
	j.Str("file", r.File)
	j.Int("line", r.Line)
	j.Str("stage", r.Stage)
	j.Str("rule", r.Rule)
	j.Str("action", r.Action)
	if r.Value != nil {
		j.Val("value", r.Value)
	}
	if r.Limit != nil {
		j.Val("limit", r.Limit)
	}
	if len(r.Changes) > 0 {
		j.Val("changes", r.Changes)
	}
	if len(r.Extra) > 0 {
		keys := make([]string, 0, len(r.Extra))
		for k := range r.Extra {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			j.Val(k, r.Extra[k])
		}
	}
	return j.End()
}

// Ledger writes one zstd JSONL file per stage under OUT/ledger/. Records
// are written by one goroutine in input order, so the files are identical
// whatever the number of workers.
type Ledger struct {
	dir   string
	files map[string]*fsio.ZstdWriter
	order []string
	buf   []byte
	count map[string]int64
}

// NewLedger prepares a ledger in dir (files are created on first use).
func NewLedger(dir string) *Ledger {
	return &Ledger{dir: dir, files: map[string]*fsio.ZstdWriter{}, count: map[string]int64{}}
}

// Open creates the file for stage even when it will hold no record, so
// every stage of a run has a ledger file.
func (l *Ledger) Open(stage string) error {
	if _, ok := l.files[stage]; ok {
		return nil
	}
	w, err := fsio.CreateZstd(filepath.Join(l.dir, stage+".jsonl.zst"))
	if err != nil {
		return err
	}
	l.files[stage] = w
	l.order = append(l.order, stage)
	return nil
}

// Add writes one record.
func (l *Ledger) Add(r *LedgerRecord) error {
	if err := l.Open(r.Stage); err != nil {
		return err
	}
	l.buf = r.AppendJSON(l.buf[:0])
	l.count[r.Stage]++
	_, err := l.files[r.Stage].Write(l.buf)
	return err
}

// Count returns the number of records written for stage.
func (l *Ledger) Count(stage string) int64 { return l.count[stage] }

// Commit finishes every file.
func (l *Ledger) Commit() error {
	var first error
	for _, s := range l.order {
		if err := l.files[s].Commit(); err != nil && first == nil {
			first = err
		}
	}
	return first
}

// Abort removes unfinished files.
func (l *Ledger) Abort() {
	for _, s := range l.order {
		l.files[s].Abort()
	}
}

// Metrics writes OUT/metrics/<stage>.jsonl.zst: one flat JSON object per
// document the stage measured, kept or not, so that audit and what-if can
// recompute decisions without re-reading inputs, and DuckDB or pandas can
// read the files directly:
//
//	{"doc":ID,"source":S,"order":N,"bytes":B,"action":"keep|drop|edit",
//	 "rule":R,"dropped_by":STAGE,<metric>:<value>...}
//
// "dropped_by" is present when an earlier stage already removed the
// document: the runner still measures it (shadow measurement) so what-if
// can tell what a looser earlier threshold would let through. Metric
// values that do not apply are null.
type Metrics struct {
	dir   string
	files map[string]*fsio.ZstdWriter
	order []string
	buf   jsonl.Object
}

// NewMetrics prepares a metrics store in dir.
func NewMetrics(dir string) *Metrics {
	return &Metrics{dir: dir, files: map[string]*fsio.ZstdWriter{}}
}

// MetricRow is one document's measured values at one stage.
type MetricRow struct {
	Doc       string
	Source    string
	Order     OrderKey
	Bytes     int
	Action    Action
	Rule      string
	DroppedBy string
	Names     []string
	Values    []float64
}

// Add writes one row for stage.
func (m *Metrics) Add(stage string, r *MetricRow) error {
	w, ok := m.files[stage]
	if !ok {
		var err error
		w, err = fsio.CreateZstd(filepath.Join(m.dir, stage+".jsonl.zst"))
		if err != nil {
			return err
		}
		m.files[stage] = w
		m.order = append(m.order, stage)
	}
	j := &m.buf
	j.Begin()
	j.Str("doc", r.Doc)
	j.Str("source", r.Source)
	j.Int("order", int64(r.Order))
	j.Int("bytes", int64(r.Bytes))
	j.Str("action", r.Action.String())
	if r.Rule != "" {
		j.Str("rule", r.Rule)
	}
	if r.DroppedBy != "" {
		j.Str("dropped_by", r.DroppedBy)
	}
	for i, n := range r.Names {
		if i < len(r.Values) {
			j.Float(n, r.Values[i])
		}
	}
	_, err := w.Write(j.End())
	return err
}

// Commit finishes every file.
func (m *Metrics) Commit() error {
	var first error
	for _, s := range m.order {
		if err := m.files[s].Commit(); err != nil && first == nil {
			first = err
		}
	}
	return first
}

// Abort removes unfinished files.
func (m *Metrics) Abort() {
	for _, s := range m.order {
		m.files[s].Abort()
	}
}
