// Package record writes what a run decided and produced: the per-stage
// ledger and metrics files and the output sink (shards).
package record

import (
	"io"
	"maps"
	"os"
	"path/filepath"
	"slices"

	"winnow/stages/jsonl"

	"winnow/stages"
	"winnow/stages/fsio"
)

// LedgerRecord is one decision in OUT/ledger/<stage>.jsonl.zst. The field
// names are a contract (see README "Run directory"):
//
//	{"doc","source","file","line","stage","rule","action","value","limit",
//	 "bytes", ...extra keys such as "of","similarity","eval","item","matches",
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
	// Bytes is what the decision took out of the text, written as "bytes"
	// when HasBytes: for a drop the document's size as it entered the
	// stage, for an edit its size before minus after (negative when the
	// edit added text).
	Bytes    int64
	HasBytes bool
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
	if r.HasBytes {
		j.Int("bytes", r.Bytes)
	}
	if len(r.Changes) > 0 {
		j.Val("changes", r.Changes)
	}
	if len(r.Extra) > 0 {
		for _, k := range slices.Sorted(maps.Keys(r.Extra)) {
			j.Val(k, r.Extra[k])
		}
	}
	return j.End()
}

// streamSet is a directory of zstd JSONL files, one per stage, created on
// first use; the ledger and the metrics store are each one.
type streamSet struct {
	dir   string
	files map[string]*fsio.ZstdWriter
	order []string
}

func newStreamSet(dir string) streamSet {
	return streamSet{dir: dir, files: map[string]*fsio.ZstdWriter{}}
}

func (s *streamSet) get(name string) (*fsio.ZstdWriter, error) {
	if w, ok := s.files[name]; ok {
		return w, nil
	}
	w, err := fsio.CreateZstd(filepath.Join(s.dir, name+".jsonl.zst"))
	if err != nil {
		return nil, err
	}
	s.files[name] = w
	s.order = append(s.order, name)
	return w, nil
}

// Dir is the directory of the set's files.
func (s *streamSet) Dir() string { return s.dir }

func (s *streamSet) commit() error {
	var first error
	for _, n := range s.order {
		if err := s.files[n].Commit(); err != nil && first == nil {
			first = err
		}
	}
	return first
}

func (s *streamSet) abort() {
	for _, n := range s.order {
		s.files[n].Abort()
	}
}

// Detach stops every file and leaves its temp file for a resume.
func (s *streamSet) Detach() {
	for _, n := range s.order {
		s.files[n].Detach()
	}
}

// EndFrames ends the current zstd frame of every file that has bytes in
// it. A run ends frames wherever a unit of work (an input chunk) ends, so
// each file is the concatenation of the files its units write alone.
func (s *streamSet) EndFrames() error {
	for _, n := range s.order {
		if err := s.files[n].EndFrame(); err != nil {
			return err
		}
	}
	return nil
}

// CommitParts commits the files that got at least one byte and drops the
// others: a unit of a split run writes its part of each file this way
// (see AssembleStream). It returns the names committed.
func (s *streamSet) CommitParts() ([]string, error) {
	var names []string
	var first error
	for _, n := range s.order {
		w := s.files[n]
		if w.RawBytes() == 0 {
			w.Abort()
			continue
		}
		if err := w.Commit(); err != nil && first == nil {
			first = err
		}
		names = append(names, n)
	}
	return names, first
}

// AssembleStream writes final (atomically) as the byte concatenation of
// parts, skipping parts that do not exist; with no part it writes the
// empty zstd stream a file that never got a record has.
func AssembleStream(final string, parts []string) error {
	var have []string
	for _, p := range parts {
		if _, err := os.Stat(p); err == nil {
			have = append(have, p)
		}
	}
	if len(have) == 0 {
		w, err := fsio.CreateZstd(final)
		if err != nil {
			return err
		}
		return w.Commit()
	}
	a, err := fsio.CreateAtomic(final)
	if err != nil {
		return err
	}
	for _, p := range have {
		f, err := os.Open(p)
		if err != nil {
			a.Abort()
			return err
		}
		_, err = io.Copy(a, f)
		f.Close()
		if err != nil {
			a.Abort()
			return err
		}
	}
	return a.Commit()
}

// Retarget returns states with each file's current temp name: after a
// resume the prefix lives in the new temp files.
func (s *streamSet) Retarget(states []StreamState) []StreamState {
	out := append([]StreamState(nil), states...)
	for i := range out {
		if w, ok := s.files[out[i].Name]; ok {
			out[i].Temp = w.TempPath()
		}
	}
	return out
}

