package audit

import (
	"fmt"
	"math"
	"strings"
	"time"
)

// The report's what-if section: for every threshold key of every
// threshold stage, a short sweep of the key's limit around the run's
// value, evaluated by the what-if engine (RunWhatIf) in one walk over the
// stored metrics, so it costs one scenario per point and document.

// ReportWhatIf is the report's what-if section.
type ReportWhatIf struct {
	Sweeps []ReportSweep `json:"sweeps"`
	// TokensKnown is false when the run counted no tokens.
	TokensKnown bool `json:"tokens_known"`
	// Skipped lists thresholds not swept (over the report's budget).
	Skipped []string `json:"skipped"`
	// MaxSweeps is the budget of keys swept for this run's size.
	MaxSweeps int `json:"max_sweeps"`
	// Seconds is the time the sweeps took.
	Seconds float64  `json:"seconds"`
	Notes   []string `json:"notes"`
}

// ReportSweep is one threshold key's sweep.
type ReportSweep struct {
	Stage string `json:"stage"`
	Key   string `json:"key"`
	// Rules are the rules the key sets, with their metric and test.
	Rules    []string `json:"rules"`
	Metric   string   `json:"metric"`
	KeepWhen string   `json:"keep_when"`
	// RunLimit is the run's value; Fraction is true for a limit on a
	// 0..1 metric (swept in steps), false for counts (multiples).
	RunLimit    float64      `json:"run_limit"`
	Fraction    bool         `json:"fraction"`
	DocsKeptRun int64        `json:"docs_kept_run"`
	Points      []SweepPoint `json:"points"`
}

// Report sweep budget.
const (
	// reportMaxSweeps bounds the keys swept, and reportSweepBudget the
	// point-by-document evaluations (each about a microsecond on the demo,
	// so about ten seconds at most): every point is a scenario evaluated
	// on every document of the run.
	reportMaxSweeps   = 40
	reportSweepBudget = 10_000_000
	// reportSweepPoints is the points per sweep (the run's value included).
	reportSweepPoints = 9
)

// sweepValues returns the points of one key's sweep around the run's
// limit: steps of 0.05 (0.025 near the ends) within 0..1 for a fraction,
// quarters of the limit up to twice it for a count (whole numbers when
// the limit is one), 0..8 for a count limit of 0.
func sweepValues(limit float64, fraction bool) []float64 {
	n := reportSweepPoints
	var vals []float64
	switch {
	case fraction:
		step := 0.05
		if limit < 0.2 || limit > 0.8 {
			step = 0.025
		}
		start := limit - float64(n/2)*step
		start = math.Max(0, math.Min(start, 1-float64(n-1)*step))
		for i := 0; i < n; i++ {
			vals = append(vals, roundTo(start+float64(i)*step, 6))
		}
	case limit == 0:
		for i := 0; i < n; i++ {
			vals = append(vals, float64(i))
		}
	default:
		whole := limit == math.Trunc(limit)
		for i := 1; i < n; i++ {
			v := limit * float64(i) / float64(n/2)
			if whole {
				v = math.Round(v)
			} else {
				v = roundTo(v, 4)
			}
			vals = append(vals, v)
		}
	}
	vals = append(vals, limit)
	// Sort and drop repeats (whole-number rounding of a small limit).
	for i := 1; i < len(vals); i++ {
		for j := i; j > 0 && vals[j] < vals[j-1]; j-- {
			vals[j], vals[j-1] = vals[j-1], vals[j]
		}
	}
	out := vals[:0]
	for i, v := range vals {
		if i == 0 || v != out[len(out)-1] {
			out = append(out, v)
		}
	}
	return out
}

