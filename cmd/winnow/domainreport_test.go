package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"
)

// markupManPages writes to out, as JSON Lines with ids prefixed
// "headers:", the documents of the zstd JSON Lines file in whose first
// 200 characters (white space collapsed) one of < > & occurs, and returns
// how many.
func markupManPages(t *testing.T, in, out string) int {
	t.Helper()
	var b strings.Builder
	n := 0
	for _, doc := range readZstdJSON(t, in) {
		id, _ := doc["id"].(string)
		text, _ := doc["text"].(string)
		start := []rune(strings.Join(strings.Fields(text), " "))
		if !strings.ContainsAny(string(start[:min(len(start), 200)]), "<>&") {
			continue
		}
		line, _ := json.Marshal(map[string]string{"id": "headers:" + id, "text": text})
		b.Write(line)
		b.WriteByte('\n')
		n++
	}
	if err := os.WriteFile(out, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return n
}

// domainPageScript reads the report's domain section: its marked numbers,
// its charts and the tables of highest and lowest scoring documents.
const domainPageScript = `JSON.stringify({
  numbers: [...document.querySelectorAll('[data-dk]')].map(e => [e.dataset.dstage, e.dataset.dsrc, e.dataset.dk, e.textContent]),
  charts: [...document.querySelectorAll('svg[data-chart^="domain:"]')].map(s => ({
    chart: s.dataset.chart,
    kept: s.querySelectorAll('rect.kept').length,
    removed: s.querySelectorAll('rect.removed').length,
    thresholds: s.querySelectorAll('line.threshold').length,
    width: s.getBoundingClientRect().width})),
  tables: [...document.querySelectorAll('table.domain-docs')].map(t => ({
    stage: t.dataset.stage, end: t.dataset.end,
    rows: [...t.tBodies[0].rows].map(r => [...r.cells].map(c => c.textContent)),
    elements: t.tBodies[0].querySelectorAll('td.txt *').length})),
  nav: !!document.querySelector('nav a[href="#domain"]'),
  section: !!document.getElementById('domain')})`

type domainPage struct {
	Numbers [][4]string `json:"numbers"`
	Charts  []struct {
		Chart      string  `json:"chart"`
		Kept       int     `json:"kept"`
		Removed    int     `json:"removed"`
		Thresholds int     `json:"thresholds"`
		Width      float64 `json:"width"`
	} `json:"charts"`
	Tables []struct {
		Stage    string     `json:"stage"`
		End      string     `json:"end"`
		Rows     [][]string `json:"rows"`
		Elements int        `json:"elements"`
	} `json:"tables"`
	Nav     bool `json:"nav"`
	Section bool `json:"section"`
}

// checkDomainReport checks the report open in tab against the audit JSON
// js: every number of the domain section equals the JSON, every source
// with scored documents has a histogram with one bar part per non-empty
// kept and removed bin and the cut drawn, and the tables of highest and
// lowest scoring documents show the JSON's documents in order, their text
// as text (escaped: no element inside a text cell). A run without a
// domain stage has no section.
func checkDomainReport(t *testing.T, tab context.Context, js map[string]any) {
	t.Helper()
	raw, err := chromedp.Run(tab, chromedp.Evaluate[string](domainPageScript))
	if err != nil {
		t.Fatal(err)
	}
	var pg domainPage
	if err := json.Unmarshal([]byte(raw), &pg); err != nil {
		t.Fatal(err)
	}
	sels, _ := js["domain"].([]any)
	if len(sels) == 0 {
		if pg.Section || pg.Nav || len(pg.Charts) > 0 {
			t.Errorf("the run has no domain stage but the page has a domain section")
		}
		return
	}
	if !pg.Section || !pg.Nav {
		t.Errorf("domain section %v, link %v", pg.Section, pg.Nav)
	}
	byStage := map[string]map[string]any{}
	for _, d := range sels {
		dm := d.(map[string]any)
		byStage[dm["stage"].(string)] = dm
	}
	for _, n := range pg.Numbers {
		d := byStage[n[0]]
		if d == nil {
			t.Errorf("number %v: no domain stage %s in the JSON", n, n[0])
			continue
		}
		m := d
		if n[1] != "" {
			m = nil
			for _, s := range d["sources"].([]any) {
				if sm := s.(map[string]any); sm["source"] == n[1] {
					m = sm
				}
			}
		}
		v, ok := m[n[2]].(float64)
		got, err := strconv.ParseInt(strings.ReplaceAll(n[3], ",", ""), 10, 64)
		if !ok || err != nil || got != int64(v) {
			t.Errorf("domain %s/%s %s: page shows %q, JSON %v", n[0], n[1], n[2], n[3], m[n[2]])
		}
	}
	if len(pg.Numbers) < 4 {
		t.Errorf("only %d numbers marked in the domain section", len(pg.Numbers))
	}
	charts := map[string]int{}
	for i, c := range pg.Charts {
		charts[c.Chart] = i
	}
	nonzero := func(v any) int {
		n := 0
		for _, c := range v.([]any) {
			if c.(float64) > 0 {
				n++
			}
		}
		return n
	}
	drawn := 0
	for stage, d := range byStage {
		cut := 0
		if d["has_cut"] == true {
			cut = 1
		}
		for _, s := range d["sources"].([]any) {
			sm := s.(map[string]any)
			name := fmt.Sprintf("domain:%s/%s", stage, sm["source"])
			i, ok := charts[name]
			if sm["docs"] == sm["not_scored"] {
				if ok {
					t.Errorf("%s: drawn, but the source has no score", name)
				}
				continue
			}
			if !ok {
				t.Errorf("chart %s missing", name)
				continue
			}
			drawn++
			c := pg.Charts[i]
			if c.Kept != nonzero(sm["kept_bins"]) || c.Removed != nonzero(sm["removed_bins"]) || c.Thresholds != cut || c.Width < 100 {
				t.Errorf("chart %s: %d kept and %d removed parts, %d cut lines, %.0f px wide; JSON %v / %v, cut %v", name, c.Kept, c.Removed,
					c.Thresholds, c.Width, sm["kept_bins"], sm["removed_bins"], d["has_cut"])
			}
		}
		for _, end := range []string{"top", "bottom"} {
			docs := d[end].([]any)
			found := false
			for _, tb := range pg.Tables {
				if tb.Stage != stage || tb.End != end {
					continue
				}
				found = true
				if len(tb.Rows) != len(docs) || tb.Elements != 0 {
					t.Errorf("%s %s: %d rows (%d elements in text cells), JSON %d documents", stage, end, len(tb.Rows), tb.Elements, len(docs))
					continue
				}
				for i, row := range tb.Rows {
					dm := docs[i].(map[string]any)
					text, _ := dm["text"].(string)
					if text == "" {
						text, _ = dm["text_note"].(string)
					}
					want := []string{strconv.Itoa(i + 1), dm["id"].(string), dm["source"].(string), fmt.Sprintf("%.4f", dm["score"].(float64))}
					if len(row) != 6 || strings.Join(row[:4], "|") != strings.Join(want, "|") || row[5] != text {
						t.Errorf("%s %s row %d: %q, JSON %q and text %q", stage, end, i+1, row, want, text)
					}
				}
			}
			if !found && len(docs) > 0 {
				t.Errorf("no table of the %s documents of %s", end, stage)
			}
		}
	}
	if drawn != len(pg.Charts) {
		t.Errorf("%d domain charts on the page, %d expected from the JSON", len(pg.Charts), drawn)
	}
}

// TestDomainReportInBrowser runs a domain stage on real documents
// (testdata/domaindocs, sources in README.md there: the Python 3.11
// documentation as the domain, trained against Linux man-pages and
// general prose; the inputs are the Python documents, the prose, which
// `sources` leaves unscored, and the man pages showing C headers at their
// start), writes the HTML report and
// opens it in headless Chromium: no console error, no request but the
// page, and the domain section agrees with `audit --json` (checkDomainReport).
// The text audit's headline gives the share kept per source.
func TestDomainReportInBrowser(t *testing.T) {
	data := domainDocs(t)
	dir := t.TempDir()
	// The man pages whose start shows C headers (<signal.h>) and
	// operators (&&) make a source of their own, so the lowest scoring
	// documents shown carry markup-like characters.
	headers := markupManPages(t, filepath.Join(data, "manpages.jsonl.zst"), filepath.Join(dir, "headers.jsonl"))
	if headers < 10 {
		t.Fatalf("only %d man pages with < > or & at their start", headers)
	}
	spec := filepath.Join(dir, "spec.yaml")
	body := `name: docs-report
seed: 5
inputs:
  - source: python
    paths: ["` + data + `/python.jsonl.zst"]
  - source: prose
    paths: ["` + data + `/prose.jsonl.zst"]
  - source: headers
    paths: ["headers.jsonl"]
stages:
  - kind: length
    min_chars: 300
  - kind: domain
    examples: ["` + data + `/python.jsonl.zst"]
    background: ["` + data + `/manpages.jsonl.zst", "` + data + `/prose.jsonl.zst"]
    min_score: 0.6
    sources: [python, headers]
output:
  dir: out
`
	if err := os.WriteFile(spec, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	runOpts = runFlags{}
	defer func() { runOpts = runFlags{} }()
	if _, err := captureStdout(t, func() error { _, err := runCLI(t, "run", spec, "-q"); return err }); err != nil {
		t.Fatal(err)
	}
	run := filepath.Join(dir, "out")
	report := filepath.Join(dir, "report.html")
	out, err := runCLI(t, "audit", run, "--html", report, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var js map[string]any
	if err := json.Unmarshal([]byte(out), &js); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	if d, _ := js["domain"].([]any); len(d) != 1 {
		t.Fatalf("audit JSON has %d domain selections", len(d))
	}
	// The shown texts include markup-like characters, so the check that
	// they stay text is not vacuous.
	special := false
	for _, end := range []string{"top", "bottom"} {
		for _, doc := range js["domain"].([]any)[0].(map[string]any)[end].([]any) {
			if s, _ := doc.(map[string]any)["text"].(string); strings.ContainsAny(s, "<>&") {
				special = true
			}
		}
	}
	if !special {
		t.Error("no shown text has < > or &: the escaping check would be vacuous")
	}

	tab, ev := browser(t)
	url := "file://" + report
	if err := chromedp.Do(tab, chromedp.Navigate(url)); err != nil {
		t.Fatal(err)
	}
	checkDomainReport(t, tab, js)
	ev.checkOnlyPage(t, url)

	// At phone width the domain section stays one column wide: nothing
	// in it but the scrolling source table reaches past the screen (the
	// tables of documents turn into one block per document).
	if err := chromedp.Do(tab, chromedp.EmulateViewport(390, 844, chromedp.EmulateMobile)); err != nil {
		t.Fatal(err)
	}
	wide, err := chromedp.Run(tab, chromedp.Evaluate[[]string](`[...document.querySelectorAll('#domain *')].filter(e => !(e.parentElement && e.parentElement.closest('.scroll:not(:has(table.domain-docs))')) && e.getBoundingClientRect().right > document.documentElement.clientWidth + 1).map(e => e.tagName + " " + (e.getAttribute("class") || "") + ' ' + Math.round(e.getBoundingClientRect().right))`))
	if err != nil {
		t.Fatal(err)
	}
	if len(wide) > 0 {
		t.Errorf("at 390 px, parts of the domain section reach past the screen: %q", wide)
	}
	checkDomainReport(t, tab, js)

	text, err := runCLI(t, "audit", run)
	if err != nil {
		t.Fatal(err)
	}
	var parts []string
	for _, s := range js["domain"].([]any)[0].(map[string]any)["sources"].([]any) {
		sm := s.(map[string]any)
		if sm["docs"] == sm["not_scored"] {
			parts = append(parts, fmt.Sprintf("%s not scored (%d passed)", sm["source"], int64(sm["docs"].(float64))))
			continue
		}
		pct := fmt.Sprintf("%.1f%%", 100*sm["share_kept"].(float64))
		if p := 100 * sm["share_kept"].(float64); p > 0 && p < 1 {
			pct = fmt.Sprintf("%.2f%%", p)
		}
		parts = append(parts, fmt.Sprintf("%s %s (%d of %d)", sm["source"], pct, int64(sm["kept"].(float64)), int64(sm["docs"].(float64))))
	}
	head := "domain (classifier, min_score 0.6) kept: " + strings.Join(parts, ", ")
	if !strings.Contains(text, "\n"+head+"\n") {
		t.Errorf("audit text has no headline %q:\n%s", head, text)
	}
}
