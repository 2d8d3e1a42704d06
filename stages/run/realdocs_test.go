package run

import (
	"bufio"
	"context"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/stages/record"
)

// copyInto copies the files matching pattern into dir.
func copyInto(t *testing.T, pattern, dir string) int {
	t.Helper()
	files, err := filepath.Glob(pattern)
	if err != nil || len(files) == 0 {
		t.Fatalf("%s: %v (%d files)", pattern, err, len(files))
	}
	os.MkdirAll(dir, 0o755)
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(dir, filepath.Base(f)), b, 0o644)
	}
	return len(files)
}

// zstdLines returns the lines of a zstd file.
func zstdLines(t *testing.T, path string) [][]byte {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d, err := zstd.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	var out [][]byte
	sc := bufio.NewScanner(d)
	sc.Buffer(nil, 64<<20)
	for sc.Scan() {
		out = append(out, append([]byte(nil), sc.Bytes()...))
	}
	if err := sc.Err(); err != nil && err != io.EOF {
		t.Fatal(err)
	}
	return out
}

// emailRE finds something shaped like an e-mail address (common practice:
// local part, "@", a dotted domain with a letter top-level label).
var emailRE = regexp.MustCompile(`[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(\.[A-Za-z0-9-]+)*\.[A-Za-z]{2,}`)

// The full default spec (configs/default.yaml) over real documents nobody
// here wrote (testdata/realdocs: Debian manual pages as JSONL, gettext
// catalogues in 15 scripts, texinfo HTML; testdata/mail-python: raw
// e-mail): no internal error, and every input record is accounted for:
// in the shards, or in the ledger with a stage and rule (a document the
// mix left out is there too, rule mix_left_out).
// No e-mail address survives into the shards.
func TestDefaultSpecOnRealDocs(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join("..", "..", "testdata")
	nText := copyInto(t, filepath.Join(real, "mail-python", "msg_*.txt"), filepath.Join(dir, "raw", "forum"))
	nText += copyInto(t, filepath.Join(real, "realdocs", "po", "*.po.gz"), filepath.Join(dir, "raw", "dealer"))
	nText += copyInto(t, filepath.Join(real, "realdocs", "html", "*.html"), filepath.Join(dir, "raw", "web"))
	copyInto(t, filepath.Join(real, "realdocs", "man", "pages.jsonl.zst"), filepath.Join(dir, "raw", "manuals"))
	nJSONL := len(zstdLines(t, filepath.Join(dir, "raw", "manuals", "pages.jsonl.zst")))
	p := writeDefaultSpec(t, dir, filepath.Join(real, "realdocs", "evals", "manual-qa.jsonl"))
	s := loadSpec(t, p)
	res, err := RunSpec(context.Background(), s, RunOptions{Workers: 2, Version: "t"})
	if err != nil {
		t.Fatalf("run: %v", err)
	}
	m := res.Manifest
	if m.InternalErrors != 0 {
		t.Errorf("%d internal errors: %+v", m.InternalErrors, m.Errors)
	}
	if m.DuplicateIDs != 0 {
		t.Errorf("%d duplicate ids", m.DuplicateIDs)
	}
	// Records passed over by a read rule (an HTML page with no main
	// text: no_text) are not documents; they are in the ledger instead.
	var skips int64
	for _, n := range m.ReadSkips {
		skips += n
	}
	if want := int64(nText + nJSONL); m.Totals.DocsIn+skips != want {
		t.Errorf("read %d documents and skipped %d records, the inputs hold %d (%d text files, %d JSON lines)", m.Totals.DocsIn, skips, want, nText, nJSONL)
	}

	// Documents in the shards (pieces of a split document count once).
	kept := map[string]bool{}
	var lines, textBytes int64
	for _, o := range m.Outputs {
		for _, line := range zstdLines(t, filepath.Join(res.Dir, o.Path)) {
			var d struct{ ID, Text string }
			if err := json.Unmarshal(line, &d); err != nil {
				t.Fatalf("%s: %v", o.Path, err)
			}
			id, _, _ := strings.Cut(d.ID, "#")
			id, _, _ = strings.Cut(id, "~")
			kept[id] = true
			lines++
			textBytes += int64(len(d.Text))
			if a := emailRE.FindString(d.Text); a != "" {
				t.Errorf("%s: e-mail address %q left in the shards", d.ID, a)
			}
		}
	}
	// Documents removed, each with its stage and rule.
	removed := map[string]string{}
	var skipped int64
	ledgers, _ := filepath.Glob(filepath.Join(res.Dir, "ledger", "*.jsonl.zst"))
	for _, l := range ledgers {
		for _, line := range zstdLines(t, l) {
			var r struct{ Doc, Stage, Rule, Action string }
			if err := json.Unmarshal(line, &r); err != nil {
				t.Fatalf("%s: %v", l, err)
			}
			if r.Action == "skip" {
				skipped++
				continue
			}
			if r.Action != "drop" {
				continue
			}
			if r.Rule == "" {
				t.Errorf("%s: drop without a rule: %s", l, line)
			}
			if prev, dup := removed[r.Doc]; dup {
				t.Errorf("%s removed twice (%s, %s)", r.Doc, prev, r.Stage)
			}
			removed[r.Doc] = r.Stage + "/" + r.Rule
			if kept[r.Doc] {
				t.Errorf("%s is both removed (%s) and in the shards", r.Doc, r.Stage)
			}
		}
	}
	if int64(len(kept))+int64(len(removed)) != m.Totals.DocsIn {
		t.Errorf("accounting: %d in the shards + %d removed with a rule != %d read", len(kept), len(removed), m.Totals.DocsIn)
	}
	// The write row counts one unit per column: documents in, documents
	// left out entirely, documents with a piece in the shards (in minus
	// left out), shard lines apart, and the text bytes actually written.
	w := m.Stages[len(m.Stages)-1]
	if w.Name != "write" || w.DocsOut != int64(len(kept)) || w.DocsIn-w.Dropped != w.DocsOut || m.Totals.DocsOut != w.DocsOut {
		t.Errorf("write row: in %d, dropped %d, out %d; %d documents in the shards (totals %d)", w.DocsIn, w.Dropped, w.DocsOut, len(kept), m.Totals.DocsOut)
	}
	if w.RecordsOut != lines || m.Totals.RecordsOut != lines || w.BytesOut != textBytes || m.Totals.BytesOut != textBytes {
		t.Errorf("write row: %d records, %d bytes out (totals %d, %d); shards hold %d lines, %d text bytes",
			w.RecordsOut, w.BytesOut, m.Totals.RecordsOut, m.Totals.BytesOut, lines, textBytes)
	}
	if skipped != skips {
		t.Errorf("%d skip records in the ledger, the manifest counts %d", skipped, skips)
	}
	mixed := 0
	for _, why := range removed {
		if why == "output/"+record.RuleMixLeftOut {
			mixed++
		}
	}
	// Real text went through every stage, decontamination included.
	if len(kept) == 0 {
		t.Error("nothing kept")
	}
	for _, c := range m.Stages {
		if c.Name == "decontaminate" && c.DocsIn == 0 {
			t.Error("no document reached decontaminate")
		}
	}
	t.Logf("%d read: %d kept, %d removed (%d of them left out by the mix)", m.Totals.DocsIn, len(kept), len(removed), mixed)
}
