package run

// Units of a split run: the frozen input list, markers, the files a unit
// hands on, running one unit and committing it.

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"winnow/stages"
	"winnow/stages/fsio"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// frozenInputs is the input list of a split run, fixed by its first task.
type frozenInputs struct {
	ConfigHash string `json:"config_hash"`
	// Spec, Phases and Units say how to finish the run (audit lists them).
	Spec       string        `json:"spec"`
	Phases     []string      `json:"phases"`
	Units      int           `json:"units"`
	PhaseUnits []int         `json:"phase_units"`
	ChunkBytes int64         `json:"chunk_bytes"`
	Inputs     []frozenInput `json:"inputs"`
}

type frozenInput struct {
	Path    string `json:"path"`
	Size    int64  `json:"size"`
	ModTime int64  `json:"mtime_ns"`
}

func freezeList(s *spec.Spec, inputs []read.InputFile) (*frozenInputs, error) {
	f := &frozenInputs{ConfigHash: s.ConfigHash, ChunkBytes: s.ChunkBytes}
	for _, in := range inputs {
		if in.Path == "-" {
			return nil, errors.New("standard input cannot be read by a split run (its tasks cannot share it): list files")
		}
		st, err := os.Stat(in.Path)
		if err != nil {
			return nil, err
		}
		f.Inputs = append(f.Inputs, frozenInput{Path: in.Path, Size: st.Size(), ModTime: st.ModTime().UnixNano()})
	}
	return f, nil
}

// checkFrozen writes the input list at the first phase (the first task to
// get there wins) and compares every later task's list with it.
func checkFrozen(dir string, now *frozenInputs, first bool) error {
	path := filepath.Join(dir, unitsDir, "inputs.json")
	b, err := json.MarshalIndent(now, "", "  ")
	if err != nil {
		return err
	}
	if _, err := os.Stat(path); errors.Is(err, os.ErrNotExist) {
		if !first {
			return fmt.Errorf("%s: no input list: run phase %q first", dir, PhaseRead)
		}
		tmp := fmt.Sprintf("%s.tmp-%d", path, os.Getpid())
		if err := os.WriteFile(tmp, append(b, '\n'), 0o644); err != nil {
			return err
		}
		// Link fails when another task froze the list first: then ours
		// is compared with theirs below.
		lerr := os.Link(tmp, path)
		os.Remove(tmp)
		if lerr == nil {
			return nil
		}
	}
	old, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	var was frozenInputs
	if err := json.Unmarshal(old, &was); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if was.ConfigHash != now.ConfigHash {
		return fmt.Errorf("%s belongs to config %s, the spec is %s: use another --out, or remove %s to start the split run over", dir, was.ConfigHash, now.ConfigHash, filepath.Join(dir, unitsDir))
	}
	var diffs []string
	seen := map[string]frozenInput{}
	for _, in := range was.Inputs {
		seen[in.Path] = in
	}
	for _, in := range now.Inputs {
		o, ok := seen[in.Path]
		switch {
		case !ok:
			diffs = append(diffs, in.Path+" (new)")
		case o.Size != in.Size:
			diffs = append(diffs, fmt.Sprintf("%s (%d bytes, was %d)", in.Path, in.Size, o.Size))
		case o.ModTime != in.ModTime:
			diffs = append(diffs, in.Path+" (modified)")
		}
		delete(seen, in.Path)
	}
	for _, in := range was.Inputs {
		if _, gone := seen[in.Path]; gone {
			diffs = append(diffs, in.Path+" (gone)")
		}
	}
	if len(diffs) == 0 && len(was.Inputs) != len(now.Inputs) {
		diffs = append(diffs, "the order of the files changed")
	}
	if len(diffs) > 0 {
		return fmt.Errorf("the inputs differ from the list the run's first phase froze in %s: %s (to start the split run over on the inputs as they are now, remove %s)", path, strings.Join(diffs, ", "), filepath.Join(dir, unitsDir))
	}
	return nil
}

