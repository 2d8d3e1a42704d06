package run

import (
	"fmt"
	"runtime/debug"
	"strings"
	"winnow/stages"
	"winnow/stages/record"

	"github.com/zeebo/xxh3"
)

// RuleInternalError is the ledger rule of a document whose processing
// raised a panic in a stage: a bug in winnow, not in the document. The run
// records the document, lists the panic and the first frames of its stack
// in the manifest's errors, and goes on with the next document.
const RuleInternalError = "internal_error"

// stackFrames is how many frames of a panic's stack the manifest keeps.
const stackFrames = 8

// internalError is a panic recovered while one document was processed.
type internalError struct {
	value string
	stack []string
}

// recoverInternal is deferred by the guarded calls below; it turns a panic
// into *ie. It must be the deferred function itself for recover to work.
func recoverInternal(ie **internalError) {
	if v := recover(); v != nil {
		*ie = &internalError{value: fmt.Sprint(v), stack: panicStack(debug.Stack(), stackFrames)}
	}
}

// panicStack returns up to n frames ("function (file:line)") of a
// debug.Stack trace, starting at the frame that panicked.
func panicStack(trace []byte, n int) []string {
	lines := strings.Split(strings.TrimRight(string(trace), "\n"), "\n")
	start := 1 // after "goroutine N [running]:"
	for i, l := range lines {
		if strings.HasPrefix(l, "panic(") {
			start = i + 2 // skip the runtime's panic frame and its location
		}
	}
	var out []string
	for i := start; i+1 < len(lines) && len(out) < n; i += 2 {
		fn := strings.TrimSpace(lines[i])
		if j := strings.LastIndex(fn, "("); j > 0 && strings.HasSuffix(fn, ")") {
			fn = fn[:j] // the argument words say nothing to a reader
		}
		loc := strings.TrimSpace(lines[i+1])
		if j := strings.LastIndex(loc, " +0x"); j >= 0 {
			loc = loc[:j]
		}
		out = append(out, fn+" ("+loc+")")
	}
	return out
}

func safeProcess(st stages.Stage, d *stages.Doc) (dec stages.Decision, ie *internalError) {
	defer recoverInternal(&ie)
	return st.Process(d), nil
}

func safeApply(g stages.GlobalStage, d *stages.Doc) (dec stages.Decision, ie *internalError) {
	defer recoverInternal(&ie)
	return g.Apply(d), nil
}

func safeScan(g stages.GlobalStage, d *stages.Doc) (keys any, ie *internalError) {
	defer recoverInternal(&ie)
	return g.Scan(d), nil
}

func safeObserve(o stages.Observer, d *stages.Doc, dec *stages.Decision) (ie *internalError) {
	defer recoverInternal(&ie)
	o.Observe(d, dec)
	return nil
}

// internalDrop is the decision recorded for a document a stage panicked on.
func internalDrop(ie *internalError) stages.Decision {
	return stages.Decision{Action: stages.Drop, Rule: RuleInternalError, Extra: map[string]any{"message": "panic: " + ie.value}}
}

// recordInternal lists a recovered panic in the manifest's errors.
func (r *Runner) recordInternal(d *stages.Doc, stage string, ie *internalError, shadow bool) {
	r.InternalErrors++
	msg := fmt.Sprintf("stage %s panicked on document %q: %s", stage, d.ID, ie.value)
	if shadow {
		msg += " (while measuring a document an earlier stage removed)"
	}
	if r.InternalErrors <= 5 {
		r.logf("internal error: %s (recorded; the run goes on)", msg)
	}
	if r.InternalErrors <= maxManifestErrors {
		r.Errors = append(r.Errors, record.RunError{File: d.File, Line: d.Line, Rule: RuleInternalError, Stage: stage, Doc: d.ID,
			Message: msg, Stack: ie.stack})
	}
}

// idSet remembers 64-bit hashes of document ids to count ids seen twice.
// It is an open-addressing table of 8 bytes a slot at most half full, so
// it costs about 16 bytes a document; past maxBytes it stops (and says so)
// rather than grow without bound.
type idSet struct {
	slots    []uint64
	n        int
	maxBytes int64
	full     bool
}

// add records h and reports whether it was there already. Once the table
// would outgrow maxBytes, add reports false and full is set.
func (s *idSet) add(h uint64) bool {
	if s.full {
		return false
	}
	if h == 0 {
		h = 1 // 0 marks an empty slot
	}
	if 2*(s.n+1) > len(s.slots) {
		size := max(1024, 2*len(s.slots))
		if int64(size)*8 > s.maxBytes {
			s.full, s.slots = true, nil
			return false
		}
		old := s.slots
		s.slots = make([]uint64, size)
		for _, v := range old {
			if v != 0 {
				s.insert(v)
			}
		}
	}
	if !s.insert(h) {
		return true
	}
	s.n++
	return false
}

// insert puts h in the table; false when it was there.
func (s *idSet) insert(h uint64) bool {
	mask := uint64(len(s.slots) - 1)
	for i := h & mask; ; i = (i + 1) & mask {
		switch s.slots[i] {
		case 0:
			s.slots[i] = h
			return true
		case h:
			return false
		}
	}
}

// maxDupExamples is how many repeated ids the run names in its log.
const maxDupExamples = 5

// noteID counts a document whose id an earlier document already had
// (explain then shows every document with that id).
func (r *Runner) noteID(d *stages.Doc) {
	if r.ids == nil {
		budget := r.Env.MemoryBudget / 4
		if budget <= 0 {
			budget = 256 << 20
		}
		r.ids = &idSet{maxBytes: budget}
	}
	wasFull := r.ids.full
	if r.ids.add(xxh3.HashString(d.ID)) {
		r.DuplicateIDs++
		if r.DuplicateIDs <= maxDupExamples {
			r.dupExamples = append(r.dupExamples, fmt.Sprintf("%q (%s:%d)", d.ID, d.File, d.Line))
		}
	}
	if r.ids.full && !wasFull {
		r.logf("duplicate id check stopped after %d documents: its table reached a quarter of the memory budget (%d bytes)", r.ids.n, r.ids.maxBytes)
		r.DupCheckStopped = int64(r.ids.n)
	}
}

// reportDuplicates logs the count of repeated ids after the inputs are read.
func (r *Runner) reportDuplicates() {
	if r.DuplicateIDs == 0 {
		return
	}
	more := ""
	if r.DuplicateIDs > int64(len(r.dupExamples)) {
		more = ", ..."
	}
	r.logf("warning: %d document(s) have an id an earlier document already had, e.g. %s%s; `winnow explain` lists every document with an id (set id_field to a unique field to tell them apart)",
		r.DuplicateIDs, strings.Join(r.dupExamples, ", "), more)
}
