package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// rawControls lists the terminal controls in s: C0 bytes other than
// newline and tab, DEL, C1 code points (Unicode category Cc, the ECMA-48
// C0 and C1 sets) and bidi formatting characters.
func rawControls(s string) []string {
	var bad []string
	for i, r := range s {
		if r == utf8.RuneError {
			if _, n := utf8.DecodeRuneInString(s[i:]); n == 1 {
				bad = append(bad, fmt.Sprintf("byte %#x at %d", s[i], i))
			}
			continue
		}
		if r != '\n' && r != '\t' && (unicode.IsControl(r) || unicode.Is(unicode.Bidi_Control, r)) {
			bad = append(bad, fmt.Sprintf("U+%04X at %d", r, i))
		}
	}
	return bad
}

// Document ids (and other input text) holding ESC/CSI/OSC sequences, BEL,
// C1 controls and bidi overrides never reach the terminal raw through
// audit, explain or whatif, in text or JSON; they are shown escaped.
func TestTerminalOutputEscapesControls(t *testing.T) {
	dir := t.TempDir()
	evil := []string{"title\x1b]0;pwned\x07", "clear\x1b[2J\x1b[H", "csi\u009b31m", "osc\u009d8;;x\u009c", "rtl\u202etxt.exe", "cr\rover"}
	var raw bytes.Buffer
	for i := 0; i < 60; i++ {
		id := fmt.Sprintf("ok-%d", i)
		text := fmt.Sprintf("The chandlery at slip %d sells bronze cleats, varnish and line for the season ahead.", i)
		if i < len(evil) {
			id = evil[i]
			text = "short" // removed by length
		}
		b, _ := json.Marshal(map[string]string{"id": id, "text": text})
		raw.Write(append(b, '\n'))
	}
	os.MkdirAll(filepath.Join(dir, "raw"), 0o755)
	os.WriteFile(filepath.Join(dir, "raw", "a.jsonl"), raw.Bytes(), 0o644)
	spec := filepath.Join(dir, "spec.yaml")
	os.WriteFile(spec, []byte("name: esc\ninputs:\n  - source: s\n    paths: [raw/]\nstages:\n  - kind: length\n    min_chars: 20\noutput:\n  dir: out\n"), 0o644)
	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	if _, err := runCLI(t, "run", spec, "-q"); err != nil {
		t.Fatal(err)
	}
	run := filepath.Join(dir, "out")
	check := func(name, out string) {
		t.Helper()
		if bad := rawControls(out); len(bad) > 0 {
			t.Errorf("%s: raw controls %v in %q", name, bad, out)
		}
	}
	out, err := runCLI(t, "audit", run, "--samples", "6")
	if err != nil {
		t.Fatal(err)
	}
	check("audit", out)
	if !strings.Contains(out, `title\x1b]0;pwned\x07`) {
		t.Errorf("audit does not show the escaped id:\n%s", out)
	}
	out, _ = runCLI(t, "audit", run, "--rule", "min_chars", "--samples", "6")
	check("audit --rule", out)
	for _, id := range evil {
		out, err = runCLI(t, "explain", run, id)
		if err != nil {
			t.Fatalf("explain %q: %v", id, err)
		}
		check("explain", out)
		out, _ = runCLI(t, "explain", run, id, "--json")
		check("explain --json", out)
		var ex struct{ Docs []struct{ ID string } }
		if err := json.Unmarshal([]byte(out), &ex); err != nil || len(ex.Docs) != 1 || ex.Docs[0].ID != id {
			t.Errorf("explain --json is not the id back: %v %q", err, out)
		}
	}
	out, _ = runCLI(t, "whatif", run, "--set", "length.min_chars=3")
	check("whatif", out)
	if !strings.Contains(out, `csi\u009b31m`) {
		t.Errorf("whatif flips do not show the escaped id:\n%s", out)
	}
	out, _ = runCLI(t, "whatif", run, "--set", "length.min_chars=3", "--json")
	check("whatif --json", out)
}
