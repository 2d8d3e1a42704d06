package run

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"winnow/stages"
	"winnow/stages/fsio"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// The runner splits a pipeline into segments at its global stages. A
// segment reads documents (from the inputs, or from the previous segment's
// spill), applies the previous global stage's decisions, runs the
// per-document stages on a pool of workers, and either scans the survivors
// for the next global stage (spilling them) or hands them to the sink.
// Workers process batches in any order; one collector goroutine restores
// input order before anything is written, so every output file is the same
// whatever the number of workers.

// Tuning constants of the runner.
const (
	batchDocs         = 256     // documents per work unit: amortises channel costs
	batchBytes        = 4 << 20 // ...or this much text, whichever comes first
	inflightPerWorker = 4       // batches in flight per worker: bounds the reorder buffer
	maxManifestErrors = 1000    // errors listed in the manifest; the ledger keeps all
)

// Progress is a snapshot of a running pipeline, for progress lines.
type Progress struct {
	Segment, Segments int
	Docs              int64
	RawBytes          int64 // input bytes consumed (compressed), segment 0
	TotalRaw          int64 // total input bytes when known
	TextBytes         int64 // decompressed text bytes read
	Elapsed           time.Duration
}

// Runner executes a pipeline.
type Runner struct {
	Spec    *spec.Spec
	Steps   []spec.Step
	Inputs  []read.InputFile
	Sink    record.Sink
	Env     stages.Env
	Workers int
	// OnProgress, when set, is called about once a second.
	OnProgress func(Progress)
	// Log receives warnings (one line each).
	Log func(format string, args ...any)
	// Resume continues an interrupted run from its last checkpoint.
	Resume bool
	// stopAfter, when > 0, cancels the run after that many segments
	// (tests of resuming).
	stopAfter int
	// checkpointSeg is the segment after which the last checkpoint was
	// written (or restored from); -1 before any.
	checkpointSeg int
	// started is set once the run got past opening and restoring.
	started bool
	// afterCheckpoint, when set, is called after each checkpoint (tests of
	// interruption).
	afterCheckpoint func()

	ledger  *record.Ledger
	metrics *record.Metrics
	// chunkOf maps an input's Index to its chunk (unit of work); curChunk
	// is the chunk of the documents the collector last wrote, -1 at the
	// start of a segment. Frames of the ledger and metrics files end where
	// a chunk ends, so a run split into units writes the same bytes.
	chunkOf  []int
	curChunk int
	// unit, set when the runner runs one unit of a split run, receives
	// what a whole run hands to the next global stage, the id check and
	// the sink (see phases.go).
	unit *unitIO

	// Results, filled by Run.
	Read      record.Counters
	Counters  []*record.Counters
	Write     record.Counters
	InputSums []record.InputSummary
	Errors    []record.RunError
	ErrCount  int64
	Output    *record.OutputReport
	// Interrupted is set when the context was cancelled mid-run.
	Interrupted bool
	// FatalInputs counts inputs that could not be read to their end.
	FatalInputs int
	// InternalErrors counts documents a stage panicked on.
	InternalErrors int64
	// DuplicateIDs counts documents whose id an earlier document had;
	// DupCheckStopped, when > 0, is the number of ids after which the
	// check stopped (memory).
	DuplicateIDs    int64
	DupCheckStopped int64
	ids             *idSet
	dupExamples     []string

	prog struct {
		docs, raw, text atomic.Int64
		seg             atomic.Int64
	}
	// wanted lists, per step, the metrics a later stage reads at scan
	// time (stages.MetricUser): index into the step's metrics and name.
	wanted [][]wantedMetric
}

type wantedMetric struct {
	j    int
	name string
}

// wantMetrics fills r.wanted from the MetricUser stages. The spec checked
// that every name is measured by an earlier stage.
func (r *Runner) wantMetrics() {
	r.wanted = make([][]wantedMetric, len(r.Steps))
	for _, s := range r.Steps {
		mu, ok := stageOf(s).(stages.MetricUser)
		if !ok {
			continue
		}
		for _, name := range mu.UsesMetrics() {
			stage, metric, _ := strings.Cut(name, ".")
			for i, e := range r.Steps {
				if e.Name != stage || e.Stage == nil {
					continue
				}
				for j, m := range e.Stage.MetricNames() {
					if m == metric {
						r.wanted[i] = append(r.wanted[i], wantedMetric{j, name})
					}
				}
			}
		}
	}
}

