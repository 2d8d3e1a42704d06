package stages

import (
	"bufio"
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// Real text nobody here wrote, for the codec and report-split tests:
// testdata/realdocs (manual pages rendered by groff, libffi's manual in
// HTML from texinfo; see its README and LICENSES) and testdata/mail-python
// (raw e-mail; see its README and LICENSE).

// zstdJSONLTexts returns field of each JSON line of a zstd file.
func zstdJSONLTexts(tb testing.TB, path, field string) []string {
	tb.Helper()
	f, err := os.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	zr, err := zstd.NewReader(f)
	if err != nil {
		tb.Fatal(err)
	}
	defer zr.Close()
	var out []string
	sc := bufio.NewScanner(zr)
	sc.Buffer(nil, 16<<20)
	for sc.Scan() {
		var rec map[string]any
		if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
			tb.Fatalf("%s: %v", path, err)
		}
		s, _ := rec[field].(string)
		out = append(out, s)
	}
	if err := sc.Err(); err != nil {
		tb.Fatalf("%s: %v", path, err)
	}
	return out
}

// globTexts returns the contents of the files matching pattern, in name
// order.
func globTexts(tb testing.TB, pattern string) []string {
	tb.Helper()
	files, err := filepath.Glob(pattern)
	if err != nil || len(files) == 0 {
		tb.Fatalf("%s: %v (%d files)", pattern, err, len(files))
	}
	sort.Strings(files)
	out := make([]string, len(files))
	for i, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			tb.Fatal(err)
		}
		out[i] = string(b)
	}
	return out
}

// realTexts holds the real documents by kind.
type realTexts struct {
	man, mail, html []string
}

func loadRealTexts(tb testing.TB) realTexts {
	tb.Helper()
	return realTexts{
		man:  zstdJSONLTexts(tb, "../testdata/realdocs/man/pages.jsonl.zst", "text"),
		mail: globTexts(tb, "../testdata/mail-python/msg_*.txt"),
		html: globTexts(tb, "../testdata/realdocs/html/*.html"),
	}
}

// all returns man pages, mail and HTML pages interleaved.
func (r realTexts) all() []string {
	var out []string
	for i := 0; i < max(len(r.man), len(r.mail), len(r.html)); i++ {
		for _, l := range [][]string{r.man, r.mail, r.html} {
			if i < len(l) {
				out = append(out, l[i])
			}
		}
	}
	return out
}

// withCopies returns texts followed by copies made from them: an exact
// copy of every 7th, an upper-cased copy of every 11th (equal after
// normalization) and, of every 5th, a near copy missing its last
// twentieth of lines.
func withCopies(texts []string) []string {
	out := append([]string{}, texts...)
	for i, s := range texts {
		if i%7 == 3 {
			out = append(out, s)
		}
		if i%11 == 5 {
			out = append(out, strings.ToUpper(s))
		}
		if i%5 == 1 {
			lines := strings.Split(s, "\n")
			out = append(out, strings.Join(lines[:len(lines)-max(1, len(lines)/20)], "\n"))
		}
	}
	return out
}

// npmQuestions returns the questions of the eval set written by DuckDB
// (testdata/evalsets), in file order.
func npmQuestions(tb testing.TB) []string {
	tb.Helper()
	data, err := os.ReadFile("../testdata/evalsets/npm-mc.jsonl")
	if err != nil {
		tb.Fatal(err)
	}
	var out []string
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		var rec struct {
			Question string `json:"question"`
		}
		if err := json.Unmarshal([]byte(line), &rec); err != nil {
			tb.Fatal(err)
		}
		out = append(out, rec.Question)
	}
	return out
}