// unitMarker is a unit's completion (done.json) or failure marker.
type unitMarker struct {
	Phase      string     `json:"phase"`
	Unit       int        `json:"unit"`
	ConfigHash string     `json:"config_hash"`
	Version    string     `json:"tool_version"`
	Host       string     `json:"host"`
	PID        int        `json:"pid"`
	Seconds    float64    `json:"seconds"`
	Inputs     []string   `json:"inputs,omitempty"`
	Files      []unitFile `json:"files,omitempty"`
	Error      string     `json:"error,omitempty"`
	State      *unitState `json:"state,omitempty"`
}

type unitFile struct {
	Path  string `json:"path"`
	Bytes int64  `json:"bytes"`
	XXH3  string `json:"xxh3"`
}

// unitState is what a unit counted: the write phase sums it.
type unitState struct {
	Read         *record.Counters      `json:"read,omitempty"`
	Counters     []*record.Counters    `json:"counters"`
	Write        *record.Counters      `json:"write"`
	InputSums    []record.InputSummary `json:"inputs,omitempty"`
	Errors       []record.RunError     `json:"errors,omitempty"`
	ErrCount     int64                 `json:"error_count"`
	FatalInputs  int                   `json:"fatal_inputs"`
	Internal     int64                 `json:"internal_errors"`
	LedgerCounts map[string]int64      `json:"ledger_counts,omitempty"`
	Ledger       []string              `json:"ledger,omitempty"`
	Metrics      []string              `json:"metrics,omitempty"`
	Keys         bool                  `json:"keys,omitempty"`
	Reports      []string              `json:"reports,omitempty"`
	Docs         int64                 `json:"docs"`
}

func unitDir(dir, phase string, u int) string {
	return filepath.Join(dir, unitsDir, phase, fmt.Sprintf("%05d", u))
}

func failedMarker(dir, phase string, u int) string {
	return filepath.Join(dir, unitsDir, phase, fmt.Sprintf("%05d.failed.json", u))
}

// readMarker returns a unit's completion marker, or nil when the unit is
// not done.
func readMarker(dir, phase string, u int) (*unitMarker, error) {
	b, err := os.ReadFile(filepath.Join(unitDir(dir, phase, u), "done.json"))
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var m unitMarker
	if err := json.Unmarshal(b, &m); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(unitDir(dir, phase, u), "done.json"), err)
	}
	return &m, nil
}

// unitIO receives what one unit hands on: surviving documents, the next
// global stage's keys and the ids read.
type unitIO struct {
	docs *docSpill
	// part takes the surviving documents instead of docs when the output
	// is planned (phase shards writes it in ranges).
	part     record.PartSaver
	partDocs int64

	keys  *keyWriter
	ids   *idWriter
	codec stages.KeyCodec
	kb    []byte // the encoded keys of the current document, reused
}

func (u *unitIO) addKeys(d *stages.Doc, keys any) error {
	if u.keys == nil {
		return nil
	}
	u.kb = u.codec.AppendKeys(u.kb[:0], keys)
	return u.keys.add(d.Order, d.ID, u.kb)
}

// keyWriter stores scan keys: per document, order, id and encoded keys.
type keyWriter struct{ recordFile }

func createKeyWriter(path string) (*keyWriter, error) {
	rf, err := createRecordFile(path)
	if err != nil {
		return nil, err
	}
	return &keyWriter{*rf}, nil
}

func (w *keyWriter) add(order stages.OrderKey, id string, keys []byte) error {
	b := binary.AppendUvarint(w.buf[:0], uint64(order))
	b = appendField(b, id)
	b = binary.AppendUvarint(b, uint64(len(keys)))
	return w.put(append(b, keys...))
}

// idWriter stores the ids a read unit saw (xxh3, id, file, line), so the
// write phase can count repeated ids across the whole run.
type idWriter struct{ kw *keyWriter }