type item struct {
	rec       docRecord
	input     int
	readBytes int // text bytes as read, before any stage edited them
}

// docRecord is a read.Record whose document is a stages.Doc.
type docRecord struct {
	Doc   *stages.Doc
	Issue *read.ReadIssue
}

type batch struct {
	seq   int64
	items []item
	outs  []docOutcome
}

type stepResult struct {
	step     int
	dec      stages.Decision
	shadow   bool
	skipped  bool // outside the step's `only:` scope: not measured
	bytesIn  int
	bytesOut int
	dropBy   string
	// ie is set when the stage panicked on the document; scan when that
	// happened in a global stage's Scan.
	ie   *internalError
	scan bool
}

type docOutcome struct {
	results []stepResult
	keys    any
	dropped bool
}

// segment is a run of steps ending at a global stage (scan) or the sink.
type segment struct {
	apply int   // index of the global step applied at the start, or -1
	steps []int // per-document steps
	scan  int   // index of the global step scanned at the end, or -1
}

func (r *Runner) segments() []segment {
	var segs []segment
	cur := segment{apply: -1, scan: -1}
	for i, s := range r.Steps {
		if s.Global != nil {
			cur.scan = i
			segs = append(segs, cur)
			cur = segment{apply: i, scan: -1}
			continue
		}
		cur.steps = append(cur.steps, i)
	}
	return append(segs, cur)
}

func (r *Runner) logf(format string, args ...any) {
	if r.Log != nil {
		r.Log(format, args...)
	}
}

// Run executes every segment, writes ledger and metrics under env.RunDir,
// and fills the result fields. On cancellation it stops reading, finishes
// the documents already decided, commits what was written and returns
// context.Canceled with Interrupted set.
func (r *Runner) Run(ctx context.Context) error {
	if r.Workers <= 0 {
		r.Workers = runtime.NumCPU()
	}
	r.ledger = record.NewLedger(filepath.Join(r.Env.RunDir, "ledger"))
	r.metrics = record.NewMetrics(filepath.Join(r.Env.RunDir, "metrics"))
	if err := r.ledger.Open("read"); err != nil {
		return err
	}
	r.wantMetrics()
	r.chunkOf = chunkIndex(r.Inputs, Chunks(r.Inputs, r.Spec.ChunkBytes))
	r.initCounters()
	for _, s := range r.Steps {
		if err := r.ledger.Open(s.Name); err != nil {
			return err
		}
	}
	start := time.Now()
	stopProg := r.startProgress(start)
	defer stopProg()

	var cp *checkpoint
	if r.Resume {
		var err error
		if cp, err = loadCheckpoint(r.Env.TempDir, r.Spec.ConfigHash); err != nil {
			r.ledger.Abort()
			return err
		}
		if err := inputsUnchanged(cp.Inputs, r.Inputs); err != nil {
			r.ledger.Abort()
			return err
		}
		if err := r.restore(cp, r.segments()); err != nil {
			r.ledger.Abort()
			r.metrics.Abort()
			return err
		}
	}
	r.started = true
	// Documents the output leaves out become ledger records: from Close
	// for a mix or shuffle, from Add (in the collector, which owns the
	// ledger) for an output in input order cut by budget_tokens.
	if r.Output == nil && r.Sink != nil {
		r.recordLeftOut()
	}
	err := r.runSegments(ctx, cp)
	if err == nil || errors.Is(err, context.Canceled) {
		if r.Output == nil && r.Sink != nil {
			if cerr := r.closeSink(); cerr != nil && err == nil {
				err = cerr
			}
		}
		if ferr := r.finishOutput(); ferr != nil && err == nil {
			err = ferr
		}
		if cerr := r.ledger.Commit(); cerr != nil && err == nil {
			err = cerr
		}
		if cerr := r.metrics.Commit(); cerr != nil && err == nil {
			err = cerr
		}
	} else {
		if r.Sink != nil {
			r.Sink.Abort()
		}
		if ok, _ := r.CanResume(); ok {
			// Keep the ledger and metrics up to the checkpoint for
			// --resume (a failure such as a full disk can be fixed).
			r.ledger.Detach()
			r.metrics.Detach()
		} else {
			r.ledger.Abort()
			r.metrics.Abort()
		}
	}
	for _, c := range r.Counters {
		c.Seconds = float64(c.Nanos()) / 1e9
	}
	for _, s := range r.Steps {
		if s.Global != nil {
			s.Global.Close()
		}
	}
	return err
}

