package run

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"winnow/stages/read"
	"winnow/stages/record"
)

// An input that grows, shrinks, is touched or is replaced while it is read
// ends its read with an error naming the file (so the run records it as a
// broken input, not "complete"); the documents read before are kept.
func TestInputChangedWhileRead(t *testing.T) {
	line := `{"text":"Survey note: the keel bolts were checked and re-torqued."}` + "\n"
	content := strings.Repeat(line, 20000) // ~1.3 MB, more than one read buffer
	changes := map[string]func(p string){
		"none":   func(p string) {},
		"append": func(p string) { f, _ := os.OpenFile(p, os.O_APPEND|os.O_WRONLY, 0); f.WriteString(line); f.Close() },
		"shrink": func(p string) { os.Truncate(p, int64(len(content)/2)) },
		"touch":  func(p string) { later := time.Now().Add(time.Hour); os.Chtimes(p, later, later) },
		"replace": func(p string) {
			os.WriteFile(p+".new", []byte(content), 0o644)
			os.Rename(p+".new", p)
		},
	}
	for name, change := range changes {
		dir := t.TempDir()
		p := filepath.Join(dir, "notes.jsonl")
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		r := &Runner{}
		in := read.InputFile{Path: p, Display: "notes.jsonl", Options: &read.ReadOptions{Source: "s", TextField: "text"}}
		var sum record.InputSummary
		n := 0
		err := r.readInput(context.Background(), in, &sum, func(rec read.Record) bool {
			if n == 0 {
				change(p)
			}
			n++
			return true
		})
		if name == "none" {
			if err != nil || n != 20000 {
				t.Errorf("unchanged: %d docs, %v", n, err)
			}
			continue
		}
		if !errors.Is(err, read.ErrInputChanged) || !strings.Contains(err.Error(), p) {
			t.Errorf("%s: got %v, want an input-changed error naming the file", name, err)
		}
		if n == 0 {
			t.Errorf("%s: no documents kept", name)
		}
	}
}
