package main

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"

	"golang.org/x/term"

	"winnow/stages/run"
	"winnow/stages/termtext"
)

// progressLine prints a one-line, self-overwriting progress report to
// stderr: documents/s, MB/s of text and, when input sizes are known, an
// ETA. It is silent when stderr is not a terminal (logs, CI, pipes).
type progressLine struct {
	mu     sync.Mutex
	w      io.Writer
	on     bool
	active bool
}

func newProgress(quiet bool) *progressLine {
	on := !quiet && term.IsTerminal(int(os.Stderr.Fd()))
	return &progressLine{w: os.Stderr, on: on}
}

// update is a run.Runner OnProgress callback.
func (p *progressLine) update(s run.Progress) {
	if !p.on {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	secs := s.Elapsed.Seconds()
	if secs <= 0 {
		return
	}
	line := fmt.Sprintf("segment %d/%d  %d docs  %.0f docs/s  %.1f MB/s", s.Segment, s.Segments, s.Docs,
		float64(s.Docs)/secs, float64(s.TextBytes)/1e6/secs)
	if s.Segment == 1 && s.TotalRaw > 0 && s.RawBytes > 0 && s.RawBytes < s.TotalRaw {
		rate := float64(s.RawBytes) / secs
		eta := time.Duration(float64(s.TotalRaw-s.RawBytes)/rate) * time.Second
		line += fmt.Sprintf("  %3.0f%%  ETA %s", 100*float64(s.RawBytes)/float64(s.TotalRaw), eta.Round(time.Second))
	}
	fmt.Fprintf(p.w, "\r\033[K%s", line)
	p.active = true
}

// done clears the progress line.
func (p *progressLine) done() {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.active {
		fmt.Fprint(p.w, "\r\033[K")
		p.active = false
	}
}

// logf prints one log line to stderr, clearing the progress line first.
func (p *progressLine) logf(format string, args ...any) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.active {
		fmt.Fprint(p.w, "\r\033[K")
		p.active = false
	}
	fmt.Fprintf(os.Stderr, "winnow: %s\n", termtext.EscapeLines(fmt.Sprintf(format, args...)))
}