// recordLeftOut makes the documents the sink leaves out ledger records of
// the write row: from Close for a mix or shuffle, from Add (on the
// collector, which owns the ledger) for an output in input order cut by
// budget_tokens.
func (r *Runner) recordLeftOut() {
	if lo, ok := r.Sink.(record.LeftOutRecorder); ok {
		lo.OnLeftOut(r.addLeftOut)
	}
}

// addLeftOut counts and records a document the output's mix left out.
func (r *Runner) addLeftOut(rec *record.LedgerRecord) error {
	if rec.Action == "drop" {
		r.Write.Dropped++
	} else {
		r.Write.Edited++ // some pieces written, others left out
	}
	return r.ledger.Add(rec)
}

// closeSink finishes the shards and keeps the sink's report.
func (r *Runner) closeSink() error {
	out, err := r.Sink.Close()
	r.Output = out
	if _, ok := r.Sink.(record.LeftOutRecorder); !ok && out != nil {
		r.Write.Dropped += out.BudgetLeftOut
	}
	return err
}

// finishOutput writes the sink's edit records (split documents) and lets
// every stage that writes a run-level file write it.
func (r *Runner) finishOutput() error {
	var first error
	if r.Output != nil {
		for i := range r.Output.Edits {
			if err := r.ledger.Add(&r.Output.Edits[i]); err != nil && first == nil {
				first = err
			}
		}
	}
	for _, s := range r.Steps {
		if f, ok := stageOf(s).(stages.Finisher); ok {
			if err := f.Finish(r.Env.RunDir); err != nil && first == nil {
				first = err
			}
		}
	}
	return first
}

// initCounters gives the read and write rows and every step a fresh
// counter.
func (r *Runner) initCounters() {
	r.Read = record.Counters{Name: "read", Kind: "read"}
	r.Counters = nil
	for _, s := range r.Steps {
		kind := ""
		if s.Stage != nil {
			kind = s.Stage.Kind()
		} else {
			kind = s.Global.Kind()
		}
		c := &record.Counters{Name: s.Name, Kind: kind, Global: s.Stage == nil}
		if fw, ok := s.Stage.(stages.FileWriter); ok {
			c.Files = fw.StageFiles()
		}
		r.Counters = append(r.Counters, c)
	}
	r.Write = record.Counters{Name: "write", Kind: "write"}
	r.checkpointSeg = -1
}

func stageOf(s spec.Step) any {
	if s.Stage != nil {
		return s.Stage
	}
	return s.Global
}

func (r *Runner) startProgress(start time.Time) func() {
	if r.OnProgress == nil {
		return func() {}
	}
	var total int64
	for _, in := range r.Inputs {
		if in.Size > 0 {
			total += in.Size
		}
	}
	segments := len(r.segments())
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(time.Second)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				r.OnProgress(Progress{Segment: int(r.prog.seg.Load()) + 1, Segments: segments,
					Docs: r.prog.docs.Load(), RawBytes: r.prog.raw.Load(), TotalRaw: total,
					TextBytes: r.prog.text.Load(), Elapsed: time.Since(start)})
			}
		}
	}()
	return func() { close(done); wg.Wait() }
}

