package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"

	"winnow/stages/record"
)

// runCLI runs one winnow command in-process and returns its standard
// output. Flags keep their values between Execute calls, so the option
// structs of the audit commands are reset first.
func runCLI(t *testing.T, args ...string) (string, error) {
	t.Helper()
	auditOpts.asJSON, auditOpts.rule, auditOpts.samples, auditOpts.html, auditOpts.specDir = false, "", 0, "", ""
	explainOpts.asJSON, explainOpts.specDir = false, ""
	whatifOpts.sets, whatifOpts.sweeps, whatifOpts.samples, whatifOpts.asJSON, whatifOpts.specDir = nil, nil, 5, false, ""
	var out bytes.Buffer
	rootCmd.SetOut(&out)
	rootCmd.SetErr(io.Discard)
	defer func() { rootCmd.SetOut(nil); rootCmd.SetErr(nil); rootCmd.SetArgs(nil) }()
	rootCmd.SetArgs(args)
	err := rootCmd.Execute()
	return out.String(), err
}

var (
	demoOnce sync.Once
	demoDir  string
	demoErr  error
)

// demoRunDir runs `winnow demo` once per test binary (a small corpus) and
// returns the run directory; the demo writes RUN/report.html.
func demoRunDir(t *testing.T) string {
	t.Helper()
	demoOnce.Do(func() {
		demoDir, demoErr = os.MkdirTemp("", "winnow-demo-test-")
		if demoErr != nil {
			return
		}
		docs := "400"
		if os.Getenv("WINNOW_SCREENSHOT") != "" {
			docs = "2000" // the README screenshot shows the demo's default size
		}
		// The demo prints its tables to os.Stdout; keep the test log quiet.
		stdout := os.Stdout
		null, _ := os.OpenFile(os.DevNull, os.O_WRONLY, 0)
		os.Stdout = null
		_, demoErr = runCLI(t, "demo", "--out", demoDir, "--docs", docs, "-q", "--force")
		os.Stdout = stdout
		null.Close()
	})
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return filepath.Join(demoDir, "run")
}

func TestMain(m *testing.M) {
	if args := os.Getenv(cliArgsEnv); args != "" {
		// A child process of a test: be the winnow command.
		runAsCLI(args)
		return
	}
	code := m.Run()
	for _, d := range []string{demoDir, splitDir} {
		if d != "" {
			os.RemoveAll(d) // shared by the tests of this binary
		}
	}
	os.Exit(code)
}

// TestAuditExplainWhatifCommands runs the three commands on the demo run.
func TestAuditExplainWhatifCommands(t *testing.T) {
	run := demoRunDir(t)
	out, err := runCLI(t, "audit", run)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"flow", "removed or edited, by stage and rule", "by source", "contamination", "input errors: 0"} {
		if !strings.Contains(out, want) {
			t.Errorf("audit output lacks %q:\n%s", want, out)
		}
	}
	out, err = runCLI(t, "audit", run, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var sum struct {
		Rules []struct {
			Stage, Rule, Action string
			Docs                int64
			Samples             []string
		}
		Flow []struct {
			Stage  string
			DocsIn int64 `json:"docs_in"`
		}
	}
	if err := json.Unmarshal([]byte(out), &sum); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	var drop *struct {
		Stage, Rule, Action string
		Docs                int64
		Samples             []string
	}
	for i := range sum.Rules {
		if sum.Rules[i].Action == "drop" {
			drop = &sum.Rules[i]
			break
		}
	}
	if drop == nil {
		t.Fatalf("the demo removed nothing: %s", out)
	}
	// The removed documents of a rule, with their text re-read.
	out, err = runCLI(t, "audit", run, "--rule", drop.Stage+"/"+drop.Rule, "--samples", "2")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "[1] "+drop.Samples[0]) || !strings.Contains(out, "re-read from") {
		t.Errorf("samples output:\n%s", out)
	}
	// Explain the first removed document.
	out, err = runCLI(t, "explain", run, drop.Samples[0])
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "result: "+drop.Stage+" removed by "+drop.Rule) {
		t.Errorf("explain output:\n%s", out)
	}
	out, err = runCLI(t, "explain", run, drop.Samples[0], "--json")
	if err != nil || !strings.Contains(out, `"status": "removed"`) {
		t.Errorf("explain --json: %v\n%s", err, out)
	}
	if _, err := runCLI(t, "explain", run, "no-such-doc"); err == nil {
		t.Error("explain of an unknown id succeeded")
	}
	// What-if with no change reproduces the run; a sweep prints a curve.
	out, err = runCLI(t, "whatif", run)
	if err != nil || !strings.Contains(out, "all reproduced") || strings.Contains(out, "DIFFER") {
		t.Errorf("whatif check: %v\n%s", err, out)
	}
	out, err = runCLI(t, "whatif", run, "--set", "quality.fewest_words=400", "--sweep", "quality.fewest_words=50:250:100", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var w struct {
		Combined struct {
			DocsKept    int64 `json:"docs_kept"`
			DocsKeptRun int64 `json:"docs_kept_run"`
		}
		Sweeps []struct {
			Points []struct {
				DocsKept int64 `json:"docs_kept"`
			}
		}
	}
	if err := json.Unmarshal([]byte(out), &w); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	if w.Combined.DocsKept > w.Combined.DocsKeptRun || len(w.Sweeps) != 1 || len(w.Sweeps[0].Points) != 3 {
		t.Errorf("whatif --json: %s", out)
	}
	if _, err := runCLI(t, "whatif", run, "--set", "nosuch.key=1"); err == nil || !strings.Contains(err.Error(), "no stage") {
		t.Errorf("unknown stage: %v", err)
	}
}

