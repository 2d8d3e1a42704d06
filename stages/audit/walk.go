package audit

import (
	"fmt"
	"io"
	"path/filepath"
	"sort"

	"winnow/stages"
)

// How a walk works. The runner writes every ledger and metrics file in
// input order (one collector goroutine restores it before anything is
// written), so all files of a run can be merged like sorted runs: one
// cursor per file, and the smallest order key next. A document's records
// and rows from every stage arrive together, as a Trail, and memory stays
// at one line per file whatever the run's size. Ledger records carry file
// and line rather than the order key; the key is rebuilt from the file's
// position in the manifest's input list, as the readers build it. The
// sink's ledger (stage "output", split documents) is written after the
// run and may be in another order; it is small (one record per split
// document) and is sorted in memory.

// Trail is everything a run recorded about one document, in stage order.
type Trail struct {
	Order  stages.OrderKey
	ID     string
	Source string
	File   string
	Line   int64
	// Read holds the records of stage "read" (unreadable records; an
	// invalid_utf8 repair is an edit).
	Read []Record
	// Steps is aligned with Run.Steps.
	Steps []StepTrail
	// Other holds records of ledger files that are not steps (the sink's
	// "output" edits), by stage name.
	Other []Record
}

// StepTrail is what one stage recorded about the document.
type StepTrail struct {
	// Row is the stage's metrics row (nil when the stage measured
	// nothing or did not see the document).
	Row *MetricRow
	// Recs are the stage's ledger records (its drop or edit).
	Recs []Record
}

// Removal returns the step index and record of the decision that removed
// the document (-1 and nil when no stage did). A read error is step -2.
func (t *Trail) Removal() (int, *Record) {
	for i := range t.Read {
		if t.Read[i].Action == "drop" {
			return -2, &t.Read[i]
		}
	}
	for i := range t.Steps {
		for j := range t.Steps[i].Recs {
			if t.Steps[i].Recs[j].Action == "drop" {
				return i, &t.Steps[i].Recs[j]
			}
		}
	}
	return -1, nil
}

// BytesAt returns the document's size as it entered step i when a metrics
// row tells it exactly (the row of step i, or of an earlier step with no
// edit in between), and whether that is exact.
func (t *Trail) BytesAt(i int) (int64, bool) {
	if i < len(t.Steps) && t.Steps[i].Row != nil {
		return t.Steps[i].Row.Bytes, true
	}
	edited := false
	for j := min(i, len(t.Steps)) - 1; j >= 0; j-- {
		for _, rc := range t.Steps[j].Recs {
			if rc.Action == "edit" {
				edited = true
			}
		}
		if row := t.Steps[j].Row; row != nil {
			return row.Bytes, !edited
		}
	}
	return 0, false
}

// stream is one file of the walk.
type stream struct {
	step   int // index into Run.Steps, -1 for read, -2 for other
	name   string
	ledger *lineReader
	mf     *metricsFile
	// buffered records (sorted-in-memory streams)
	inMem   bool
	mem     []Record
	memPos  int
	curRec  *Record
	curRow  *MetricRow
	curKey  stages.OrderKey
	lastKey stages.OrderKey
	started bool
	done    bool
	run     *Run
	// unplaced counts ledger records whose file is not a run input.
	unplaced int64
}

func (s *stream) advance() error {
	for {
		if s.inMem {
			if s.memPos >= len(s.mem) {
				s.done = true
				return nil
			}
			rc := s.mem[s.memPos]
			s.memPos++
			k, _ := s.run.orderOf(&rc)
			s.curRec, s.curKey = &rc, k
			return nil
		}
		if s.mf != nil {
			row, err := s.mf.next()
			if err == io.EOF {
				s.done = true
				return nil
			}
			if err != nil {
				return err
			}
			s.curRow, s.curKey = row, row.Order
			if s.step >= 0 {
				s.run.Steps[s.step].MetricNames = s.mf.names
			}
		} else {
			b, err := s.ledger.next()
			if err == io.EOF {
				s.done = true
				return nil
			}
			if err != nil {
				return err
			}
			rc, err := parseRecord(b)
			if err != nil {
				return fmt.Errorf("%s:%d: %w", s.ledger.path, s.ledger.line, err)
			}
			k, ok := s.run.orderOf(&rc)
			if !ok {
				s.unplaced++
				continue
			}
			s.curRec, s.curKey = &rc, k
		}
		if s.started && s.curKey < s.lastKey {
			path := ""
			if s.mf != nil {
				path = s.mf.lr.path
			} else {
				path = s.ledger.path
			}
			return fmt.Errorf("%s is not in input order (order key %v after %v): it was not written by one winnow run", path, s.curKey, s.lastKey)
		}
		s.started = true
		s.lastKey = s.curKey
		return nil
	}
}

func (s *stream) close() {
	if s.ledger != nil {
		s.ledger.close()
	}
	if s.mf != nil {
		s.mf.close()
	}
}

// WalkStats are counts a walk could not attach to a document.
type WalkStats struct {
	// Unplaced counts ledger records whose file is not among the
	// manifest's inputs.
	Unplaced int64
}