func (r *Runner) runSegments(ctx context.Context, cp *checkpoint) error {
	segs := r.segments()
	var spillPath string
	first := 0
	if cp != nil {
		first, spillPath = cp.Segment+1, cp.Spill
	}
	for si := first; si < len(segs); si++ {
		seg := segs[si]
		r.prog.seg.Store(int64(si))
		r.prog.docs.Store(0)
		var next *docSpill
		if seg.scan >= 0 {
			p := filepath.Join(r.Env.TempDir, fmt.Sprintf("segment-%d.spill.zst", si))
			var err error
			if next, err = createDocSpill(p); err != nil {
				return err
			}
		}
		var produce func(ctx context.Context, out chan<- *batch) error
		if si == 0 {
			produce = r.produceInputs
		} else {
			sp := spillPath
			produce = func(ctx context.Context, out chan<- *batch) error { return r.produceSpill(ctx, sp, out) }
		}
		err := r.runSegment(ctx, seg, produce, next)
		if si == 0 {
			r.reportDuplicates()
			r.ids = nil // free the table: later segments read no new ids
		}
		if next != nil {
			if cerr := next.close(); cerr != nil && err == nil {
				err = cerr
			}
		}
		// The spill this segment read stays until the next checkpoint no
		// longer needs it (or the run ends).
		done := spillPath
		if err != nil {
			if next != nil {
				os.Remove(next.path)
				if !errors.Is(err, context.Canceled) {
					err = fmt.Errorf("%w (the unfinished spill of segment %d was removed)", err, si+1)
				}
			}
			return err
		}
		if seg.scan >= 0 {
			g := r.Steps[seg.scan].Global
			t0 := time.Now()
			if err := g.Reduce(); err != nil {
				return fmt.Errorf("stage %s: %w", r.Steps[seg.scan].Name, err)
			}
			r.Counters[seg.scan].AddNanos(int64(time.Since(t0)))
			spillPath = next.path
			// Every run checkpoints here, so frame boundaries (and so the
			// bytes of every file) are the same whether or not it resumes.
			if err := r.writeCheckpoint(si, spillPath); err != nil {
				return fmt.Errorf("checkpoint: %w", err)
			}
			r.checkpointSeg = si
			if r.afterCheckpoint != nil {
				r.afterCheckpoint()
			}
		}
		if done != "" {
			os.Remove(done)
		}
		if seg.scan >= 0 {
			if r.stopAfter > 0 && si+1 >= r.stopAfter {
				return context.Canceled
			}
		}
	}
	return nil
}

// runSegment wires producer → workers → ordered collector.
func (r *Runner) runSegment(ctx context.Context, seg segment, produce func(context.Context, chan<- *batch) error, spill *docSpill) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	jobs := make(chan *batch, r.Workers)
	results := make(chan *batch, r.Workers)
	window := make(chan struct{}, r.Workers*inflightPerWorker)
	gated := make(chan *batch)

	var prodErr error
	go func() {
		defer close(gated)
		src := make(chan *batch)
		go func() {
			defer close(src)
			prodErr = produce(ctx, src)
		}()
		for b := range src {
			window <- struct{}{}
			gated <- b
		}
	}()
	go func() {
		defer close(jobs)
		for b := range gated {
			jobs <- b
		}
	}()
	var wg sync.WaitGroup
	for w := 0; w < r.Workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for b := range jobs {
				r.work(seg, b)
				results <- b
			}
		}()
	}
	go func() { wg.Wait(); close(results) }()

	var collErr error
	r.curChunk = -1
	inOrder(results, func(b *batch) int64 { return b.seq }, func(b *batch) {
		if collErr == nil {
			if err := r.collect(seg, b, spill); err != nil {
				collErr = err
				cancel()
			}
		}
		<-window
	})
	if collErr != nil {
		return collErr
	}
	if prodErr != nil {
		return prodErr
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	return r.endFrames()
}

// itemChunk returns the chunk an item belongs to.
func (r *Runner) itemChunk(seg segment, it *item) int {
	in := it.input
	if seg.apply >= 0 && it.rec.Doc != nil {
		in = it.rec.Doc.Order.Input()
	}
	if in >= 0 && in < len(r.chunkOf) {
		return r.chunkOf[in]
	}
	return 0
}

// enterChunk ends the frames of the ledger and metrics files when the
// collector moves on to another chunk.
func (r *Runner) enterChunk(c int) error {
	if r.curChunk >= 0 && c != r.curChunk {
		if err := r.endFrames(); err != nil {
			return err
		}
	}
	r.curChunk = c
	return nil
}

func (r *Runner) endFrames() error {
	if err := r.ledger.EndFrames(); err != nil {
		return err
	}
	return r.metrics.EndFrames()
}

// inOrder calls fn with the items of in in sequence order (seq numbers
// 0, 1, 2, ...), holding back those that arrive early: workers finish
// batches in any order, output is written in input order.
func inOrder[T any](in <-chan T, seq func(T) int64, fn func(T)) {
	pending := map[int64]T{}
	var next int64
	for x := range in {
		pending[seq(x)] = x
		for {
			y, ok := pending[next]
			if !ok {
				break
			}
			delete(pending, next)
			next++
			fn(y)
		}
	}
}

