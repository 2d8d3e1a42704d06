package stages

import (
	"fmt"
	"runtime/debug"
	"strings"
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

func safeProcess(st Stage, d *Doc) (dec Decision, ie *internalError) {
	defer recoverInternal(&ie)
	return st.Process(d), nil
}

func safeApply(g GlobalStage, d *Doc) (dec Decision, ie *internalError) {
	defer recoverInternal(&ie)
	return g.Apply(d), nil
}

func safeScan(g GlobalStage, d *Doc) (keys any, ie *internalError) {
	defer recoverInternal(&ie)
	return g.Scan(d), nil
}

// internalDrop is the decision recorded for a document a stage panicked on.
func internalDrop(ie *internalError) Decision {
	return Decision{Action: Drop, Rule: RuleInternalError, Extra: map[string]any{"message": "panic: " + ie.value}}
}

// recordInternal lists a recovered panic in the manifest's errors.
func (r *Runner) recordInternal(d *Doc, stage string, ie *internalError, shadow bool) {
	r.InternalErrors++
	msg := fmt.Sprintf("stage %s panicked on document %q: %s", stage, d.ID, ie.value)
	if shadow {
		msg += " (while measuring a document an earlier stage removed)"
	}
	if r.InternalErrors <= 5 {
		r.logf("internal error: %s (recorded; the run goes on)", msg)
	}
	if r.InternalErrors <= maxManifestErrors {
		r.Errors = append(r.Errors, RunError{File: d.File, Line: d.Line, Rule: RuleInternalError, Stage: stage, Doc: d.ID,
			Message: msg, Stack: ie.stack})
	}
}