// chromium is the Debian browser the report test drives; scripts/test.sh
// installs it.
const chromium = "/usr/bin/chromium"

// browser starts headless Chromium with a fresh profile and no network
// services, and returns a tab context and the events it saw.
func browser(t *testing.T) (context.Context, *eventLog) {
	t.Helper()
	if _, err := os.Stat(chromium); err != nil {
		if p, lerr := exec.LookPath("chromium"); lerr != nil || p != chromium {
			t.Fatalf("the HTML report test needs Debian's chromium at %s (apt-get install chromium; scripts/test.sh installs it): %v", chromium, err)
		}
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	t.Cleanup(cancel)
	alloc, cancelAlloc := chromedp.NewExecAllocator(ctx,
		chromedp.ExecPath(chromium),
		chromedp.Flag("headless", true),
		chromedp.Flag("no-sandbox", true),
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("no-first-run", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.UserDataDir(t.TempDir()),
	)
	t.Cleanup(cancelAlloc)
	ev := &eventLog{}
	tab, cancelTab := chromedp.NewContext(alloc, chromedp.WithListener(ev.add))
	t.Cleanup(cancelTab)
	// Open the tab and turn on the network and log domains before the
	// page loads, so every request and message is seen.
	if err := chromedp.Do(tab, chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
		if _, err := cdp.Call(ctx, tg, network.Enable, network.EnableParams{}); err != nil {
			return err
		}
		_, err := cdp.Call(ctx, tg, log.Enable, cdp.Empty{})
		return err
	})); err != nil {
		t.Fatalf("starting %s: %v", chromium, err)
	}
	return tab, ev
}

// eventLog keeps the events that matter: requests, console messages,
// exceptions and browser log entries.
type eventLog struct {
	mu       sync.Mutex
	requests []string
	problems []string
}

func (e *eventLog) add(ev any) {
	e.mu.Lock()
	defer e.mu.Unlock()
	switch x := ev.(type) {
	case *network.EventRequestWillBeSent:
		e.requests = append(e.requests, x.Request.URL)
	case *runtime.EventExceptionThrown:
		e.problems = append(e.problems, "exception: "+x.ExceptionDetails.Text)
	case *runtime.EventConsoleAPICalled:
		e.problems = append(e.problems, "console."+string(x.Type))
	case *log.EventEntryAdded:
		if x.Entry.Level == log.EntryLevelError || x.Entry.Level == log.EntryLevelWarning {
			e.problems = append(e.problems, fmt.Sprintf("log %s: %s %s", x.Entry.Level, x.Entry.Text, x.Entry.URL))
		}
	}
}