// work runs the segment's stages over one batch (on a worker goroutine).
func (r *Runner) work(seg segment, b *batch) {
	b.outs = make([]docOutcome, len(b.items))
	for i := range b.items {
		d := b.items[i].rec.Doc
		if d == nil {
			continue
		}
		out := &b.outs[i]
		dropBy := ""
		if seg.apply >= 0 {
			t0 := nanotime()
			dec, ie := safeApply(r.Steps[seg.apply].Global, d)
			r.Counters[seg.apply].AddNanos(nanotime() - t0)
			res := stepResult{step: seg.apply, dec: dec, bytesIn: len(d.Text), ie: ie}
			if ie != nil {
				res.dec = internalDrop(ie)
			}
			if res.dec.Action == stages.Drop {
				out.results = append(out.results, res)
				out.dropped = true
				continue
			}
			applyEdit(d, &res.dec)
			res.bytesOut = len(d.Text)
			out.results = append(out.results, res)
		}
		for _, si := range seg.steps {
			st := r.Steps[si].Stage
			if !r.Steps[si].Only.Match(d) {
				out.results = append(out.results, stepResult{step: si, skipped: true, shadow: dropBy != "",
					bytesIn: len(d.Text), bytesOut: len(d.Text), dropBy: dropBy})
				continue
			}
			t0 := nanotime()
			dec, ie := safeProcess(st, d)
			r.Counters[si].AddNanos(nanotime() - t0)
			if ie == nil {
				for _, w := range r.wanted[si] {
					if w.j < len(dec.Metrics) {
						d.SetMeasured(w.name, dec.Metrics[w.j])
					}
				}
			}
			res := stepResult{step: si, dec: dec, shadow: dropBy != "", bytesIn: len(d.Text), dropBy: dropBy}
			if ie != nil {
				// The document goes no further, not even as a shadow.
				res.ie = ie
				if dropBy == "" {
					res.dec = internalDrop(ie)
					dropBy = r.Steps[si].Name
				} else {
					res.dec = stages.Decision{}
				}
				res.bytesOut = res.bytesIn
				out.results = append(out.results, res)
				break
			}
			if dropBy == "" && dec.Action == stages.Drop {
				dropBy = r.Steps[si].Name
			}
			if dec.Action == stages.Edit {
				// Shadow documents are edited too, so later stages
				// measure what they would have seen.
				d.Text = dec.Text
			}
			if !res.shadow && dec.Action != stages.Drop {
				mergeMeta(d, &dec)
			} else {
				// A removed document still carries what the stage found
				// (its language, say) to the stages that measure it in
				// the shadow, so they measure it as they would a kept one.
				for k, v := range dec.Meta {
					d.SetMeta(k, v)
				}
			}
			res.bytesOut = len(d.Text)
			res.dec.Text = "" // the text now lives in d; keep the batch small
			out.results = append(out.results, res)
		}
		out.dropped = dropBy != ""
		if !out.dropped && seg.scan >= 0 {
			t0 := nanotime()
			keys, ie := safeScan(r.Steps[seg.scan].Global, d)
			r.Counters[seg.scan].AddNanos(nanotime() - t0)
			if ie != nil {
				out.results = append(out.results, stepResult{step: seg.scan, dec: internalDrop(ie), bytesIn: len(d.Text), ie: ie, scan: true})
				out.dropped = true
				continue
			}
			out.keys = keys
		}
	}
}

func applyEdit(d *stages.Doc, dec *stages.Decision) {
	if dec.Action == stages.Edit {
		d.Text = dec.Text
		dec.Text = ""
	}
	mergeMeta(d, dec)
}

func mergeMeta(d *stages.Doc, dec *stages.Decision) {
	for k, v := range dec.Meta {
		d.SetMeta(k, v)
	}
	if dec.Tokens > 0 {
		d.Tokens = dec.Tokens
	}
}

var clockBase = time.Now()

func nanotime() int64 { return int64(time.Since(clockBase)) }

