package run

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"time"

	"winnow/shard"
	"winnow/stages/record"
)

// shardRanges is the number of units of phase shards: ranges of whole
// shards of a planned output (one with a tokenizer), cut where the shards
// of one plan end nearest to equal shares. A range without a shard of
// its own is an empty unit.
const shardRanges = 64

// Files of a unit of phase shards, and of a last document phase's unit
// of a planned output.
const (
	rangeShards  = "shards"     // the range's shards, numbered from 0
	rangeResult  = "range.json" // shard.RangeResult
	rangeWhole   = "whole.json" // shard.Whole (unit 0)
	rangeLeftOut = "leftout.s2" // left-out documents in input order (unit 0)
	partDir      = "part"       // a part of the output (shard.Builder.SavePart)
)

// lastDocsPhase names the last document phase: its units hold the parts
// of a planned output.
func lastDocsPhase(phases []Phase) string {
	name := ""
	for _, p := range phases {
		if p.Seg >= 0 && p.Reduce < 0 {
			name = p.Name
		}
	}
	return name
}

// outputParts lists the parts of a planned output, in input order.
func (sr *splitRun) outputParts(last string) []string {
	parts := make([]string, len(sr.chunks))
	for u := range sr.chunks {
		parts[u] = filepath.Join(unitDir(sr.dir, last, u), partDir)
	}
	return parts
}

// shardsPhase writes this task's ranges of a planned output in one pass
// over every part: the plan (mix or shuffle, shard cuts) is made from the
// parts' tables by every task alike. The task with range 0 also records
// the documents the plan leaves out and the whole-output report.
func (sr *splitRun) shardsPhase(ctx context.Context, phases []Phase, mine []int, res *PhaseResult) error {
	last := lastDocsPhase(phases)
	if err := sr.requireDone(last, len(sr.chunks)); err != nil {
		return err
	}
	opt, err := record.OutputOptions(sr.spec.Output, sr.env, sr.spec.Name)
	if err != nil {
		return err
	}
	opt.TempDir = sr.tmp
	t0 := time.Now()
	for _, u := range mine {
		if err := fault(PhaseShards, u, "start"); err != nil {
			return err
		}
	}
	tmps := map[int]string{}
	defer func() {
		for _, d := range tmps {
			os.RemoveAll(d)
		}
	}()
	for _, u := range mine {
		d, err := os.MkdirTemp(filepath.Join(sr.dir, unitsDir), fmt.Sprintf("unit-%s-%05d-", PhaseShards, u))
		if err != nil {
			return err
		}
		tmps[u] = d
	}
	var left *keyWriter
	var leftOut func(shard.LeftOut) error
	if slices.Contains(mine, 0) {
		if left, err = createKeyWriter(filepath.Join(tmps[0], rangeLeftOut)); err != nil {
			return err
		}
		leftOut = func(l shard.LeftOut) error { return left.put(appendLeftOut(left.buf[:0], &l)) }
	}
	commit := func(u int, files ...any) error {
		for i := 0; i+1 < len(files); i += 2 {
			b, err := json.Marshal(files[i+1])
			if err != nil {
				return err
			}
			if err := os.WriteFile(filepath.Join(tmps[u], files[i].(string)), b, 0o644); err != nil {
				return err
			}
		}
		if err := fault(PhaseShards, u, "written"); err != nil {
			return err
		}
		if err := sr.commitUnit(tmps[u], PhaseShards, u, &unitState{}, nil, t0); err != nil {
			return err
		}
		delete(tmps, u)
		res.Units = append(res.Units, u)
		return fault(PhaseShards, u, "renamed")
	}
	var first *shard.RangeResult
	whole, err := shard.WriteRanges(opt, sr.outputParts(last), shardRanges, mine,
		func(u int) string { return filepath.Join(tmps[u], rangeShards) },
		func(u int, r *shard.RangeResult) error {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			if u == 0 {
				first = r // committed with the whole-output report below
				return nil
			}
			return commit(u, rangeResult, r)
		}, leftOut)
	if left != nil {
		if cerr := left.close(); err == nil {
			err = cerr
		}
	}
	if err == nil && left != nil {
		if first == nil || whole == nil {
			err = errors.New("range 0 was not written")
		} else {
			err = commit(0, rangeResult, first, rangeWhole, whole)
		}
	}
	if err != nil {
		if !errors.Is(err, context.Canceled) {
			for _, u := range mine {
				if _, open := tmps[u]; open {
					sr.writeFailed(PhaseShards, u, err, time.Since(t0))
				}
			}
		}
		return fmt.Errorf("phase %s, units %v: %w", PhaseShards, mine, err)
	}
	sr.logf("phase %s, task %d of %d: wrote ranges %v in %.1f s", PhaseShards, sr.opt.Task, sr.opt.Tasks, mine, time.Since(t0).Seconds())
	return nil
}