// checkOnlyPage reports a request for anything but the page at url (a
// report loads nothing but itself) and every console or log problem seen,
// and returns the requests.
func (e *eventLog) checkOnlyPage(t *testing.T, url string) []string {
	t.Helper()
	e.mu.Lock()
	reqs, problems := append([]string(nil), e.requests...), append([]string(nil), e.problems...)
	e.mu.Unlock()
	if len(reqs) != 1 || reqs[0] != url {
		t.Errorf("requests %q: want only the report itself", reqs)
	}
	if len(problems) > 0 {
		t.Errorf("console/log problems: %q", problems)
	}
	return reqs
}

// pageData is what the test reads from the rendered page.
type pageData struct {
	Numbers [][2]string `json:"numbers"`
	Shares  [][2]string `json:"shares"`
	Charts  []struct {
		Chart      string `json:"chart"`
		Parts      int    `json:"parts"`
		Thresholds int    `json:"thresholds"`
		Children   int    `json:"children"`
		// Points/Estimates/Docs are a what-if chart's circles.
		Points    int      `json:"points"`
		Estimates int      `json:"estimates"`
		Docs      []string `json:"docs"`
	} `json:"charts"`
	Width  int `json:"width"`
	Scroll int `json:"scroll"`
}

const pageScript = `JSON.stringify({
  numbers: [...document.querySelectorAll('[data-k]')].map(e => [e.dataset.k, e.textContent]),
  shares: [...document.querySelectorAll('[data-p]')].map(e => [e.dataset.p, e.textContent]),
  charts: [...document.querySelectorAll('svg[data-chart]')].map(s => ({
    chart: s.dataset.chart,
    parts: s.querySelectorAll('rect.kept, rect.removed, rect.other, rect.edited, rect[class^="s"]').length,
    thresholds: s.querySelectorAll('line.threshold').length,
    children: s.children.length,
    points: s.querySelectorAll('circle.pt').length,
    estimates: s.querySelectorAll('circle.pt.est').length,
    docs: [...s.querySelectorAll('circle.pt')].map(c => c.dataset.docs)})),
  width: document.documentElement.clientWidth,
  scroll: document.documentElement.scrollWidth})`