// collect writes one batch's decisions in input order (collector goroutine).
func (r *Runner) collect(seg segment, b *batch, spill *docSpill) error {
	for i := range b.items {
		it := &b.items[i]
		if err := r.enterChunk(r.itemChunk(seg, it)); err != nil {
			return err
		}
		if iss := it.rec.Issue; iss != nil {
			if err := r.recordIssue(iss); err != nil {
				return err
			}
		}
		d := it.rec.Doc
		if d == nil {
			continue
		}
		out := &b.outs[i]
		if seg.apply < 0 {
			r.Read.DocsOut++
			r.Read.BytesOut += int64(it.readBytes)
			if r.unit != nil {
				if err := r.unit.ids.add(d); err != nil {
					return err
				}
			} else {
				r.noteID(d)
			}
		}
		for _, res := range out.results {
			if err := r.recordResult(d, res); err != nil {
				return err
			}
		}
		if out.dropped {
			continue
		}
		if seg.scan >= 0 {
			c := r.Counters[seg.scan]
			c.DocsIn++
			c.BytesIn += int64(len(d.Text))
			if r.unit != nil {
				if err := r.unit.addKeys(d, out.keys); err != nil {
					return err
				}
			} else if err := r.Steps[seg.scan].Global.Collect(d.Order, d.ID, out.keys); err != nil {
				return fmt.Errorf("stage %s: %w", r.Steps[seg.scan].Name, err)
			}
			if err := spill.add(d); err != nil {
				return err
			}
			continue
		}
		r.Write.DocsIn++
		r.Write.BytesIn += int64(len(d.Text))
		r.Write.TokensOut += int64(d.Tokens)
		if r.unit != nil && r.unit.part != nil {
			r.unit.partDocs++
			if err := r.unit.part.Add(d); err != nil {
				return fmt.Errorf("write: %w", err)
			}
		} else if r.unit != nil {
			if err := r.unit.docs.add(d); err != nil {
				return err
			}
		} else if r.Sink != nil {
			if err := r.Sink.Add(d); err != nil {
				return fmt.Errorf("write: %w", err)
			}
		}
	}
	return nil
}

func (r *Runner) recordResult(d *stages.Doc, res stepResult) error {
	st := r.Steps[res.step]
	c := r.Counters[res.step]
	if res.skipped {
		if !res.shadow {
			c.DocsIn++
			c.DocsOut++
			c.BytesIn += int64(res.bytesIn)
			c.BytesOut += int64(res.bytesIn)
			c.Skipped++
		}
		return nil
	}
	dec := &res.dec
	var names []string
	if st.Stage != nil {
		names = st.Stage.MetricNames()
	} else if m, ok := st.Global.(interface{ MetricNames() []string }); ok {
		names = m.MetricNames() // a global stage that measures (domain with keep_fraction)
	}
	if len(names) > 0 && len(dec.Metrics) > 0 {
		row := record.MetricRow{Doc: d.ID, Source: d.Source, Order: d.Order, Bytes: res.bytesIn, Action: dec.Action,
			Rule: dec.Rule, DroppedBy: res.dropBy, Labels: dec.Labels, Names: names, Values: dec.Metrics}
		if err := r.metrics.Add(st.Name, &row); err != nil {
			return err
		}
	}
	if res.ie != nil {
		r.recordInternal(d, st.Name, res.ie, res.shadow)
	}
	if res.shadow {
		return nil
	}
	// A global stage's docs_in is counted at scan time; per-document
	// stages count here (and so does a scan that panicked).
	if st.Stage != nil || res.scan {
		c.DocsIn++
		c.BytesIn += int64(res.bytesIn)
	}
	switch dec.Action {
	case stages.Drop:
		c.Dropped++
	case stages.Edit:
		c.Edited++
		c.DocsOut++
		c.BytesOut += int64(res.bytesOut)
	default:
		c.DocsOut++
		c.BytesOut += int64(res.bytesIn)
	}
	if o, ok := stageOf(st).(stages.Observer); ok {
		// A report that fails on one document leaves that document out
		// of the report; the run goes on and counts the internal error.
		if ie := safeObserve(o, d, dec); ie != nil {
			r.recordInternal(d, st.Name+" (report)", ie, false)
		}
	}
	if dec.Action == stages.Keep && dec.Rule == "" {
		return nil // a flag (keep with a rule) is still recorded
	}
	action := dec.Action.String()
	if dec.Action == stages.Keep {
		action = "flag"
	}
	rec := record.LedgerRecord{Doc: d.ID, Source: d.Source, File: d.File, Line: d.Line, Stage: st.Name,
		Rule: dec.Rule, Action: action, Value: dec.Value, Limit: dec.Limit,
		Changes: dec.Changes, Extra: dec.Extra}
	switch dec.Action {
	case stages.Drop:
		rec.Bytes, rec.HasBytes = int64(res.bytesIn), true
	case stages.Edit:
		rec.Bytes, rec.HasBytes = int64(res.bytesIn-res.bytesOut), true
	}
	return r.ledger.Add(&rec)
}

