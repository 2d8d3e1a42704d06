package run

import (
	"context"
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"time"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
)

// write is the write phase: it puts the run directory together.
func (sr *splitRun) write(ctx context.Context) (*record.Manifest, error) {
	t0 := time.Now()
	// One attempt of the write phase at a time; one that waited finds
	// the run finished.
	release, err := record.WaitLock(filepath.Join(sr.dir, unitsDir, "write.lock"))
	if err != nil {
		return nil, err
	}
	defer release()
	if !IsSplitRunDir(sr.dir) {
		sr.logf("another attempt of phase %s finished the run", PhaseWrite)
		return record.ReadManifest(sr.dir)
	}
	if err := fault(PhaseWrite, 0, "start"); err != nil {
		return nil, err
	}
	var docPhases []Phase
	for _, p := range sr.phases {
		if p.Seg >= 0 && p.Reduce < 0 {
			docPhases = append(docPhases, p)
		}
	}
	markers := make([][]*unitMarker, len(docPhases))
	for pi, ph := range docPhases {
		if err := sr.requireDone(ph.Name, len(sr.chunks)); err != nil {
			return nil, err
		}
		for u := range sr.chunks {
			m, err := readMarker(sr.dir, ph.Name, u)
			if err != nil {
				return nil, err
			}
			markers[pi] = append(markers[pi], m)
		}
	}
	r := sr.newRunner(sr.inputs)
	// Counters, inputs and errors, summed in input order.
	for pi := range docPhases {
		for _, m := range markers[pi] {
			st := m.State
			if pi == 0 && st.Read != nil {
				addCounters(&r.Read, st.Read)
			}
			for i, c := range st.Counters {
				if i < len(r.Counters) {
					addCounters(r.Counters[i], c)
				}
			}
			addCounters(&r.Write, st.Write)
			r.InputSums = append(r.InputSums, st.InputSums...)
			// The caps of a single process, replayed: read errors while
			// the list is short, internal errors by their number.
			internal := r.InternalErrors
			for _, e := range st.Errors {
				switch {
				case e.Rule == RuleInternalError && e.Stage != "":
					internal++
					if internal <= maxManifestErrors {
						r.Errors = append(r.Errors, e)
					}
				case e.Fatal || e.Rule == read.RuleEmptyInput || len(r.Errors) < maxManifestErrors:
					r.Errors = append(r.Errors, e)
				}
			}
			r.ErrCount += st.ErrCount
			r.FatalInputs += st.FatalInputs
			r.InternalErrors += st.Internal
		}
	}
	// The id check, in input order.
	for u := range sr.chunks {
		err := forEachRecord(filepath.Join(unitDir(sr.dir, PhaseRead, u), "ids.zst"), func(b []byte) error {
			line, k := binary.Varint(b)
			if k <= 0 {
				return errSpill
			}
			id, rest, ok := takeField(b[k:])
			if !ok {
				return errSpill
			}
			file, _, ok := takeField(rest)
			if !ok {
				return errSpill
			}
			r.noteID(&stages.Doc{ID: id, File: file, Line: line})
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	r.reportDuplicates()
	r.ids = nil
	// Reports built in parts.
	for _, st := range sr.steps {
		rs, ok := stageOf(st).(stages.ReportSplitter)
		if !ok {
			continue
		}
		for pi := range docPhases {
			for u, m := range markers[pi] {
				if !slices.Contains(m.State.Reports, st.Name) {
					continue
				}
				part, err := os.ReadFile(filepath.Join(unitDir(sr.dir, docPhases[pi].Name, u), "report-"+st.Name+".bin"))
				if err != nil {
					return nil, err
				}
				if err := rs.MergeReport(part); err != nil {
					return nil, fmt.Errorf("stage %s: report of unit %d: %w", st.Name, u, err)
				}
			}
		}
	}
	// The sink, fed in input order; its own ledger records go to a part
	// written after every unit's.
	wtmp, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), "write-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(wtmp)
	// What an earlier attempt of this phase may have left.
	for _, sub := range []string{"shards", "ledger", "metrics"} {
		if err := os.RemoveAll(filepath.Join(sr.dir, sub)); err != nil {
			return nil, err
		}
	}
	r.ledger = record.NewLedger(filepath.Join(wtmp, "ledger"))
	r.metrics = record.NewMetrics(filepath.Join(wtmp, "metrics"))
	if sr.planned {
		// Phase shards wrote the shards in ranges.
		if err := sr.assembleShards(r); err != nil {
			r.ledger.Abort()
			r.metrics.Abort()
			return nil, err
		}
	} else if err := sr.writeSink(ctx, r, docPhases[len(docPhases)-1].Name); err != nil {
		r.ledger.Abort()
		r.metrics.Abort()
		return nil, err
	}
	if err := r.finishOutput(); err != nil {
		return nil, err
	}
	if err := fault(PhaseWrite, 0, "written"); err != nil {
		return nil, err
	}
	wLedger, err := r.ledger.CommitParts()
	if err != nil {
		return nil, err
	}
	wMetrics, err := r.metrics.CommitParts()
	if err != nil {
		return nil, err
	}
	// Every ledger and metrics file: the units' parts in phase and input
	// order, then the write phase's.
	for _, kind := range []string{"ledger", "metrics"} {
		names := map[string]bool{}
		var order []string
		add := func(n string) {
			if !names[n] {
				names[n] = true
				order = append(order, n)
			}
		}
		if kind == "ledger" {
			add("read") // a single process opens these even without a record
			for _, s := range sr.steps {
				add(s.Name)
			}
		}
		for pi := range docPhases {
			for _, m := range markers[pi] {
				list := m.State.Ledger
				if kind == "metrics" {
					list = m.State.Metrics
				}
				for _, n := range list {
					add(n)
				}
			}
		}
		wl := wLedger
		if kind == "metrics" {
			wl = wMetrics
		}
		for _, n := range wl {
			add(n)
		}
		if err := os.MkdirAll(filepath.Join(sr.dir, kind), 0o755); err != nil {
			return nil, err
		}
		sort.Strings(order)
		for _, n := range order {
			var parts []string
			for pi := range docPhases {
				for u := range markers[pi] {
					parts = append(parts, filepath.Join(unitDir(sr.dir, docPhases[pi].Name, u), kind, n+".jsonl.zst"))
				}
			}
			parts = append(parts, filepath.Join(wtmp, kind, n+".jsonl.zst"))
			if err := record.AssembleStream(filepath.Join(sr.dir, kind, n+".jsonl.zst"), parts); err != nil {
				return nil, err
			}
		}
	}
	for _, c := range r.Counters {
		c.Seconds = float64(c.Nanos()) / 1e9
	}
	m := buildManifest(sr.opt.Version, sr.spec, r, time.Since(t0).Seconds())
	if err := record.WriteManifest(sr.dir, m); err != nil {
		return nil, err
	}
	if err := record.MarkRunDir(sr.dir, sr.spec.ConfigHash); err != nil {
		return nil, err
	}
	// Temp files of tasks killed while writing (a global stage's key
	// files are written by the phases before this one), as a single
	// process cleans up after a crashed earlier attempt.
	removeStaleTemps(sr.dir)
	// The units go in one rename, so a task killed here leaves either a
	// finished run or one whose write phase can run again.
	gone := filepath.Join(sr.dir, fmt.Sprintf(".units-done-%d", os.Getpid()))
	if err := os.Rename(filepath.Join(sr.dir, unitsDir), gone); err != nil {
		return nil, err
	}
	os.RemoveAll(gone)
	os.RemoveAll(filepath.Join(sr.dir, ".work"))
	return m, nil
}

// writeSink feeds the documents of the last document phase to the
// output sink in input order and closes it.
func (sr *splitRun) writeSink(ctx context.Context, r *Runner, last string) error {
	sink, err := record.OpenSink(sr.spec.Output, sr.env, sr.spec.Name)
	if err != nil {
		return err
	}
	r.Sink = sink
	r.recordLeftOut()
	for u := range sr.chunks {
		if ctx.Err() != nil {
			sink.Abort()
			return ctx.Err()
		}
		err := forEachSpilled(filepath.Join(unitDir(sr.dir, last, u), "docs.zst"), func(d *stages.Doc) error {
			if err := sink.Add(d); err != nil {
				return fmt.Errorf("write: %w", err)
			}
			return nil
		})
		if err == nil {
			err = r.endFrames()
		}
		if err != nil {
			sink.Abort()
			return err
		}
	}
	return r.closeSink()
}

// addCounters adds the counts of b to a.
func addCounters(a, b *record.Counters) {
	if b == nil {
		return
	}
	a.DocsIn += b.DocsIn
	a.DocsOut += b.DocsOut
	a.BytesIn += b.BytesIn
	a.BytesOut += b.BytesOut
	a.TokensOut += b.TokensOut
	a.RecordsOut += b.RecordsOut
	a.Dropped += b.Dropped
	a.Edited += b.Edited
	a.Skipped += b.Skipped
	a.AddNanos(int64(b.Seconds * 1e9))
}