// TestAuditReportInBrowser opens the demo's report.html in headless
// Chromium: no console errors, no request but the file itself, an SVG
// with drawn parts for every chart, and every number shown equal to the
// JSON the audit prints (`audit RUN --html F --json`).
func TestAuditReportInBrowser(t *testing.T) {
	run := demoRunDir(t)
	report := filepath.Join(run, "report.html")
	if _, err := os.Stat(report); err != nil {
		t.Fatalf("winnow demo wrote no report: %v", err)
	}
	out, err := runCLI(t, "audit", run, "--html", filepath.Join(t.TempDir(), "again.html"), "--json")
	if err != nil {
		t.Fatal(err)
	}
	var js map[string]any
	if err := json.Unmarshal([]byte(out), &js); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	tab, ev := browser(t)
	url := "file://" + report
	if err := chromedp.Do(tab, chromedp.Navigate(url)); err != nil {
		t.Fatal(err)
	}
	raw, err := chromedp.Run(tab, chromedp.Evaluate[string](pageScript))
	if err != nil {
		t.Fatal(err)
	}
	var pd pageData
	if err := json.Unmarshal([]byte(raw), &pd); err != nil {
		t.Fatal(err)
	}
	reqs := ev.checkOnlyPage(t, url)
	if pd.Scroll > pd.Width {
		t.Errorf("the page scrolls sideways at 1280 px (%d > %d)", pd.Scroll, pd.Width)
	}

	t.Logf("%d numbers, %d charts, requests %q", len(pd.Numbers), len(pd.Charts), reqs)
	// Every number shown equals the JSON.
	if len(pd.Numbers) < 20 {
		t.Fatalf("only %d numbers marked in the page", len(pd.Numbers))
	}
	for _, n := range pd.Numbers {
		want, ok := lookupJSON(js, n[0])
		if !ok {
			t.Errorf("number %q: no such value in the JSON", n[0])
			continue
		}
		got, err := strconv.ParseInt(strings.ReplaceAll(n[1], ",", ""), 10, 64)
		if err != nil || got != want {
			t.Errorf("%s: page shows %q, JSON %d", n[0], n[1], want)
		}
	}

	checkShares(t, js, pd.Shares)

	// Every chart of the JSON is drawn, with its parts.
	charts := map[string]int{}
	for i, c := range pd.Charts {
		charts[c.Chart] = i
		if c.Children == 0 {
			t.Errorf("chart %s has no SVG elements", c.Chart)
		}
	}
	need := func(name string, parts, thresholds int) {
		i, ok := charts[name]
		if !ok {
			t.Errorf("chart %s missing", name)
			return
		}
		c := pd.Charts[i]
		if c.Parts != parts || c.Thresholds != thresholds {
			t.Errorf("chart %s: %d parts %d thresholds, want %d and %d", name, c.Parts, c.Thresholds, parts, thresholds)
		}
	}
	for _, f := range js["flow"].([]any) {
		fm := f.(map[string]any)
		parts := 0
		kept := jnum(fm["docs_out"]) - jnum(fm["edited"])
		if fm["stage"] == "write" {
			kept = jnum(fm["docs_in"])
		}
		for _, v := range []int64{kept, jnum(fm["edited"]), jnum(fm["dropped"])} {
			if v > 0 {
				parts++
			}
		}
		need("flow:"+fm["stage"].(string), parts, 0)
	}
	for _, r := range js["rules"].([]any) {
		rm := r.(map[string]any)
		need("rule:"+rm["stage"].(string)+"/"+rm["rule"].(string), 1, 0)
	}
	for _, s := range js["sources"].([]any) {
		sm := s.(map[string]any)
		parts := 0
		if jnum(sm["to_output"]) > 0 {
			parts++
		}
		parts += len(sm["removed"].([]any))
		need("source:"+sm["source"].(string), parts, 0)
	}
	hists, _ := js["histograms"].([]any)
	if len(hists) == 0 {
		t.Fatal("no histograms in the JSON")
	}
	for _, h := range hists {
		hm := h.(map[string]any)
		parts := 0
		for _, k := range []string{"kept", "removed", "other"} {
			for _, c := range hm[k].([]any) {
				if jnum(c) > 0 {
					parts++
				}
			}
		}
		if hm["constant"] == true {
			continue // listed, not drawn
		}
		need("hist:"+hm["stage"].(string)+"."+hm["metric"].(string), parts, len(hm["thresholds"].([]any)))
	}

	// Every what-if sweep is drawn: one point per sweep value at the
	// documents the JSON says reach the output, hollow where the JSON
	// says the point is not exact, and the run's limit marked.
	wi, _ := js["whatif"].(map[string]any)
	sweeps, _ := wi["sweeps"].([]any)
	if len(sweeps) == 0 {
		t.Fatal("no what-if sweeps in the JSON")
	}
	for _, sw := range sweeps {
		sm := sw.(map[string]any)
		name := "whatif:" + sm["stage"].(string) + "/" + sm["key"].(string)
		need(name, 0, 1)
		i, ok := charts[name]
		if !ok {
			continue
		}
		c := pd.Charts[i]
		var docs []string
		est, run := 0, false
		for _, p := range sm["points"].([]any) {
			pm := p.(map[string]any)
			docs = append(docs, strconv.FormatInt(jnum(pm["docs_kept"]), 10))
			if pm["exact"] != true {
				est++
			}
			if pm["value"] == sm["run_limit"] {
				run = jnum(pm["docs_kept"]) == jnum(sm["docs_kept_run"])
			}
		}
		if c.Points != len(docs) || c.Estimates != est || strings.Join(c.Docs, " ") != strings.Join(docs, " ") {
			t.Errorf("chart %s: %d points (%d hollow) at %q, JSON %d (%d estimates) at %q", name, c.Points, c.Estimates, c.Docs, len(docs), est, docs)
		}
		if !run {
			t.Errorf("%s: the run's own limit is not a point of its sweep, or gives other than the run's documents", name)
		}
	}
	// At the run's own limits nothing changes: the engine reproduces the
	// run, so each sweep's run point equals the documents that reached
	// the writer (the flow's "write" row; a mix may sample fewer).
	var toWriter int64 = -1
	for _, f := range js["flow"].([]any) {
		if fm := f.(map[string]any); fm["stage"] == "write" {
			toWriter = jnum(fm["docs_in"])
		}
	}
	for _, sw := range sweeps {
		sm := sw.(map[string]any)
		if got := jnum(sm["docs_kept_run"]); got != toWriter {
			t.Errorf("sweep %s.%s: %d documents at the run's limit, %d reached the writer in the run", sm["stage"], sm["key"], got, toWriter)
		}
	}

	// The domain section (when the run has a domain stage) agrees with
	// the JSON too.
	checkDomainReport(t, tab, js)

	// At phone width the page stays one column wide.
	if err := chromedp.Do(tab, chromedp.EmulateViewport(390, 844, chromedp.EmulateMobile)); err != nil {
		t.Fatal(err)
	}
	raw, err = chromedp.Run(tab, chromedp.Evaluate[string](pageScript))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal([]byte(raw), &pd); err != nil {
		t.Fatal(err)
	}
	if pd.Scroll > pd.Width+1 {
		t.Errorf("at 390 px the page is %d px wide", pd.Scroll)
	}
}