func (w *idWriter) add(d *stages.Doc) error {
	b := binary.AppendVarint(w.kw.buf[:0], d.Line)
	b = appendField(b, d.ID)
	return w.kw.put(appendField(b, d.File))
}

// runUnit runs unit u of a document phase into a temp directory and
// renames it into place; it returns the number of documents it passed on.
func (sr *splitRun) runUnit(ctx context.Context, ph Phase, u int, prev string) (int64, error) {
	t0 := time.Now()
	if err := fault(ph.Name, u, "start"); err != nil {
		return 0, err
	}
	seg := sr.segs[ph.Seg]
	tmp, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), fmt.Sprintf("unit-%s-%05d-", ph.Name, u))
	if err != nil {
		return 0, err
	}
	defer os.RemoveAll(tmp)
	var files []read.InputFile
	for _, i := range sr.chunks[u] {
		files = append(files, sr.inputs[i])
	}
	r := sr.newRunner(files)
	r.chunkOf = nil // one chunk: frames end only at the unit's end
	r.ledger = record.NewLedger(filepath.Join(tmp, "ledger"))
	r.metrics = record.NewMetrics(filepath.Join(tmp, "metrics"))
	uio := &unitIO{}
	r.unit = uio
	if uio.docs, err = createDocSpill(filepath.Join(tmp, "docs.zst")); err != nil {
		return 0, err
	}
	if seg.scan < 0 && sr.planned {
		// The last document phase of a planned output hands its documents
		// to a part of the output (tokens, hashes and records), which
		// phase shards plans and writes in ranges.
		env := sr.env
		env.RunDir, env.TempDir = tmp, filepath.Join(tmp, "spill")
		ps, err := record.OpenPartSink(sr.spec.Output, env, sr.spec.Name)
		if err != nil {
			return 0, err
		}
		uio.part = ps
	}
	state := &unitState{}
	if seg.scan >= 0 {
		if c, ok := sr.steps[seg.scan].Global.(stages.KeyCodec); ok {
			uio.codec = c
			if uio.keys, err = createKeyWriter(filepath.Join(tmp, "keys.zst")); err != nil {
				return 0, err
			}
			state.Keys = true
		}
	}
	if seg.apply < 0 {
		kw, err := createKeyWriter(filepath.Join(tmp, "ids.zst"))
		if err != nil {
			return 0, err
		}
		uio.ids = &idWriter{kw: kw}
	}
	closeAll := func() error {
		var first error
		for _, c := range []func() error{uio.docs.close, func() error {
			if uio.keys != nil {
				return uio.keys.close()
			}
			return nil
		}, func() error {
			if uio.ids != nil {
				return uio.ids.kw.close()
			}
			return nil
		}} {
			if err := c(); err != nil && first == nil {
				first = err
			}
		}
		return first
	}
	var produce func(ctx context.Context, out chan<- *batch) error
	if seg.apply < 0 {
		produce = r.produceInputs
	} else {
		sp := filepath.Join(unitDir(sr.dir, prev, u), "docs.zst")
		produce = func(ctx context.Context, out chan<- *batch) error { return r.produceSpill(ctx, sp, out) }
	}
	// Reports of observing stages start empty for this unit.
	for _, st := range sr.steps {
		if rs, ok := stageOf(st).(stages.ReportSplitter); ok {
			if _, err := rs.SaveReport(); err != nil {
				return 0, err
			}
		} else if _, obs := stageOf(st).(stages.Observer); obs && sr.stepInSeg(st.Name, seg) {
			return 0, fmt.Errorf("stage %s keeps a run-wide report that cannot be built in parts: run this spec in one process", st.Name)
		}
	}
	err = r.runSegment(ctx, seg, produce, uio.docs)
	if cerr := closeAll(); cerr != nil && err == nil {
		err = cerr
	}
	if uio.part != nil {
		if err == nil {
			err = uio.part.SavePart(filepath.Join(tmp, partDir))
		} else {
			uio.part.Abort()
		}
	}
	if err != nil {
		r.ledger.Abort()
		r.metrics.Abort()
		return 0, err
	}
	if state.Ledger, err = r.ledger.CommitParts(); err != nil {
		return 0, err
	}
	if state.Metrics, err = r.metrics.CommitParts(); err != nil {
		return 0, err
	}
	for _, st := range sr.steps {
		rs, ok := stageOf(st).(stages.ReportSplitter)
		if !ok || !sr.stepInSeg(st.Name, seg) {
			continue
		}
		part, err := rs.SaveReport()
		if err != nil {
			return 0, err
		}
		if err := os.WriteFile(filepath.Join(tmp, "report-"+st.Name+".bin"), part, 0o644); err != nil {
			return 0, err
		}
		state.Reports = append(state.Reports, st.Name)
	}
	state.Read, state.Write = r.Read.Snapshot(), r.Write.Snapshot()
	for _, c := range r.Counters {
		s := c.Snapshot()
		s.Seconds = float64(c.Nanos()) / 1e9
		state.Counters = append(state.Counters, s)
	}
	state.InputSums, state.Errors, state.ErrCount, state.FatalInputs = r.InputSums, r.Errors, r.ErrCount, r.FatalInputs
	state.Internal, state.LedgerCounts, state.Docs = r.InternalErrors, r.ledger.Counts(), uio.docs.n+uio.partDocs
	if err := fault(ph.Name, u, "written"); err != nil {
		return 0, err
	}
	if err := sr.commitUnit(tmp, ph.Name, u, state, files, t0); err != nil {
		return 0, err
	}
	return state.Docs, fault(ph.Name, u, "renamed")
}