// StreamState is where one file of a set stood at a checkpoint.
type StreamState struct {
	Name  string `json:"name"`
	Temp  string `json:"temp"`
	Final string `json:"final"`
	Size  int64  `json:"size"`
}

// Checkpoint ends a frame in every file and reports where each stands.
func (s *streamSet) Checkpoint() ([]StreamState, error) {
	var out []StreamState
	for _, n := range s.order {
		w := s.files[n]
		tmp, size, err := w.Checkpoint()
		if err != nil {
			return nil, err
		}
		out = append(out, StreamState{Name: n, Temp: tmp, Final: w.Path(), Size: size})
	}
	return out, nil
}

// Resume reopens every file at its checkpointed size, from its temp file
// (after a crash) or its committed file (after an interruption).
func (s *streamSet) Resume(states []StreamState) error {
	for _, st := range states {
		src := st.Temp
		if _, err := os.Stat(src); err != nil {
			src = st.Final
		}
		w, err := fsio.ResumeZstd(filepath.Join(s.dir, st.Name+".jsonl.zst"), src, st.Size)
		if err != nil {
			return err
		}
		if src == st.Temp {
			os.Remove(st.Temp) // copied into the new temp file
		}
		s.files[st.Name] = w
		s.order = append(s.order, st.Name)
	}
	return nil
}

// Ledger writes one zstd JSONL file per stage under OUT/ledger/. Records
// are written by one goroutine in input order, so the files are identical
// whatever the number of workers.
type Ledger struct {
	streamSet
	buf   []byte
	count map[string]int64
}

// NewLedger prepares a ledger in dir (files are created on first use).
func NewLedger(dir string) *Ledger {
	return &Ledger{streamSet: newStreamSet(dir), count: map[string]int64{}}
}

// Open creates the file for stage even when it will hold no record, so
// every stage of a run has a ledger file.
func (l *Ledger) Open(stage string) error {
	_, err := l.get(stage)
	return err
}

// Add writes one record.
func (l *Ledger) Add(r *LedgerRecord) error {
	w, err := l.get(r.Stage)
	if err != nil {
		return err
	}
	l.buf = r.AppendJSON(l.buf[:0])
	l.count[r.Stage]++
	_, err = w.Write(l.buf)
	return err
}

// Count returns the number of records written for stage.
func (l *Ledger) Count(stage string) int64 { return l.count[stage] }

// Counts returns the number of records written per stage (a checkpoint
// saves it).
func (l *Ledger) Counts() map[string]int64 { return l.count }

// SetCount restores the number of records written for stage on resume.
func (l *Ledger) SetCount(stage string, n int64) { l.count[stage] = n }

// Commit finishes every file.
func (l *Ledger) Commit() error { return l.commit() }

// Abort removes unfinished files.
func (l *Ledger) Abort() { l.abort() }

// Metrics writes OUT/metrics/<stage>.jsonl.zst: one flat JSON object per
// document the stage measured, kept or not, so that audit and what-if can
// recompute decisions without re-reading inputs, and DuckDB or pandas can
// read the files directly:
//
//	{"doc":ID,"source":S,"order":N,"bytes":B,"action":"keep|drop|edit",
//	 "rule":R,"dropped_by":STAGE,<label>:"text"...,<metric>:<value>...}
//
// "dropped_by" is present when an earlier stage already removed the
// document: the runner still measures it (shadow measurement) so what-if
// can tell what a looser earlier threshold would let through. Metric
// values that do not apply are null.
type Metrics struct {
	streamSet
	buf jsonl.Object
}

// NewMetrics prepares a metrics store in dir.
func NewMetrics(dir string) *Metrics {
	return &Metrics{streamSet: newStreamSet(dir)}
}

// MetricRow is one document's measured values at one stage.
type MetricRow struct {
	Doc       string
	Source    string
	Order     stages.OrderKey
	Bytes     int
	Action    stages.Action
	Rule      string
	DroppedBy string
	// Labels are text values written after the fixed fields, by key.
	Labels map[string]string
	Names  []string
	Values []float64
}

// Add writes one row for stage.
func (m *Metrics) Add(stage string, r *MetricRow) error {
	w, err := m.get(stage)
	if err != nil {
		return err
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
	if len(r.Labels) > 0 {
		for _, k := range slices.Sorted(maps.Keys(r.Labels)) {
			j.Str(k, r.Labels[k])
		}
	}
	for i, n := range r.Names {
		if i < len(r.Values) {
			j.Float(n, r.Values[i])
		}
	}
	_, err = w.Write(j.End())
	return err
}

// Commit finishes every file.
func (m *Metrics) Commit() error { return m.commit() }

// Abort removes unfinished files.
func (m *Metrics) Abort() { m.abort() }