func jnum(v any) int64 {
	f, _ := v.(float64)
	return int64(f)
}

// lookupJSON resolves a data-k key of the report in the audit JSON.
func lookupJSON(js map[string]any, key string) (int64, bool) {
	parts := strings.SplitN(key, ".", 2)
	list := func(name, field, val string) map[string]any {
		l, _ := js[name].([]any)
		for _, e := range l {
			if m, ok := e.(map[string]any); ok && m[field] == val {
				return m
			}
		}
		return nil
	}
	field := func(m map[string]any, f string) (int64, bool) {
		if m == nil {
			return 0, false
		}
		v, ok := m[f].(float64)
		return int64(v), ok
	}
	switch parts[0] {
	case "totals":
		t, _ := js["totals"].(map[string]any)
		return field(t, parts[1])
	case "error_count":
		return field(js, "error_count")
	case "removed":
		var n int64
		for _, f := range js["flow"].([]any) {
			n += jnum(f.(map[string]any)["dropped"])
		}
		return n, true
	case "flow":
		i := strings.LastIndex(parts[1], ".")
		return field(list("flow", "stage", parts[1][:i]), parts[1][i+1:])
	case "rule":
		i := strings.LastIndex(parts[1], ".")
		label, f := parts[1][:i], parts[1][i+1:]
		for _, r := range js["rules"].([]any) {
			rm := r.(map[string]any)
			if rm["stage"].(string)+"/"+rm["rule"].(string)+"/"+rm["action"].(string) == label {
				return field(rm, f)
			}
		}
		return 0, false
	case "source":
		for _, s := range js["sources"].([]any) {
			sm := s.(map[string]any)
			name := sm["source"].(string)
			if !strings.HasPrefix(parts[1], name+".") {
				continue
			}
			rest := strings.TrimPrefix(parts[1], name+".")
			if st, ok := strings.CutPrefix(rest, "removed."); ok {
				for _, rc := range sm["removed"].([]any) {
					if rm := rc.(map[string]any); rm["stage"] == st {
						return jnum(rm["docs"]), true
					}
				}
				return 0, true
			}
			return field(sm, rest)
		}
		return 0, false
	case "hist":
		for _, h := range js["histograms"].([]any) {
			hm := h.(map[string]any)
			if p := hm["stage"].(string) + "." + hm["metric"].(string) + "."; strings.HasPrefix(parts[1], p) {
				return field(hm, strings.TrimPrefix(parts[1], p))
			}
		}
		return 0, false
	case "whatif":
		// whatif.STAGE/KEY/POINT.FIELD
		i := strings.LastIndex(parts[1], ".")
		id, f := parts[1][:i], parts[1][i+1:]
		j := strings.LastIndex(id, "/")
		k, err := strconv.Atoi(id[j+1:])
		wi, _ := js["whatif"].(map[string]any)
		sweeps, _ := wi["sweeps"].([]any)
		for _, sw := range sweeps {
			sm := sw.(map[string]any)
			if sm["stage"].(string)+"/"+sm["key"].(string) != id[:j] {
				continue
			}
			pts := sm["points"].([]any)
			if err != nil || k < 0 || k >= len(pts) {
				return 0, false
			}
			return field(pts[k].(map[string]any), f)
		}
		return 0, false
	case "contam":
		c, _ := js["contamination"].(map[string]any)
		if c == nil {
			return 0, false
		}
		if parts[1] == "docs_affected" {
			return field(c, "docs_affected")
		}
		if parts[1] == "items_contaminated" {
			var n int64
			for _, e := range c["evals"].([]any) {
				n += jnum(e.(map[string]any)["items_contaminated"])
			}
			return n, true
		}
		i := strings.LastIndex(parts[1], ".")
		for _, e := range c["evals"].([]any) {
			if em := e.(map[string]any); em["name"] == parts[1][:i] {
				return field(em, parts[1][i+1:])
			}
		}
	}
	return 0, false
}

