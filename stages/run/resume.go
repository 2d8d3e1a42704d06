package run

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"winnow/stages"
	"winnow/stages/fsio"
	"winnow/stages/read"
	"winnow/stages/record"
)

// Resuming a run. After every segment but the last (that is, once a
// global stage has seen all its documents) the runner ends a zstd frame in
// every ledger and metrics file and writes OUT/.work/checkpoint.json: where
// each file stood, the counters so far, and the spill holding the
// segment's surviving documents. `winnow run --resume` after an
// interruption or a crash reopens the files at those sizes, rebuilds the
// global stage's keys by scanning the spill again (Scan is pure and far
// cheaper than the per-document stages that produced the spill), and goes
// on with the next segment. Because frames end at the same places in every
// run, a resumed run directory is byte-identical to an uninterrupted one.
//
// What is not resumed: work inside a segment (an interrupted segment starts
// over), a pipeline without global stages (it has one segment), and a
// checkpoint after a stage that aggregates a run-wide report (an Observer
// or Finisher) in a finished segment, whose state is not saved: such a run
// is refused with a message and must be re-run.

type checkpoint struct {
	ConfigHash  string                `json:"config_hash"`
	Segment     int                   `json:"segment"`
	Spill       string                `json:"spill"`
	Ledger      []record.StreamState  `json:"ledger"`
	LedgerCount map[string]int64      `json:"ledger_count"`
	Metrics     []record.StreamState  `json:"metrics"`
	Read        *record.Counters      `json:"read"`
	Counters    []*record.Counters    `json:"counters"`
	Inputs      []record.InputSummary `json:"inputs"`
	Errors      []record.RunError     `json:"errors"`
	ErrCount    int64                 `json:"error_count"`
	FatalInputs int                   `json:"fatal_inputs"`
	Internal    int64                 `json:"internal_errors"`
	DupIDs      int64                 `json:"duplicate_ids"`
	DupStopped  int64                 `json:"duplicate_check_stopped"`
}

// writeCheckpoint records the state after segment si, whose survivors are
// in spill.
func (r *Runner) writeCheckpoint(si int, spill string) error {
	led, err := r.ledger.Checkpoint()
	if err != nil {
		return err
	}
	met, err := r.metrics.Checkpoint()
	if err != nil {
		return err
	}
	cp := checkpoint{ConfigHash: r.Spec.ConfigHash, Segment: si, Spill: spill, Ledger: led, LedgerCount: r.ledger.Counts(),
		Metrics: met, Read: r.Read.Snapshot(), Inputs: r.InputSums, Errors: r.Errors, ErrCount: r.ErrCount, FatalInputs: r.FatalInputs,
		Internal: r.InternalErrors, DupIDs: r.DuplicateIDs, DupStopped: r.DupCheckStopped}
	for _, c := range r.Counters {
		s := c.Snapshot()
		s.Seconds = float64(c.Nanos()) / 1e9
		cp.Counters = append(cp.Counters, s)
	}
	b, err := json.Marshal(cp)
	if err != nil {
		return err
	}
	return fsio.WriteFileAtomic(filepath.Join(r.Env.TempDir, record.CheckpointFile), b)
}

// loadCheckpoint reads the checkpoint of an interrupted run in tempDir.
func loadCheckpoint(tempDir, configHash string) (*checkpoint, error) {
	b, err := os.ReadFile(filepath.Join(tempDir, record.CheckpointFile))
	if errors.Is(err, os.ErrNotExist) {
		return nil, record.ErrNoCheckpoint
	}
	if err != nil {
		return nil, err
	}
	var cp checkpoint
	if err := json.Unmarshal(b, &cp); err != nil {
		return nil, fmt.Errorf("checkpoint: %w", err)
	}
	if cp.ConfigHash != configHash {
		return nil, fmt.Errorf("checkpoint belongs to config %s, the spec is %s: run again without --resume", cp.ConfigHash, configHash)
	}
	if _, err := os.Stat(cp.Spill); err != nil {
		return nil, fmt.Errorf("checkpoint spill: %w", err)
	}
	return &cp, nil
}