// commitUnit writes the unit's marker into tmp and renames tmp into place.
func (sr *splitRun) commitUnit(tmp, phase string, u int, state *unitState, files []read.InputFile, t0 time.Time) error {
	m := unitMarker{Phase: phase, Unit: u, ConfigHash: sr.spec.ConfigHash, Version: sr.opt.Version, Host: sr.host,
		PID: os.Getpid(), State: state}
	for _, in := range files {
		m.Inputs = append(m.Inputs, in.Display)
	}
	err := filepath.Walk(tmp, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		n, h, err := fsio.HashFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(tmp, p)
		m.Files = append(m.Files, unitFile{Path: filepath.ToSlash(rel), Bytes: n, XXH3: h})
		return nil
	})
	if err != nil {
		return err
	}
	m.Seconds = time.Since(t0).Seconds()
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	if err := fsio.WriteFileAtomic(filepath.Join(tmp, "done.json"), append(b, '\n')); err != nil {
		return err
	}
	final := unitDir(sr.dir, phase, u)
	if err := os.MkdirAll(filepath.Dir(final), 0o755); err != nil {
		return err
	}
	if err := os.Rename(tmp, final); err != nil {
		if done, _ := readMarker(sr.dir, phase, u); done != nil {
			return nil // another attempt of this unit finished first
		}
		return err
	}
	os.Remove(failedMarker(sr.dir, phase, u))
	return nil
}

// writeFailed records a failed unit: its error, host and inputs.
func (sr *splitRun) writeFailed(phase string, u int, uerr error, took time.Duration) {
	m := unitMarker{Phase: phase, Unit: u, ConfigHash: sr.spec.ConfigHash, Version: sr.opt.Version, Host: sr.host,
		PID: os.Getpid(), Seconds: took.Seconds(), Error: uerr.Error()}
	if u < len(sr.chunks) {
		for _, i := range sr.chunks[u] {
			m.Inputs = append(m.Inputs, sr.inputs[i].Display)
		}
	}
	b, _ := json.MarshalIndent(m, "", "  ")
	os.MkdirAll(filepath.Join(sr.dir, unitsDir, phase), 0o755)
	fsio.WriteFileAtomic(failedMarker(sr.dir, phase, u), append(b, '\n'))
}