// TestDemoReportScreenshot renders the demo's report in the browser at
// 1280 px and checks the picture is a real page (the right size, not one
// blank colour). With WINNOW_SCREENSHOT=1 it also writes the picture to
// docs/audit-report.png (and, with WINNOW_SCREENSHOT_PHONE=FILE, a 390 px
// wide phone view):
//
//	WINNOW_SCREENSHOT=1 go test ./cmd/winnow -run TestDemoReportScreenshot
func TestDemoReportScreenshot(t *testing.T) {
	run := demoRunDir(t)
	tab, _ := browser(t)
	shot := func(w, h int64, mobile bool, path string, full bool) {
		opts := []chromedp.EmulateViewportOption{}
		if mobile {
			opts = append(opts, chromedp.EmulateMobile, chromedp.EmulateScale(2))
		}
		if err := chromedp.Do(tab, chromedp.EmulateViewport(w, h, opts...), chromedp.Navigate("file://"+filepath.Join(run, "report.html"))); err != nil {
			t.Fatal(err)
		}
		var pic []byte
		var err error
		if full {
			pic, err = chromedp.Run(tab, chromedp.FullScreenshot(100))
		} else {
			pic, err = chromedp.Run(tab, chromedp.CaptureScreenshot())
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, pic, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", path)
	}
	out := filepath.Join(t.TempDir(), "report.png")
	if os.Getenv("WINNOW_SCREENSHOT") != "" {
		out = filepath.Join("..", "..", "docs", "audit-report.png")
	}
	shot(1280, 2000, false, out, false)
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("screenshot is not a PNG: %v", err)
	}
	if b := img.Bounds(); b.Dx() != 1280 || b.Dy() != 2000 {
		t.Errorf("screenshot is %dx%d, want 1280x2000", b.Dx(), b.Dy())
	}
	colours := map[[3]uint32]bool{}
	for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y += 7 {
		for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x += 7 {
			r, g, b, _ := img.At(x, y).RGBA()
			colours[[3]uint32{r >> 8, g >> 8, b >> 8}] = true
		}
	}
	if len(colours) < 20 {
		t.Errorf("screenshot has %d colours: the page did not render", len(colours))
	}
	if p := os.Getenv("WINNOW_SCREENSHOT_PHONE"); p != "" {
		shot(390, 844, true, p, true)
	}
}