// buildWhatIf sweeps the run's threshold keys.
func buildWhatIf(r *Run, s *Summary) (*ReportWhatIf, error) {
	start := time.Now()
	wi := &ReportWhatIf{Sweeps: []ReportSweep{}, Skipped: []string{}, Notes: []string{}}
	hist := map[string]*Histogram{}
	for _, h := range s.Histograms {
		hist[h.Stage+"\x00"+h.Metric] = h
	}
	maxSweeps := reportMaxSweeps
	if d := s.Totals.DocsIn; d > 0 {
		maxSweeps = int(min(int64(maxSweeps), max(1, reportSweepBudget/(d*reportSweepPoints))))
	}
	wi.MaxSweeps = maxSweeps
	var specs []string
	for _, st := range r.Steps {
		if st.Global || st.MetricsPath == "" || st.Spec == nil {
			continue
		}
		rules, err := r.StepRules(st)
		if err != nil {
			continue // not a threshold stage
		}
		var keys []string
		for _, ru := range rules {
			if ru.Key == "" || !ru.Enabled || contains(keys, ru.Key) {
				continue
			}
			keys = append(keys, ru.Key)
		}
		for _, key := range keys {
			if len(wi.Sweeps) >= maxSweeps {
				wi.Skipped = append(wi.Skipped, st.Name+"."+key)
				continue
			}
			sw := ReportSweep{Stage: st.Name, Key: key, Rules: []string{}}
			for _, ru := range rules {
				if ru.Key == key {
					sw.Rules = append(sw.Rules, ru.Name)
					if sw.Metric == "" {
						sw.Metric, sw.KeepWhen, sw.RunLimit = ru.Metric, ru.Cmp.String(), ru.Limit
					}
				}
			}
			l := sw.RunLimit
			sw.Fraction = l >= 0 && l <= 1 && l != math.Trunc(l)
			if h := hist[st.Name+"\x00"+sw.Metric]; h != nil && l >= 0 && l <= 1 && h.Min >= 0 && h.Max <= 1 {
				sw.Fraction = true
			}
			// Keep only values the stage accepts (parameter ranges).
			var vals []string
			for _, v := range sweepValues(l, sw.Fraction) {
				ps := parsedSet{raw: st.Name + "." + key + "=" + fmtValue(v), stage: st.Name, key: key, value: fmtValue(v)}
				if _, _, _, err := r.scenarioRules([]parsedSet{ps}); err == nil {
					vals = append(vals, fmtValue(v))
				}
			}
			if len(vals) < 2 {
				wi.Notes = append(wi.Notes, fmt.Sprintf("%s.%s: the stage accepts no numeric limits around %s (an on/off key?): not swept", st.Name, key, fmtValue(l)))
				continue
			}
			specs = append(specs, st.Name+"."+key+"="+strings.Join(vals, ","))
			wi.Sweeps = append(wi.Sweeps, sw)
		}
	}
	if len(specs) == 0 {
		wi.Seconds = roundTo(time.Since(start).Seconds(), 3)
		return wi, nil
	}
	w, err := RunWhatIf(r, WhatIfOptions{Sweeps: specs, Samples: 1})
	if err != nil {
		return nil, fmt.Errorf("what-if sweeps of the report: %w", err)
	}
	if len(w.Sweeps) != len(wi.Sweeps) {
		return nil, fmt.Errorf("what-if sweeps of the report: %d curves for %d sweeps", len(w.Sweeps), len(wi.Sweeps))
	}
	wi.TokensKnown = w.TokensKnown
	for i := range wi.Sweeps {
		wi.Sweeps[i].Points = w.Sweeps[i].Points
		wi.Sweeps[i].DocsKeptRun = r.writeCounters().DocsIn
		for _, p := range w.Sweeps[i].Points {
			if p.Value == wi.Sweeps[i].RunLimit {
				wi.Sweeps[i].DocsKeptRun = p.DocsKept
			}
		}
	}
	for _, c := range w.Checks {
		if c.Mismatches > 0 {
			wi.Notes = append(wi.Notes, fmt.Sprintf("stage %s: %s of %s recorded decisions differ from its rules at the run's limits: its sweep is unreliable", c.Stage, Group(c.Mismatches), Group(c.Rows)))
		}
	}
	wi.Seconds = roundTo(time.Since(start).Seconds(), 3)
	return wi, nil
}

func sweepID(sw *ReportSweep) string { return sw.Stage + "/" + sw.Key }