func (r *Runner) recordIssue(iss *read.ReadIssue) error {
	action := "drop"
	switch {
	case iss.Skip:
		action = "skip" // not an error: counted per rule in the manifest
	case iss.Rule == read.RuleEmptyInput:
		r.Errors = append(r.Errors, record.RunError{File: iss.File, Rule: iss.Rule, Message: iss.Msg})
		return nil
	case iss.Fatal:
		// Fatal errors are always listed, whatever the cap.
		r.FatalInputs++
		r.ErrCount++
		r.Errors = append(r.Errors, record.RunError{File: iss.File, Offset: iss.Offset, Rule: iss.Rule, Message: iss.Msg, Fatal: true})
	case iss.Repair():
		action = "edit"
	default:
		r.Read.Dropped++
		r.ErrCount++
		if len(r.Errors) < maxManifestErrors {
			r.Errors = append(r.Errors, record.RunError{File: iss.File, Line: iss.Line, Offset: iss.Offset, Rule: iss.Rule, Message: iss.Msg})
		}
	}
	var extra map[string]any
	if iss.Msg != "" {
		extra = map[string]any{"message": iss.Msg}
	}
	if iss.Fatal && iss.Offset > 0 {
		if extra == nil {
			extra = map[string]any{}
		}
		extra["offset"] = iss.Offset
	}
	rec := record.LedgerRecord{Doc: iss.DocID, Source: iss.Source, File: iss.File, Line: iss.Line, Stage: "read", Rule: iss.Rule,
		Action: action, Value: iss.Bytes, Extra: extra}
	return r.ledger.Add(&rec)
}

// produceInputs reads every input file in order and emits batches.
func (r *Runner) produceInputs(ctx context.Context, out chan<- *batch) error {
	var seq int64
	cur := &batch{}
	curBytes := 0
	flush := func() bool {
		if len(cur.items) == 0 {
			return true
		}
		cur.seq = seq
		seq++
		select {
		case out <- cur:
		case <-ctx.Done():
			return false
		}
		cur = &batch{}
		curBytes = 0
		return true
	}
	for _, in := range r.Inputs {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		sum := record.InputSummary{Path: in.Display, Source: in.Options.Source}
		err := r.readInput(ctx, in, &sum, func(rec read.Record) bool {
			if rec.Issue != nil && rec.Issue.Skip {
				rec.Issue.Source = in.Options.Source
				if sum.Skips == nil {
					sum.Skips = map[string]int64{}
				}
				sum.Skips[rec.Issue.Rule]++
			} else if rec.Issue != nil {
				rec.Issue.Source = in.Options.Source
				r.Read.DocsIn++
				r.Read.BytesIn += rec.Issue.Bytes
				sum.Issues++
				if rec.Issue.Rule == read.RuleInvalidUTF8 {
					sum.InvalidUTF8++
				}
			}
			if rec.Doc != nil {
				if rec.Issue == nil {
					r.Read.DocsIn++
					r.Read.BytesIn += int64(len(rec.Doc.Text))
				}
				sum.Docs++
				r.prog.docs.Add(1)
				r.prog.text.Add(int64(len(rec.Doc.Text)))
				curBytes += len(rec.Doc.Text)
			}
			it := item{rec: docRecord{Issue: rec.Issue}, input: in.Index}
			if rec.Doc != nil {
				it.rec.Doc = stages.DocFromRead(rec.Doc)
			}
			if rec.Doc != nil {
				it.readBytes = len(rec.Doc.Text)
			}
			cur.items = append(cur.items, it)
			if len(cur.items) >= batchDocs || curBytes >= batchBytes {
				return flush()
			}
			return true
		})
		// Whole-file problems go through the collector like any other
		// issue, so the manifest and ledger are written by one goroutine.
		if err != nil && !errors.Is(err, context.Canceled) {
			iss := &read.ReadIssue{Source: in.Options.Source, File: in.Display, Rule: read.RuleBrokenInput, Msg: err.Error(),
				DocID: in.Options.Source + "/" + in.Display, Fatal: true}
			var de *read.DecodeError
			if errors.As(err, &de) {
				iss.Offset = de.Offset
			}
			cur.items = append(cur.items, item{rec: docRecord{Issue: iss}, input: in.Index})
			if sum.Docs == 0 {
				r.logf("%s: %v (no document of it was read)", in.Display, err)
			} else {
				r.logf("%s: %v (the %d documents before this point are kept)", in.Display, err, sum.Docs)
			}
		} else if err == nil {
			sum.Complete = true
			if sum.Docs == 0 && sum.Issues == 0 && len(sum.Skips) == 0 {
				r.logf("%s: empty input: no documents", in.Display)
				cur.items = append(cur.items, item{rec: docRecord{Issue: &read.ReadIssue{Source: in.Options.Source, File: in.Display,
					Rule: read.RuleEmptyInput, Msg: "empty input: no documents"}}, input: in.Index})
			}
		}
		if !flush() {
			return ctx.Err()
		}
		if errors.Is(err, context.Canceled) {
			r.InputSums = append(r.InputSums, sum)
			return err
		}
		r.InputSums = append(r.InputSums, sum)
	}
	return nil
}