// The demo's mix is capped by its scarcest source: audit's headline says,
// per source, how many tokens the output left out and why, with the
// numbers of the manifest's mix section (used + left out = available).
func TestAuditHeadlineLeftOut(t *testing.T) {
	run := demoRunDir(t)
	out, err := runCLI(t, "audit", run)
	if err != nil {
		t.Fatal(err)
	}
	m, err := record.ReadManifest(run)
	if err != nil {
		t.Fatal(err)
	}
	rep := m.MixReport()
	if rep == nil {
		t.Fatal("demo run has no mix section")
	}
	lines := 0
	for _, s := range rep.Sources {
		if s.Used+s.LeftOut != s.Available && s.Used <= s.Available {
			t.Errorf("%s: used %d + left out %d != available %d", s.Source, s.Used, s.LeftOut, s.Available)
		}
		if s.LeftOut == 0 {
			continue
		}
		lines++
		want := fmt.Sprintf("left out of the output: %s: %d of %d tokens left out", s.Source, s.LeftOut, s.Available)
		if !strings.Contains(out, want) || !strings.Contains(out, s.LeftOutWhy) {
			t.Errorf("audit headline lacks %q (%s):\n%s", want, s.LeftOutWhy, out[:min(len(out), 1500)])
		}
	}
	if lines == 0 {
		t.Errorf("the capped demo mix left nothing out: %+v", rep.Sources)
	}
	// The audit's write row shows the manifest's: documents in, left out
	// entirely (dropped), written in part (edited), with a piece written.
	js, err := runCLI(t, "audit", run, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var sum struct {
		Flow []struct {
			Stage   string `json:"stage"`
			DocsIn  int64  `json:"docs_in"`
			DocsOut int64  `json:"docs_out"`
			Dropped int64  `json:"dropped"`
			Edited  int64  `json:"edited"`
		} `json:"flow"`
	}
	if err := json.Unmarshal([]byte(js), &sum); err != nil {
		t.Fatal(err)
	}
	w, mw := sum.Flow[len(sum.Flow)-1], m.Stages[len(m.Stages)-1]
	if w.Stage != "write" || w.DocsIn != mw.DocsIn || w.DocsOut != mw.DocsOut || w.Dropped != mw.Dropped || w.Edited != mw.Edited ||
		w.Dropped == 0 || w.DocsIn-w.Dropped != w.DocsOut {
		t.Errorf("audit write row %+v, manifest %+v", w, mw)
	}
}

// checkShares compares every share the page shows (data-p: docs, bytes
// and tokens as shares of a stage's input) with the JSON value, to the
// decimals shown.
func checkShares(t *testing.T, js map[string]any, shares [][2]string) {
	t.Helper()
	kinds := map[string]int{}
	for _, sh := range shares {
		want, ok := lookupShare(js, sh[0])
		if !ok {
			t.Errorf("share %q: no such value in the JSON", sh[0])
			continue
		}
		text := strings.TrimSuffix(sh[1], "%")
		got, err := strconv.ParseFloat(text, 64)
		decimals := 0
		if i := strings.IndexByte(text, '.'); i >= 0 {
			decimals = len(text) - i - 1
		}
		if err != nil || math.Abs(got-100*want) > 0.5*math.Pow(10, -float64(decimals))+1e-9 {
			t.Errorf("%s: page shows %q, JSON %v", sh[0], sh[1], want)
		}
		kinds[sh[0][strings.LastIndex(sh[0], ".")+1:]]++
	}
	t.Logf("%d shares checked: %v", len(shares), kinds)
	for _, k := range []string{"share", "bytes_share", "dropped_share"} {
		if kinds[k] == 0 {
			t.Errorf("the page shows no %s (shares shown: %v)", k, kinds)
		}
	}
}

// lookupShare finds a share in the audit JSON: flow.STAGE.FIELD or
// rule.STAGE/RULE/ACTION.FIELD.
func lookupShare(js map[string]any, key string) (float64, bool) {
	kind, rest, _ := strings.Cut(key, ".")
	i := strings.LastIndex(rest, ".")
	if i < 0 {
		return 0, false
	}
	label, f := rest[:i], rest[i+1:]
	for _, e := range js[map[string]string{"flow": "flow", "rule": "rules"}[kind]].([]any) {
		m := e.(map[string]any)
		l := m["stage"].(string)
		if kind == "rule" {
			l += "/" + m["rule"].(string) + "/" + m["action"].(string)
		}
		if l == label {
			v, ok := m[f].(float64)
			return v, ok
		}
	}
	return 0, false
}