func (rep *Report) whatifSection(h *htmlw) {
	wi := rep.Summary.WhatIf
	h.s(`<section id="whatif"><h2>What if a limit moved</h2>`)
	if wi == nil || len(wi.Sweeps) == 0 {
		h.s(`<p>No threshold stage stored metrics in this run: nothing to sweep.</p>`)
		for _, n := range notesOf(wi) {
			h.w(`<p class="note">Note: %s</p>`, esc(n))
		}
		h.s(`</section>`)
		return
	}
	h.w(`<p class="note">Documents reaching the output if one limit had another value, all else as in the run, recomputed from the stored metrics (as <code>winnow whatif --sweep</code> does; %d sweeps). Each chart: documents to the output (up) against the limit (across); the dashed line is the run's limit. Hollow points are estimates: a document would reach a stage that never measured it, or a global stage's input changes. Rules switched off in the run are not swept.</p>`,
		len(wi.Sweeps))
	if len(wi.Skipped) > 0 {
		h.w(`<p class="note warn">Only the first %d thresholds are swept, to keep the report quick to build; not swept: %s (use <code>winnow whatif --sweep</code>).</p>`,
			wi.MaxSweeps, esc(strings.Join(wi.Skipped, ", ")))
	}
	stage := ""
	for i := range wi.Sweeps {
		sw := &wi.Sweeps[i]
		if sw.Stage != stage {
			if stage != "" {
				h.s(`</div>`)
			}
			stage = sw.Stage
			h.w(`<h3>%s</h3><div class="grid">`, esc(stage))
		}
		id := sweepID(sw)
		h.w(`<figure><figcaption><b>%s</b> <span class="dim">· %s: keep when %s %s (run: %s)</span></figcaption>%s`, esc(sw.Key),
			esc(strings.Join(sw.Rules, ", ")), esc(sw.Metric), esc(sw.KeepWhen), esc(fmtValue(sw.RunLimit)), sweepSVG(sw))
		h.w(`<div class="wt"><table><thead><tr><th class="r">limit</th><th class="r">to output</th><th class="r" title="change against the run">±</th>`)
		if wi.TokensKnown {
			h.s(`<th class="r">tokens</th>`)
		}
		h.w(`<th class="r" title="documents %s removes">removed</th></tr></thead><tbody>`, esc(sw.Stage))
		for k, p := range sw.Points {
			key := fmt.Sprintf("whatif.%s/%d", id, k)
			cls, tag := "", ""
			if p.Value == sw.RunLimit {
				cls = ` class="run"`
				tag = `<span class="tag">run</span> `
			}
			if !p.Exact {
				tag += `<span class="tag est" title="` + esc(Group(p.Estimated)+" document(s) rest on assumptions") + `">est.</span> `
			}
			h.w(`<tr%s><td class="r">%s%s</td><td class="r">%s</td><td class="r">%s</td>`, cls, tag, esc(fmtValue(p.Value)),
				num(key+".docs_kept", p.DocsKept), esc(signedInt(p.DocsKept-sw.DocsKeptRun)))
			if wi.TokensKnown {
				h.w(`<td class="r">%s</td>`, num(key+".tokens_kept", p.TokensKept))
			}
			h.w(`<td class="r">%s</td></tr>`, num(key+".removed_by_stage", p.RemovedByStage))
		}
		h.s(`</tbody></table></div></figure>`)
	}
	h.s(`</div>`)
	for _, n := range notesOf(wi) {
		h.w(`<p class="note">Note: %s</p>`, esc(n))
	}
	h.s(`</section>`)
}

func notesOf(wi *ReportWhatIf) []string {
	if wi == nil {
		return nil
	}
	return wi.Notes
}

func signedInt(v int64) string {
	switch {
	case v > 0:
		return "+" + Group(v)
	case v < 0:
		return "−" + Group(-v)
	}
	return "0"
}

// Sweep chart layout in SVG user units (the histogram's size, so both
// share the grid).
const (
	wW, wH          = 360.0, 190.0
	wLeft, wRight   = 46.0, 14.0
	wTop, wBottom   = 24.0, 32.0
	wPointRadius    = 3.5
	wMaxTickLabels  = 5
	wValuePadFactor = 0.08 // vertical room above and below the curve
)