// assembleShards puts a planned output's ranges together into OUT/shards
// (write phase), records the left-out documents in input order, and
// returns the output report one sink would have given.
func (sr *splitRun) assembleShards(r *Runner) error {
	opt, err := record.OutputOptions(sr.spec.Output, sr.env, sr.spec.Name)
	if err != nil {
		return err
	}
	if err := sr.requireDone(PhaseShards, shardRanges); err != nil {
		return err
	}
	dirs := make([]string, shardRanges)
	results := make([]*shard.RangeResult, shardRanges)
	for u := range results {
		ud := unitDir(sr.dir, PhaseShards, u)
		dirs[u] = filepath.Join(ud, rangeShards)
		results[u] = &shard.RangeResult{}
		if err := readJSON(filepath.Join(ud, rangeResult), results[u]); err != nil {
			return err
		}
	}
	var whole shard.Whole
	ud0 := unitDir(sr.dir, PhaseShards, 0)
	if err := readJSON(filepath.Join(ud0, rangeWhole), &whole); err != nil {
		return err
	}
	// Left-out documents first: a mix or a shuffle reports them while it
	// closes; an output in input order as it takes them, so its ledger
	// records end a frame where each input chunk (part) ends, as a
	// single process's collector ends them.
	inOrder := opt.Mix == nil && !opt.Shuffle
	part := 0
	err = forEachRecord(filepath.Join(ud0, rangeLeftOut), func(b []byte) error {
		l, err := parseLeftOut(b)
		if err != nil {
			return fmt.Errorf("%s: %w", rangeLeftOut, err)
		}
		for ; inOrder && part < l.Part; part++ {
			if err := r.endFrames(); err != nil {
				return err
			}
		}
		return r.addLeftOut(record.LeftOutRecord(l))
	})
	if err == nil && inOrder {
		err = r.endFrames()
	}
	if err != nil {
		return err
	}
	rep, err := shard.AssembleRanges(opt, &whole, dirs, results)
	if err != nil {
		return err
	}
	r.Output = record.ReportOf(rep)
	return nil
}

// readJSON decodes the JSON file at path into v.
func readJSON(path string, v any) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	if err := json.Unmarshal(b, v); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// appendLeftOut encodes a left-out document (a record of leftout.s2).
func appendLeftOut(b []byte, l *shard.LeftOut) []byte {
	b = appendField(b, l.Doc)
	b = appendField(b, l.Source)
	b = appendField(b, l.File)
	b = binary.AppendVarint(b, l.Line)
	b = binary.AppendUvarint(b, uint64(l.Tokens))
	b = binary.AppendUvarint(b, uint64(l.Bytes))
	b = appendField(b, l.Reason)
	b = binary.AppendUvarint(b, uint64(l.Part))
	b = binary.AppendUvarint(b, uint64(len(l.Pieces)))
	for _, p := range l.Pieces {
		b = appendField(b, p)
	}
	return b
}

// parseLeftOut decodes a record of appendLeftOut; bytes that are not
// exactly such an encoding (e.g. an overlong varint) are refused.
func parseLeftOut(b []byte) (shard.LeftOut, error) {
	l, err := parseLeftOutLoose(b)
	if err == nil && !bytes.Equal(appendLeftOut(nil, &l), b) {
		err = errSpill
	}
	return l, err
}

func parseLeftOutLoose(b []byte) (shard.LeftOut, error) {
	var l shard.LeftOut
	ok := true
	field := func() string {
		var s string
		if ok {
			s, b, ok = takeField(b)
		}
		return s
	}
	num := func() uint64 {
		var u uint64
		if ok {
			u, b, ok = takeUvarint(b)
		}
		return u
	}
	l.Doc, l.Source, l.File = field(), field(), field()
	if ok {
		var k int
		l.Line, k = binary.Varint(b)
		if ok = k > 0; ok {
			b = b[k:]
		}
	}
	l.Tokens, l.Bytes = int(num()), int(num())
	l.Reason = field()
	l.Part = int(num())
	n := num()
	if ok && n > uint64(len(b)) {
		ok = false
	}
	for i := uint64(0); ok && i < n; i++ {
		l.Pieces = append(l.Pieces, field())
	}
	if !ok || len(b) != 0 {
		return l, errSpill
	}
	return l, nil
}