// Walk calls fn with the trail of every document that has a ledger record
// or a metrics row, in input order. The trail is reused after fn returns.
// Step metric names are filled in as files are read.
func (r *Run) Walk(fn func(t *Trail) error) (WalkStats, error) {
	var ss []*stream
	defer func() {
		for _, s := range ss {
			s.close()
		}
	}()
	open := func(step int, name, path string, metrics bool) error {
		s := &stream{step: step, name: name, run: r}
		if metrics {
			mf, err := openMetrics(path)
			if err != nil {
				return err
			}
			s.mf = mf
		} else {
			lr, err := openLines(path)
			if err != nil {
				return err
			}
			s.ledger = lr
		}
		ss = append(ss, s)
		return nil
	}
	if p := filepath.Join(r.Dir, "ledger", "read.jsonl.zst"); fileExists(p) {
		if err := open(-1, "read", p, false); err != nil {
			return WalkStats{}, err
		}
	}
	for i, st := range r.Steps {
		if st.LedgerPath != "" {
			if err := open(i, st.Name, st.LedgerPath, false); err != nil {
				return WalkStats{}, err
			}
		}
		if st.MetricsPath != "" {
			if err := open(i, st.Name, st.MetricsPath, true); err != nil {
				return WalkStats{}, err
			}
		}
	}
	var stats WalkStats
	for _, name := range r.ledgerOnly {
		recs, unplaced, err := r.loadSorted(filepath.Join(r.Dir, "ledger", name+".jsonl.zst"))
		if err != nil {
			return stats, err
		}
		stats.Unplaced += unplaced
		ss = append(ss, &stream{step: -2, name: name, run: r, inMem: true, mem: recs})
	}
	for _, s := range ss {
		if s.done {
			continue
		}
		if err := s.advance(); err != nil {
			return stats, err
		}
	}
	t := &Trail{Steps: make([]StepTrail, len(r.Steps))}
	for {
		var lo stages.OrderKey
		found := false
		for _, s := range ss {
			if !s.done && (!found || s.curKey < lo) {
				lo, found = s.curKey, true
			}
		}
		if !found {
			break
		}
		t.reset(lo)
		for _, s := range ss {
			for !s.done && s.curKey == lo {
				if s.curRow != nil {
					t.addRow(s.step, s.curRow)
					s.curRow = nil
				} else if s.curRec != nil {
					t.addRec(s.step, *s.curRec)
					s.curRec = nil
				}
				if err := s.advance(); err != nil {
					return stats, err
				}
			}
		}
		if err := fn(t); err != nil {
			return stats, err
		}
	}
	for _, s := range ss {
		stats.Unplaced += s.unplaced
		if s.mf != nil && s.step >= 0 {
			r.Steps[s.step].MetricNames = s.mf.names
		}
	}
	return stats, nil
}

// loadSorted reads a whole ledger file and sorts it by order key (stable).
func (r *Run) loadSorted(path string) ([]Record, int64, error) {
	lr, err := openLines(path)
	if err != nil {
		return nil, 0, err
	}
	defer lr.close()
	var recs []Record
	var keys []stages.OrderKey
	var unplaced int64
	for {
		b, err := lr.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, 0, err
		}
		rc, err := parseRecord(b)
		if err != nil {
			return nil, 0, fmt.Errorf("%s:%d: %w", path, lr.line, err)
		}
		k, ok := r.orderOf(&rc)
		if !ok {
			unplaced++
			continue
		}
		recs = append(recs, rc)
		keys = append(keys, k)
	}
	idx := make([]int, len(recs))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return keys[idx[a]] < keys[idx[b]] })
	out := make([]Record, len(recs))
	for i, j := range idx {
		out[i] = recs[j]
	}
	return out, unplaced, nil
}

func (t *Trail) reset(k stages.OrderKey) {
	t.Order = k
	t.ID, t.Source, t.File, t.Line = "", "", "", 0
	t.Read = t.Read[:0]
	t.Other = t.Other[:0]
	for i := range t.Steps {
		t.Steps[i].Row = nil
		t.Steps[i].Recs = t.Steps[i].Recs[:0]
	}
}

func (t *Trail) addRow(step int, row *MetricRow) {
	if t.ID == "" {
		t.ID, t.Source = row.Doc, row.Source
	}
	if step >= 0 {
		t.Steps[step].Row = row
	}
}

func (t *Trail) addRec(step int, rc Record) {
	if t.ID == "" || t.File == "" {
		if t.ID == "" {
			t.ID = rc.Doc
		}
		if t.Source == "" {
			t.Source = rc.Source
		}
		t.File, t.Line = rc.File, rc.Line
	}
	switch {
	case step == -1:
		t.Read = append(t.Read, rc)
	case step >= 0:
		t.Steps[step].Recs = append(t.Steps[step].Recs, rc)
	default:
		t.Other = append(t.Other, rc)
	}
}

// Clone returns a deep copy of t that stays valid after the walk moves on.
func (t *Trail) Clone() *Trail {
	c := &Trail{Order: t.Order, ID: t.ID, Source: t.Source, File: t.File, Line: t.Line}
	c.Read = append([]Record(nil), t.Read...)
	c.Other = append([]Record(nil), t.Other...)
	c.Steps = make([]StepTrail, len(t.Steps))
	for i, s := range t.Steps {
		c.Steps[i].Row = s.Row
		c.Steps[i].Recs = append([]Record(nil), s.Recs...)
	}
	return c
}

// Location returns the trail's input file and line: from its ledger
// records, or from the order key and the manifest's inputs.
func (r *Run) Location(t *Trail) (file string, line int64) {
	if t.File != "" {
		return t.File, t.Line
	}
	in := t.Order.Input()
	if in >= 0 && in < len(r.Manifest.Inputs) {
		return r.Manifest.Inputs[in].Path, t.Order.Record()
	}
	return "", t.Order.Record()
}
