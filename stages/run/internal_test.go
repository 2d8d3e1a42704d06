package run

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"winnow/stages"
	"winnow/stages/record"
)

// Test-only stage kinds that panic on a chosen document: a per-document
// stage (Process) and a global one (Scan or Apply).
func init() {
	stages.Register(stages.Kind{Name: "test_panic", Doc: "panics on one document (tests)",
		New: func(p *stages.Params, env stages.Env) (stages.Stage, error) {
			s := &panicStage{on: p.String("on", "")}
			return s, p.Done()
		}})
	stages.Register(stages.Kind{Name: "test_panic_global", Doc: "panics in Scan or Apply on one document (tests)",
		NewGlobal: func(p *stages.Params, env stages.Env) (stages.GlobalStage, error) {
			g := &panicGlobal{scanOn: p.String("scan_on", ""), applyOn: p.String("apply_on", "")}
			return g, p.Done()
		}})
}

type panicStage struct{ on string }

func (s *panicStage) Name() string          { return "test_panic" }
func (s *panicStage) Kind() string          { return "test_panic" }
func (s *panicStage) MetricNames() []string { return nil }
func (s *panicStage) Process(d *stages.Doc) stages.Decision {
	if d.ID == s.on {
		var b []byte
		_ = b[len(d.Text)] // index out of range, as a real bug would
	}
	return stages.KeepDoc()
}

type panicGlobal struct{ scanOn, applyOn string }

func (g *panicGlobal) Name() string { return "test_panic_global" }
func (g *panicGlobal) Kind() string { return "test_panic_global" }
func (g *panicGlobal) Scan(d *stages.Doc) any {
	if d.ID == g.scanOn {
		panic("scan bug on " + d.ID)
	}
	return nil
}
func (g *panicGlobal) Collect(stages.OrderKey, string, any) error { return nil }
func (g *panicGlobal) Reduce() error                              { return nil }
func (g *panicGlobal) Close() error                               { return nil }
func (g *panicGlobal) Apply(d *stages.Doc) stages.Decision {
	if d.ID == g.applyOn {
		panic("apply bug on " + d.ID)
	}
	return stages.KeepDoc()
}

// A stage that panics on one document costs that document only: it is in
// the ledger with rule internal_error (stage, id, file, line), the manifest
// lists the panic with its first stack frames, and every other document
// reaches the shards.
func TestPanicOnOneDocumentIsRecorded(t *testing.T) {
	dir := writeCorpus(t, 40)
	s := writeSpec(t, dir, `name: bugs
inputs:
  - source: yard
    paths: ["raw/*.zst"]
stages:
  - kind: test_panic
    on: doc-5
  - kind: test_panic_global
    scan_on: doc-8
    apply_on: doc-12
  - kind: length
    min_chars: 1
output:
  dir: out
`)
	for _, w := range []int{1, 3} {
		out := filepath.Join(dir, "out", string(rune('0'+w)))
		res, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: w})
		if err != nil {
			t.Fatal(err)
		}
		m := res.Manifest
		if m.InternalErrors != 3 || m.Totals.DocsOut != 37 {
			t.Fatalf("workers %d: internal errors %d, docs out %d (want 3, 37)", w, m.InternalErrors, m.Totals.DocsOut)
		}
		var got []string
		for _, e := range m.Errors {
			if e.Rule != RuleInternalError {
				continue
			}
			got = append(got, e.Stage+" "+e.Doc)
			if len(e.Stack) == 0 || e.File == "" || e.Line == 0 {
				t.Errorf("error without stack or place: %+v", e)
			}
		}
		if strings.Join(got, ",") != "test_panic_global doc-8,test_panic doc-5,test_panic_global doc-12" {
			t.Errorf("manifest errors %v", got)
		}
		// The first frame is the stage that panicked.
		if first := m.Errors[1].Stack[0]; !strings.HasPrefix(first, "winnow/stages/run.(*panicStage).Process ("+mustAbs(t, "internal_test.go")+":") {
			t.Errorf("stack %q", m.Errors[1].Stack)
		}
		led := readZstd(t, filepath.Join(out, "ledger", "test_panic.jsonl.zst"))
		if !strings.Contains(led, `{"doc":"doc-5","source":"yard","file":"raw/part-1.jsonl.zst","line":3,"stage":"test_panic","rule":"internal_error","action":"drop"`) {
			t.Errorf("ledger %s", led)
		}
		led = readZstd(t, filepath.Join(out, "ledger", "test_panic_global.jsonl.zst"))
		if strings.Count(led, `"rule":"internal_error"`) != 2 || !strings.Contains(led, `"doc":"doc-8"`) || !strings.Contains(led, `"doc":"doc-12"`) {
			t.Errorf("ledger %s", led)
		}
		// stages.Stage flows still add up: in = out + dropped.
		for _, c := range m.Stages {
			if c.Kind != "read" && c.Kind != "write" && c.DocsIn != c.DocsOut+c.Dropped {
				t.Errorf("%s: in %d, out %d, dropped %d", c.Name, c.DocsIn, c.DocsOut, c.Dropped)
			}
		}
	}
}