// sweepSVG draws documents reaching the output against the limit: one
// point per sweep value (hollow for estimates), the run's limit dashed.
func sweepSVG(sw *ReportSweep) string {
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="hist sweep" data-chart="whatif:%s" viewBox="0 0 %g %g" role="img" aria-label="%s">`, esc(sweepID(sw)), wW, wH,
		esc("documents reaching the output against "+sw.Stage+"."+sw.Key))
	ps := sw.Points
	lo, hi := ps[0].Value, ps[len(ps)-1].Value
	var ylo, yhi int64 = ps[0].DocsKept, ps[0].DocsKept
	for _, p := range ps {
		ylo, yhi = min(ylo, p.DocsKept), max(yhi, p.DocsKept)
	}
	pad := int64(math.Ceil(float64(yhi-ylo) * wValuePadFactor))
	if yhi == ylo {
		pad = max(1, yhi/10)
	}
	ylo, yhi = max(0, ylo-pad), yhi+pad
	plotL, plotR, plotT, plotB := wLeft, wW-wRight, wTop, wH-wBottom
	xOf := func(v float64) float64 {
		if hi <= lo {
			return (plotL + plotR) / 2
		}
		return plotL + (plotR-plotL)*(v-lo)/(hi-lo)
	}
	yOf := func(c int64) float64 { return plotB - (plotB-plotT)*float64(c-ylo)/float64(yhi-ylo) }
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%g" x2="%g" y2="%g"/>`, plotL, plotB, plotR, plotB)
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%g" x2="%g" y2="%g"/>`, plotL, plotT, plotL, plotB)
	for _, c := range []int64{ylo, yhi} {
		fmt.Fprintf(&b, `<text class="lbl" x="%g" y="%.2f" text-anchor="end" font-size="%g">%s</text>`, plotL-3, yOf(c)+hFont*0.35, hFont, esc(shortCount(c)))
	}
	// Run's limit.
	x := xOf(sw.RunLimit)
	fmt.Fprintf(&b, `<line class="threshold" x1="%.2f" y1="%g" x2="%.2f" y2="%g"><title>%s</title></line>`, x, plotT-4, x, plotB,
		esc(fmt.Sprintf("run: %s = %s, %s documents to the output", sw.Key, fmtValue(sw.RunLimit), Group(sw.DocsKeptRun))))
	anchor, lx := "start", x+3
	if x > wW*0.6 {
		anchor, lx = "end", x-3
	}
	fmt.Fprintf(&b, `<text class="tlbl" x="%.2f" y="%g" text-anchor="%s" font-size="%g">run %s</text>`, lx, plotT-6, anchor, hFont, esc(shortNum(sw.RunLimit)))
	// X ticks: every point when few, else evenly spaced ones.
	every := (len(ps) + wMaxTickLabels - 1) / wMaxTickLabels
	for i, p := range ps {
		if i%every != 0 && i != len(ps)-1 {
			continue
		}
		if i == len(ps)-1 && i%every != 0 && len(ps) > 1 && xOf(p.Value)-xOf(ps[i-i%every].Value) < 30 {
			continue // too close to the previous label
		}
		px := xOf(p.Value)
		fmt.Fprintf(&b, `<line class="axis" x1="%.2f" y1="%g" x2="%.2f" y2="%g"/>`, px, plotB, px, plotB+hTick)
		fmt.Fprintf(&b, `<text class="lbl" x="%.2f" y="%g" text-anchor="middle" font-size="%g">%s</text>`, px, plotB+hTick+hFont, hFont, esc(shortNum(p.Value)))
	}
	fmt.Fprintf(&b, `<text class="lbl dim" x="%g" y="%g" text-anchor="end" font-size="%g">%s</text>`, plotR, wH-3, hFont*0.9, esc(sw.Key))
	// The curve and its points.
	var pts []string
	for _, p := range ps {
		pts = append(pts, fmt.Sprintf("%.2f,%.2f", xOf(p.Value), yOf(p.DocsKept)))
	}
	fmt.Fprintf(&b, `<polyline class="curve" points="%s"/>`, strings.Join(pts, " "))
	for _, p := range ps {
		class, what := "pt", "exact"
		if !p.Exact {
			class, what = "pt est", fmt.Sprintf("estimate, %s document(s) rest on assumptions", Group(p.Estimated))
		}
		fmt.Fprintf(&b, `<circle class="%s" data-v="%s" data-docs="%d" cx="%.2f" cy="%.2f" r="%g"><title>%s</title></circle>`, class, esc(fmtValue(p.Value)), p.DocsKept,
			xOf(p.Value), yOf(p.DocsKept), wPointRadius, esc(fmt.Sprintf("%s = %s: %s documents to the output (%s)", sw.Key, fmtValue(p.Value), Group(p.DocsKept), what)))
	}
	b.WriteString(`</svg>`)
	return b.String()
}