// readInput opens, decodes and parses one input, calling emit per record.
// emit returns false to stop (cancellation).
func (r *Runner) readInput(ctx context.Context, in read.InputFile, sum *record.InputSummary, emit func(read.Record) bool) error {
	f, err := read.OpenFile(in.Path)
	if err != nil {
		return err
	}
	defer f.Close()
	var stamp read.InputStamp
	osf, _ := f.(*os.File)
	if osf != nil && in.Path != "-" {
		stamp = read.StampFile(osf)
	}
	opt := *in.Options
	var rr read.RecordReader
	var raw *read.RawCounter
	if opt.Format == read.FormatParquet || (opt.Format == read.FormatAuto && read.GuessFormat(in.Path, nil) == read.FormatParquet) {
		if osf == nil || in.Path == "-" {
			return fmt.Errorf("parquet cannot be read from standard input")
		}
		pr, err := read.NewParquetReader(osf, in.Display, in.Index, opt)
		if err != nil {
			return err
		}
		rr = pr
		sum.Format, sum.Codec = read.FormatParquet, read.CodecNone
		defer func() {
			n, h, _ := fsio.HashFile(in.Path)
			sum.Bytes, sum.XXH3 = n, h
		}()
	} else {
		dec, err := read.Decode(f)
		if err != nil {
			return err
		}
		defer dec.Close()
		defer func() {
			for _, w := range dec.Warnings() {
				sum.Warnings = append(sum.Warnings, w)
				r.logf("%s: %s", in.Display, w)
			}
		}()
		raw = dec.Raw
		sum.Codec = dec.Codec
		rr, sum.Format, err = read.NewRecordReader(dec, in.Display, in.Index, opt)
		if err != nil {
			sum.Bytes, sum.XXH3 = raw.Drain()
			return err
		}
	}
	var lastRaw int64
	for {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		rec, err := rr.Next()
		if raw != nil {
			n := raw.N()
			r.prog.raw.Add(n - lastRaw)
			lastRaw = n
		}
		if rec.Doc != nil || rec.Issue != nil {
			if !emit(rec) {
				return ctx.Err()
			}
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			if raw != nil {
				sum.Bytes, sum.XXH3 = raw.Drain()
			}
			if wr, ok := rr.(read.Skipper); ok {
				sum.Skipped = wr.SkippedRecords()
			}
			return err
		}
	}
	if wr, ok := rr.(read.Skipper); ok {
		sum.Skipped = wr.SkippedRecords()
	}
	nread := int64(-1)
	if raw != nil {
		sum.Bytes, sum.XXH3 = raw.Drain()
		nread = sum.Bytes
	}
	return stamp.Check(in.Path, osf, nread)
}

// produceSpill re-reads the previous segment's spill in order.
func (r *Runner) produceSpill(ctx context.Context, path string, out chan<- *batch) error {
	var seq int64
	cur := &batch{}
	curBytes := 0
	send := func() error {
		cur.seq = seq
		seq++
		select {
		case out <- cur:
		case <-ctx.Done():
			return ctx.Err()
		}
		cur, curBytes = &batch{}, 0
		return nil
	}
	err := forEachSpilled(path, func(d *stages.Doc) error {
		cur.items = append(cur.items, item{rec: docRecord{Doc: d}})
		curBytes += len(d.Text)
		r.prog.docs.Add(1)
		if len(cur.items) >= batchDocs || curBytes >= batchBytes {
			return send()
		}
		return nil
	})
	if err == nil && len(cur.items) > 0 {
		err = send()
	}
	return err
}