func mustAbs(t *testing.T, p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

func TestPanicStack(t *testing.T) {
	var ie *internalError
	func() {
		defer recoverInternal(&ie)
		var m map[string]int
		m["x"] = 1 // assignment to a nil map
	}()
	if ie == nil || !strings.Contains(ie.value, "nil map") {
		t.Fatalf("recovered %+v", ie)
	}
	if len(ie.stack) == 0 || !strings.Contains(ie.stack[0], "TestPanicStack") || strings.Contains(ie.stack[0], "runtime/debug") {
		t.Errorf("stack %q", ie.stack)
	}
}

// The id table finds every repeat (checked against a Go map) and stops,
// instead of growing, at its byte limit.
func TestIDSet(t *testing.T) {
	s := &idSet{maxBytes: 1 << 20}
	ref := map[uint64]bool{}
	x := uint64(88172645463325252)
	for i := 0; i < 60000; i++ {
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		h := x % 40000 // repeats on purpose; includes 0
		if got := s.add(h); got != ref[max(h, 1)] {
			t.Fatalf("add(%d) = %v, map says %v", h, got, ref[max(h, 1)])
		}
		ref[max(h, 1)] = true
	}
	if s.full || s.n != len(ref) {
		t.Errorf("n %d, want %d (full %v)", s.n, len(ref), s.full)
	}
	small := &idSet{maxBytes: 64 << 10}
	for i := uint64(1); i <= 10000; i++ {
		small.add(i)
	}
	if !small.full || small.slots != nil || small.add(1) {
		t.Errorf("table past its limit: full %v, %d slots", small.full, len(small.slots))
	}
}

// test_panic_report is a per-document stage whose run-wide report (an
// Observer) panics on one document.
func init() {
	stages.Register(stages.Kind{Name: "test_panic_report", Doc: "report panics on one document (tests)",
		New: func(p *stages.Params, env stages.Env) (stages.Stage, error) {
			return &panicReport{on: p.String("on", "")}, p.Done()
		}})
}

type panicReport struct {
	on   string
	seen int
}

func (s *panicReport) Name() string                          { return "test_panic_report" }
func (s *panicReport) Kind() string                          { return "test_panic_report" }
func (s *panicReport) MetricNames() []string                 { return nil }
func (s *panicReport) Process(d *stages.Doc) stages.Decision { return stages.KeepDoc() }
func (s *panicReport) Observe(d *stages.Doc, dec *stages.Decision) {
	if d.ID == s.on {
		panic("report bug on " + d.ID)
	}
	s.seen++
}

// A run-wide report that panics on one document loses that document from
// the report only: the run finishes, counts the internal error, and the
// document still reaches the shards.
func TestPanicInReportIsRecorded(t *testing.T) {
	dir := writeCorpus(t, 20)
	s := writeSpec(t, dir, "name: rep\ninputs:\n  - source: yard\n    paths: [\"raw/*.zst\"]\nstages:\n  - kind: test_panic_report\n    on: doc-4\noutput:\n  dir: out\n")
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out"), Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	m := res.Manifest
	if m.InternalErrors != 1 || m.Totals.DocsOut != 20 {
		t.Fatalf("internal %d, out %d", m.InternalErrors, m.Totals.DocsOut)
	}
	var e record.RunError
	for _, x := range m.Errors {
		if x.Rule == RuleInternalError {
			e = x
		}
	}
	if e.Doc != "doc-4" || e.Stage != "test_panic_report (report)" || len(e.Stack) == 0 {
		t.Errorf("error %+v", e)
	}
	if got := res.Runner.Steps[0].Stage.(*panicReport).seen; got != 19 {
		t.Errorf("report saw %d documents, want 19", got)
	}
}