// restore puts the runner in the state the checkpoint recorded and
// rebuilds the global stage scanned at the end of the checkpointed segment.
func (r *Runner) restore(cp *checkpoint, segs []segment) error {
	if cp.Segment >= len(segs)-1 || len(cp.Counters) != len(r.Counters) {
		return fmt.Errorf("checkpoint does not match the pipeline (segment %d of %d)", cp.Segment, len(segs))
	}
	if err := r.resumeBlocker(segs, cp.Segment); err != nil {
		return err
	}
	r.ledger = record.NewLedger(r.ledger.Dir())
	if err := r.ledger.Resume(cp.Ledger); err != nil {
		return err
	}
	for k, v := range cp.LedgerCount {
		r.ledger.SetCount(k, v)
	}
	r.metrics = record.NewMetrics(r.metrics.Dir())
	if err := r.metrics.Resume(cp.Metrics); err != nil {
		return err
	}
	for _, c := range r.Counters {
		if err := r.ledger.Open(c.Name); err != nil {
			return err
		}
	}
	r.Read.SetFrom(cp.Read)
	for i, c := range cp.Counters {
		r.Counters[i].SetFrom(c)
	}
	r.InputSums, r.Errors, r.ErrCount, r.FatalInputs = cp.Inputs, cp.Errors, cp.ErrCount, cp.FatalInputs
	r.InternalErrors, r.DuplicateIDs, r.DupCheckStopped = cp.Internal, cp.DupIDs, cp.DupStopped
	// Rebuild the global stage's keys from the spill, in input order.
	g := r.Steps[segs[cp.Segment].scan].Global
	if err := forEachSpilled(cp.Spill, func(d *stages.Doc) error { return g.Collect(d.Order, d.ID, g.Scan(d)) }); err != nil {
		return err
	}
	if err := g.Reduce(); err != nil {
		return fmt.Errorf("stage %s: %w", r.Steps[segs[cp.Segment].scan].Name, err)
	}
	r.checkpointSeg = cp.Segment
	// The streams' prefixes now live in new temp files: point the
	// checkpoint at them, so a failure of this run can be resumed too.
	cp.Ledger, cp.Metrics = r.ledger.Retarget(cp.Ledger), r.metrics.Retarget(cp.Metrics)
	if b, err := json.Marshal(cp); err == nil {
		if err := fsio.WriteFileAtomic(filepath.Join(r.Env.TempDir, record.CheckpointFile), b); err != nil {
			return fmt.Errorf("checkpoint: %w", err)
		}
	}
	r.logf("resumed after segment %d of %d (stage %s): its documents are not read or filtered again", cp.Segment+1, len(segs), r.Steps[segs[cp.Segment].scan].Name)
	return nil
}

// inputsUnchanged compares the inputs of a resumed run with those the
// checkpoint recorded (size, then xxh3 of the bytes): the documents before
// the checkpoint are not read again, so a changed input would mix old and
// new content. Standard input cannot be compared and is not read again.
func inputsUnchanged(recorded []record.InputSummary, now []read.InputFile) error {
	was := map[string]record.InputSummary{}
	for _, in := range recorded {
		was[in.Path] = in
	}
	var changed []string
	seen := map[string]bool{}
	for _, in := range now {
		if in.Path == "-" {
			continue
		}
		seen[in.Display] = true
		old, ok := was[in.Display]
		if !ok {
			changed = append(changed, in.Display+" (new since the checkpoint)")
			continue
		}
		n, h, err := fsio.HashFile(in.Path)
		switch {
		case err != nil:
			changed = append(changed, fmt.Sprintf("%s (%v)", in.Display, err))
		case n != old.Bytes:
			changed = append(changed, fmt.Sprintf("%s (%d bytes, was %d)", in.Display, n, old.Bytes))
		case old.XXH3 != "" && h != old.XXH3:
			changed = append(changed, fmt.Sprintf("%s (same size, other content: xxh3 %s, was %s)", in.Display, h, old.XXH3))
		}
	}
	for _, in := range recorded {
		if in.Path != "-" && !seen[in.Path] {
			changed = append(changed, in.Path+" (gone)")
		}
	}
	if len(changed) > 0 {
		return fmt.Errorf("cannot resume: the inputs changed since the checkpoint, whose documents would not be read again: %s; run again without --resume",
			strings.Join(changed, ", "))
	}
	return nil
}

// resumeBlocker returns why a checkpoint after segment seg cannot be
// resumed: a stage before it keeps a run-wide report that is not saved.
func (r *Runner) resumeBlocker(segs []segment, seg int) error {
	for si := 0; si <= seg && si < len(segs); si++ {
		steps := segs[si].steps
		if segs[si].apply >= 0 {
			steps = append([]int{segs[si].apply}, steps...)
		}
		for _, i := range steps {
			obj := stageOf(r.Steps[i])
			_, obs := obj.(stages.Observer)
			_, fin := obj.(stages.Finisher)
			if obs || fin {
				return fmt.Errorf("cannot resume: stage %s, before the checkpoint, keeps a run-wide report that is not saved; run again without --resume", r.Steps[i].Name)
			}
		}
	}
	return nil
}

// CanResume says whether `--resume` could continue this (interrupted or
// failed) run: from which checkpoint ("the checkpoint after segment 1 of
// 3 (stage exact_dedup)"), or why not. It states only
// what the run directory holds.
func (r *Runner) CanResume() (bool, string) {
	segs := r.segments()
	if r.checkpointSeg < 0 {
		if len(segs) == 1 {
			return false, "this pipeline has no global stage, so it never checkpoints: run it again from the start"
		}
		return false, "it stopped before its first checkpoint (a run checkpoints once a global stage has seen every document): run it again from the start"
	}
	if err := r.resumeBlocker(segs, r.checkpointSeg); err != nil {
		return false, err.Error()
	}
	if _, err := os.Stat(filepath.Join(r.Env.TempDir, record.CheckpointFile)); err != nil {
		return false, "its checkpoint file is gone: run it again from the start"
	}
	return true, fmt.Sprintf("the checkpoint after segment %d of %d (stage %s)", r.checkpointSeg+1, len(segs),
		r.Steps[segs[r.checkpointSeg].scan].Name)
}
