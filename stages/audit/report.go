package audit

import (
	"bytes"
	"fmt"
	"io"
	"strings"

	"winnow/stages/fsio"
)

// Report is the HTML audit: the summary with histograms and a sample of
// removed documents per rule.
type Report struct {
	Summary *Summary
	// Samples holds, per rule label ("stage/rule"), the documents shown.
	Samples map[string][]*Sample
	Notes   []string
}

// ReportOptions tune BuildReport.
type ReportOptions struct {
	// SampleIDs are listed per rule in the table (default 3).
	SampleIDs int
	// SampleDocs are shown with their text per rule (default 3).
	SampleDocs int
}

// BuildReport summarizes the run with histograms and recovers the text
// of a few removed documents per rule.
func BuildReport(r *Run, opt ReportOptions) (*Report, error) {
	if opt.SampleIDs <= 0 {
		opt.SampleIDs = 3
	}
	if opt.SampleDocs <= 0 {
		opt.SampleDocs = 3
	}
	s, trails, err := Summarize(r, SummaryOptions{Samples: opt.SampleIDs, Histograms: true, KeepTrails: opt.SampleDocs,
		DomainDocs: reportDomainDocs, DomainTrails: true})
	if err != nil {
		return nil, err
	}
	r.domainTexts(s.Domain)
	if s.WhatIf, err = buildWhatIf(r, s); err != nil {
		return nil, err
	}
	rep := &Report{Summary: s, Samples: map[string][]*Sample{}}
	var picks []pick
	var labels []string
	for _, label := range sortedKeys(trails) {
		stage, rule, _ := strings.Cut(label, "/")
		for _, t := range trails[label] {
			for i, st := range r.Steps {
				if st.Name != stage {
					continue
				}
				for _, rc := range t.Steps[i].Recs {
					if rc.Rule == rule {
						picks = append(picks, pick{t: t, step: i, rec: rc})
						labels = append(labels, label)
					}
				}
			}
		}
	}
	samples := r.buildSamples(picks, &rep.Notes)
	for i, sm := range samples {
		rep.Samples[labels[i]] = append(rep.Samples[labels[i]], sm)
	}
	return rep, nil
}

// WriteHTMLFile writes the report atomically.
func (rep *Report) WriteHTMLFile(path string) error {
	var b bytes.Buffer
	if err := rep.WriteHTML(&b); err != nil {
		return err
	}
	if err := fsio.WriteFileAtomic(path, b.Bytes()); err != nil {
		return fmt.Errorf("writing report %s: %w", path, err)
	}
	return nil
}

// reportCSS is the report's only style sheet: system fonts, no external
// resources; tables scroll sideways on narrow screens.
const reportCSS = `
:root{--fg:#1d2430;--dim:#5b6576;--line:#d9dee7;--bg:#fff;--panel:#f5f7fa;--kept:#3f7cc0;--removed:#d2473c;--other:#e0a03a;--edit:#8e6cc4;--side:#fbe3e0}
*{box-sizing:border-box}
body{margin:0;font:15px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif;color:var(--fg);background:var(--bg)}
main{max-width:1240px;margin:0 auto;padding:16px 20px 48px}
h1{font-size:1.55rem;margin:.2em 0 .1em}
h2{font-size:1.2rem;margin:1.8em 0 .5em;padding-bottom:.2em;border-bottom:2px solid var(--line)}
h3{font-size:1rem;margin:1.1em 0 .4em}
p{margin:.4em 0}
.meta,.note{color:var(--dim);font-size:.88rem}
.meta{overflow-wrap:anywhere}
code,pre,.mono{font-family:ui-monospace,"SFMono-Regular",Menlo,Consolas,"DejaVu Sans Mono",monospace;font-size:.86rem}
nav{display:flex;flex-wrap:wrap;gap:6px 14px;margin:10px 0 4px;font-size:.9rem}
nav a{color:var(--kept);text-decoration:none}
.kpis{display:grid;grid-template-columns:repeat(auto-fit,minmax(150px,1fr));gap:10px;margin:14px 0}
.kpi{background:var(--panel);border-radius:8px;padding:10px 12px}
.kpi b{display:block;font-size:1.35rem;font-variant-numeric:tabular-nums}
.kpi>span{color:var(--dim);font-size:.82rem}
.scroll{overflow-x:auto;-webkit-overflow-scrolling:touch}
table{border-collapse:collapse;width:100%;font-size:.88rem;font-variant-numeric:tabular-nums}
th,td{padding:5px 8px;border-bottom:1px solid var(--line);text-align:left;vertical-align:top}
th{background:var(--panel);font-weight:600;white-space:nowrap}
td.r,th.r{text-align:right;white-space:nowrap}
td.nw{white-space:nowrap}
td.ids{min-width:16ch;font-family:ui-monospace,Menlo,Consolas,monospace;font-size:.8rem;color:var(--dim);word-break:break-all}
.bars{display:grid;grid-template-columns:minmax(90px,max-content) 1fr minmax(110px,max-content);gap:6px 10px;align-items:center;margin:8px 0 4px}
.bars .row{display:contents}
.bars .lab{grid-column:1;font-size:.88rem;white-space:nowrap;overflow:hidden;text-overflow:ellipsis}
.bars svg.bar{grid-column:2}
.bars .val{grid-column:3;font-size:.85rem;text-align:right;white-space:nowrap;font-variant-numeric:tabular-nums}
svg.bar{width:100%;height:20px;display:block}
svg.bar .track{fill:var(--panel)}
.kept{fill:var(--kept)}.removed{fill:var(--removed)}.other{fill:var(--other)}.edited{fill:var(--edit)}
.s0{fill:#d2473c}.s1{fill:#e0a03a}.s2{fill:#8e6cc4}.s3{fill:#2f9e8f}.s4{fill:#b8572a}.s5{fill:#c2417a}.s6{fill:#6d7b8c}.s7{fill:#9aa83a}
.legend{display:flex;flex-wrap:wrap;gap:4px 14px;font-size:.82rem;color:var(--dim);margin:4px 0}
.legend i{display:inline-block;width:11px;height:11px;border-radius:2px;margin-right:4px;vertical-align:-1px}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(330px,1fr));gap:14px}
figure{margin:0;background:var(--panel);border-radius:8px;padding:8px 8px 6px}
figcaption{font-size:.84rem;margin:0 2px 4px}
figcaption .dim{color:var(--dim)}
svg.hist{width:100%;height:auto;display:block;background:#fff;border-radius:4px}
svg.hist .axis{stroke:#8a93a3;stroke-width:1}
svg.hist .lbl{fill:#4a5261}
svg.hist .dim{fill:#98a0ad}
svg.hist .removed-side{fill:var(--side)}
svg.hist .threshold{stroke:#1d2430;stroke-width:1.5;stroke-dasharray:4 3}
svg.hist .threshold.off{stroke:#98a0ad;stroke-dasharray:1 3}
svg.hist .tlbl{fill:#1d2430;font-weight:600}
svg.sweep .curve{fill:none;stroke:var(--kept);stroke-width:1.8}
svg.sweep .pt{fill:var(--kept);stroke:var(--kept);stroke-width:1.5}
svg.sweep .pt.est{fill:#fff}
.wt{overflow-x:auto;margin-top:6px}
.wt table{font-size:.78rem;background:#fff}
.wt th,.wt td{padding:2px 5px}
.wt .tag{margin:0 2px 0 0;font-size:.7rem}
.wt tr.run td{font-weight:600}
.tag.est{background:#fdeee3;color:#9a3b12}
details{border:1px solid var(--line);border-radius:8px;margin:8px 0;background:#fff}
details>summary{cursor:pointer;padding:8px 12px;font-weight:600;list-style-position:inside}
details .body{padding:0 12px 10px}
article.sample{border-top:1px solid var(--line);padding:8px 0}
article.sample h4{margin:.2em 0;font-size:.92rem;word-break:break-all}
pre.doc{white-space:pre-wrap;word-wrap:break-word;background:var(--panel);border-radius:6px;padding:8px 10px;max-height:340px;overflow:auto;margin:6px 0}
pre.doc.twin{background:#eef4fb}
mark{background:#ffd54a;color:inherit;border-radius:2px;padding:0 1px}
.tag{display:inline-block;font-size:.75rem;border-radius:10px;padding:0 7px;background:var(--panel);color:var(--dim);margin-left:4px}
.warn{color:#9a3b12}
@media (max-width:600px){main{padding:10px 10px 32px}.scroll table{min-width:640px}td.ids{min-width:30ch}h1{font-size:1.25rem}body{font-size:14px}.bars{display:block}.bars .row{display:grid;grid-template-columns:1fr auto;grid-template-areas:"lab val" "bar bar";gap:1px 8px;margin:0 0 7px}.bars .lab{grid-area:lab}.bars .val{grid-area:val}.bars svg.bar{grid-area:bar;height:14px}.kpi b{font-size:1.1rem}}
`

// htmlw accumulates the page.
type htmlw struct{ b strings.Builder }

func (h *htmlw) w(format string, args ...any) { fmt.Fprintf(&h.b, format, args...) }
func (h *htmlw) s(s string)                   { h.b.WriteString(s) }

// num writes a number the tests can find: data-k names the JSON field.
func num(key string, v int64) string {
	return fmt.Sprintf(`<span class="n" data-k="%s">%s</span>`, esc(key), Group(v))
}

// WriteHTML writes the self-contained page.
func (rep *Report) WriteHTML(out io.Writer) error {
	s := rep.Summary
	h := &htmlw{}
	h.s("<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">")
	h.s(`<meta name="viewport" content="width=device-width, initial-scale=1">`)
	h.w(`<title>winnow audit: %s</title><style>%s</style></head><body><main>`, esc(s.Name), reportCSS+domainCSS)
	h.w(`<header><h1>Audit of run “%s”</h1>`, esc(s.Name))
	h.w(`<p class="meta">%s · winnow %s · config %s`, esc(s.Run), esc(s.ToolVersion), esc(s.ConfigHash))
	if s.Interrupted {
		h.s(` · <b class="warn">interrupted run</b>`)
	}
	h.s(`</p>`)
	var removed int64
	for _, f := range s.Flow {
		removed += f.Dropped
	}
	h.s(`<div class="kpis">`)
	h.w(`<div class="kpi"><b>%s</b><span>documents read</span></div>`, num("totals.docs_in", s.Totals.DocsIn))
	h.w(`<div class="kpi"><b>%s</b><span>documents in the shards</span></div>`, num("totals.docs_out", s.Totals.DocsOut))
	if s.TokenStage != "" {
		h.w(`<div class="kpi"><b>%s</b><span>tokens in the shards</span></div>`, num("totals.tokens_out", s.Totals.TokensOut))
	} else {
		h.s(`<div class="kpi"><b>not counted</b><span>tokens (no output.tokenizer)</span></div>`)
	}
	share := 0.0
	if s.Totals.DocsIn > 0 {
		share = float64(removed) / float64(s.Totals.DocsIn)
	}
	h.w(`<div class="kpi"><b>%s</b><span>documents removed (%s)</span></div>`, num("removed", removed), Percent(share))
	h.w(`<div class="kpi"><b>%s</b><span>input errors</span></div>`, num("error_count", s.ErrorCount))
	if c := s.Contamination; c != nil {
		items := 0
		for _, e := range c.Evals {
			items += e.ItemsContaminated
		}
		h.w(`<div class="kpi"><b>%s</b><span>eval items found in the corpus</span></div>`, num("contam.items_contaminated", int64(items)))
	}
	h.s(`</div>`)
	for _, l := range s.LeftOut {
		h.w(`<p class="note warn">Left out of the output: %s</p>`, esc(l))
	}
	h.s(`</header>`)
	h.w(`<nav><a href="#flow">Flow</a><a href="#rules">Removals by rule</a><a href="#sources">By source</a><a href="#metrics">Metrics</a>%s<a href="#whatif">What-if</a><a href="#contamination">Contamination</a><a href="#samples">Removed documents</a><a href="#inputs">Inputs &amp; errors</a></nav>`, rep.domainNav())

	rep.flowSection(h)
	rep.rulesSection(h)
	rep.sourcesSection(h)
	rep.metricsSection(h)
	rep.domainSection(h)
	rep.whatifSection(h)
	rep.contamSection(h)
	rep.samplesSection(h)
	rep.inputsSection(h)
	h.s(`</main></body></html>` + "\n")
	_, err := io.WriteString(out, h.b.String())
	return err
}

func (rep *Report) flowSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="flow"><h2>Flow, stage by stage</h2>`)
	h.s(`<p class="note">Each bar is the documents entering a stage: kept (blue), edited (purple, still kept) and removed (red).</p>`)
	var maxIn int64 = 1
	for _, f := range s.Flow {
		maxIn = max(maxIn, f.DocsIn)
	}
	h.s(`<div class="bars">`)
	for _, f := range s.Flow {
		kept := f.DocsOut - f.Edited
		if f.Stage == "write" {
			kept = f.DocsIn
		}
		segs := []seg{{float64(max(kept, 0)), "kept", fmt.Sprintf("%s kept", Group(kept))},
			{float64(f.Edited), "edited", fmt.Sprintf("%s edited", Group(f.Edited))},
			{float64(f.Dropped), "removed", fmt.Sprintf("%s removed", Group(f.Dropped))}}
		h.w(`<div class="row"><div class="lab">%s</div>%s<div class="val">%s in · −%s</div></div>`, esc(f.Stage), barSVG(segs, float64(maxIn), "flow:"+f.Stage),
			num("flow."+f.Stage+".docs_in", f.DocsIn), num("flow."+f.Stage+".dropped", f.Dropped))
	}
	h.s(`</div><div class="legend"><span><i class="kept" style="background:var(--kept)"></i>kept</span><span><i style="background:var(--edit)"></i>edited</span><span><i style="background:var(--removed)"></i>removed</span></div>`)
	h.s(`<div class="scroll"><table><thead><tr><th>stage</th><th>kind</th><th class="r">docs in</th><th class="r">docs out</th><th class="r">removed</th><th class="r">edited</th><th class="r">bytes in</th><th class="r">bytes out</th><th class="r">tokens in</th><th class="r">tokens out</th></tr></thead><tbody>`)
	for _, f := range s.Flow {
		h.w(`<tr><td>%s</td><td>%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td></tr>`,
			esc(f.Stage), esc(f.Kind), num("flow."+f.Stage+".docs_in", f.DocsIn), num("flow."+f.Stage+".docs_out", f.DocsOut),
			num("flow."+f.Stage+".dropped", f.Dropped), num("flow."+f.Stage+".edited", f.Edited),
			esc(HumanBytes(f.BytesIn)), esc(HumanBytes(f.BytesOut)), rep.tokCell(&f, "tokens_in", f.TokensIn), rep.tokCell(&f, "tokens_out", f.TokensOut))
	}
	h.s(`</tbody></table></div>`)
	rep.stageSharesTable(h)
	for _, f := range s.Flow {
		if f.Skipped > 0 {
			h.w(`<p class="note">%s: %s of its %s documents in were outside its <code>only:</code> scope (passed untouched, not measured).</p>`,
				esc(f.Stage), num("flow."+f.Stage+".skipped", f.Skipped), num("flow."+f.Stage+".docs_in", f.DocsIn))
		}
	}
	h.s(`</section>`)
}

func (rep *Report) tokCell(f *FlowRow, key string, v int64) string {
	if f.TokensKnown && f.TokensExact {
		return num("flow."+f.Stage+"."+key, v)
	}
	return esc(f.TokensCell(v))
}

func ruleKey(r *RuleRow) string { return "rule." + r.Stage + "/" + r.Rule + "/" + r.Action }

func (rep *Report) rulesSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="rules"><h2>Removals and edits by rule</h2>`)
	if len(s.Rules) == 0 {
		h.s(`<p>Nothing was removed or edited.</p></section>`)
		return
	}
	var maxD int64 = 1
	for i := range s.Rules {
		maxD = max(maxD, s.Rules[i].Docs)
	}
	h.s(`<div class="bars">`)
	for i := range s.Rules {
		r := &s.Rules[i]
		class := "removed"
		if r.Action == "edit" {
			class = "edited"
		}
		h.w(`<div class="row"><div class="lab">%s/<b>%s</b>%s</div>%s<div class="val">%s · %s</div></div>`, esc(r.Stage), esc(r.Rule), actionTag(r.Action),
			barSVG([]seg{{float64(r.Docs), class, Group(r.Docs) + " " + r.Action}}, float64(maxD), "rule:"+r.Label()),
			num(ruleKey(r)+".docs", r.Docs), esc(Percent(r.Share)))
	}
	h.s(`</div>`)
	h.s(`<div class="scroll"><table><thead><tr><th>stage</th><th>rule</th><th>action</th><th class="r">docs</th><th class="r">share of stage docs</th><th class="r">bytes</th><th class="r">share of stage bytes</th><th class="r">tokens</th><th class="r">share of stage tokens</th><th>sample ids</th></tr></thead><tbody>`)
	for i := range s.Rules {
		r := &s.Rules[i]
		tok := esc(r.TokensCell())
		if r.TokensKnownAll() {
			tok = num(ruleKey(r)+".tokens", r.Tokens)
		}
		ids := esc(strings.Join(r.Samples, ", "))
		if ch := changesText(r.Changes); ch != "" && r.Action == "edit" {
			ids = esc(ch) + "<br>" + ids
		}
		h.w(`<tr><td>%s</td><td>%s</td><td>%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="ids">%s</td></tr>`,
			esc(r.Stage), esc(r.Rule), esc(r.Action), num(ruleKey(r)+".docs", r.Docs), pct(ruleKey(r)+".share", &r.Share, true), esc(r.BytesCell()),
			pct(ruleKey(r)+".bytes_share", r.BytesShare, r.BytesExact), tok, pct(ruleKey(r)+".tokens_share", r.TokensShare, true), ids)
	}
	h.s(`</tbody></table></div><p class="note">Shares are of what the stage took in. Bytes marked ~ are estimated from an earlier stage's measurement; tokens marked ≥ leave out removed documents the token stage never measured; the text an edit cuts is never tokenized (not counted).</p></section>`)
}

func actionTag(a string) string {
	if a == "edit" {
		return `<span class="tag">edit</span>`
	}
	return ""
}

func (rep *Report) sourcesSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="sources"><h2>By source</h2>`)
	// One color per stage that removed something.
	var stagesUsed []string
	for _, f := range s.Flow {
		for _, src := range s.Sources {
			for _, rc := range src.Removed {
				if rc.Stage == f.Stage && !contains(stagesUsed, f.Stage) {
					stagesUsed = append(stagesUsed, f.Stage)
				}
			}
		}
	}
	class := func(stage string) string {
		return fmt.Sprintf("s%d", indexOf(stagesUsed, stage)%8)
	}
	var maxD int64 = 1
	for _, src := range s.Sources {
		maxD = max(maxD, src.DocsRead)
	}
	h.s(`<p class="note">Documents read per source: reaching the output (blue) and removed, colored by the stage that removed them.</p><div class="bars">`)
	for _, src := range s.Sources {
		segs := []seg{{float64(src.ToOutput), "kept", Group(src.ToOutput) + " to the output"}}
		for _, rc := range src.Removed {
			segs = append(segs, seg{float64(rc.Docs), class(rc.Stage), Group(rc.Docs) + " removed by " + rc.Stage})
		}
		h.w(`<div class="row"><div class="lab">%s</div>%s<div class="val">%s of %s</div></div>`, esc(src.Source), barSVG(segs, float64(maxD), "source:"+src.Source),
			num("source."+src.Source+".to_output", src.ToOutput), num("source."+src.Source+".docs_read", src.DocsRead))
	}
	h.s(`</div><div class="legend"><span><i style="background:var(--kept)"></i>to output</span>`)
	for _, st := range stagesUsed {
		h.w(`<span><svg width="11" height="11" style="vertical-align:-1px;margin-right:4px"><rect class="%s" width="11" height="11" rx="2"/></svg>%s</span>`, class(st), esc(st))
	}
	h.s(`</div><div class="scroll"><table><thead><tr><th>source</th><th class="r">read</th><th class="r">read errors</th>`)
	for _, st := range stagesUsed {
		h.w(`<th class="r">−%s</th>`, esc(st))
	}
	h.s(`<th class="r">to output</th><th class="r">tokens to output</th><th class="r">in shards</th></tr></thead><tbody>`)
	for _, src := range s.Sources {
		h.w(`<tr><td>%s</td><td class="r">%s</td><td class="r">%s</td>`, esc(src.Source), num("source."+src.Source+".docs_read", src.DocsRead),
			num("source."+src.Source+".read_errors", src.ReadErrors))
		for _, st := range stagesUsed {
			n := int64(0)
			for _, rc := range src.Removed {
				if rc.Stage == st {
					n = rc.Docs
				}
			}
			h.w(`<td class="r">%s</td>`, num("source."+src.Source+".removed."+st, n))
		}
		toks := "n/a"
		if s.TokenStage != "" {
			toks = num("source."+src.Source+".tokens_to_output", src.TokensToOutput)
		}
		shards := "n/a"
		if src.OutputDocs >= 0 {
			shards = num("source."+src.Source+".output_docs", src.OutputDocs)
		}
		h.w(`<td class="r">%s</td><td class="r">%s</td><td class="r">%s</td></tr>`, num("source."+src.Source+".to_output", src.ToOutput), toks, shards)
	}
	h.s(`</tbody></table></div></section>`)
}

func (rep *Report) metricsSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="metrics"><h2>Metric distributions</h2>`)
	if len(s.Histograms) == 0 {
		h.s(`<p>No stage stored metrics in this run.</p></section>`)
		return
	}
	h.s(`<p class="note">Documents each stage decided about (not those already removed). Dashed lines are thresholds; the shaded side is removed. Red: removed by a rule on this metric; orange: removed by another rule of the stage. The narrow bars at the ends count values outside the drawn range.</p>`)
	stage := ""
	var constant []string
	flushConstant := func() {
		if len(constant) > 0 {
			h.w(`<p class="note">Same value for every document: %s.</p>`, esc(strings.Join(constant, "; ")))
			constant = nil
		}
	}
	for _, hg := range s.Histograms {
		if hg.Stage != stage {
			if stage != "" {
				h.s(`</div>`)
				flushConstant()
			}
			stage = hg.Stage
			h.w(`<h3>%s</h3><div class="grid">`, esc(stage))
		}
		if hg.Constant {
			constant = append(constant, fmt.Sprintf("%s = %s (%s docs)", hg.Metric, shortNum(hg.Min), Group(hg.Docs)))
			continue
		}
		var th []string
		for _, t := range hg.Thresholds {
			th = append(th, fmt.Sprintf("%s: keep when %s %s (%s removed)", t.Rule, t.Cmp, shortNum(t.Limit), Group(t.Removed)))
		}
		caption := "no threshold"
		if len(th) > 0 {
			caption = strings.Join(th, "; ")
		}
		h.w(`<figure><figcaption><b>%s</b> <span class="dim">· %s docs · range %s–%s`, esc(hg.Metric), num("hist."+hg.Stage+"."+hg.Metric+".docs", hg.Docs),
			esc(shortNum(hg.Min)), esc(shortNum(hg.Max)))
		if hg.Missing > 0 {
			h.w(` · %s n/a`, Group(hg.Missing))
		}
		h.w(`<br>%s</span></figcaption>%s</figure>`, esc(caption), histSVG(hg))
	}
	h.s(`</div>`)
	flushConstant()
	h.s(`</section>`)
}

func (rep *Report) contamSection(h *htmlw) {
	c := rep.Summary.Contamination
	h.s(`<section id="contamination"><h2>Contamination</h2>`)
	if c == nil {
		h.s(`<p>This run has no decontaminate stage (no contamination.json).</p></section>`)
		return
	}
	h.w(`<p class="note">Word %d-gram overlap with the eval sets; action %s. %s documents scanned, %s affected (%s dropped, %s cut, %s flagged).</p>`,
		c.Ngram, esc(c.Action), Group(c.DocsScanned), num("contam.docs_affected", c.DocsAffected), Group(c.DocsDropped), Group(c.DocsEdited), Group(c.DocsFlagged))
	h.s(`<div class="scroll"><table><thead><tr><th>eval set</th><th class="r">items</th><th class="r">too short to check</th><th class="r">contaminated</th><th class="r">% of checked</th><th class="r">docs affected</th></tr></thead><tbody>`)
	for _, e := range c.Evals {
		h.w(`<tr><td>%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%.1f%%</td><td class="r">%s</td></tr>`, esc(e.Name),
			num("contam."+e.Name+".items", int64(e.Items)), num("contam."+e.Name+".items_too_short", int64(e.ItemsTooShort)),
			num("contam."+e.Name+".items_contaminated", int64(e.ItemsContaminated)), e.Percent,
			num("contam."+e.Name+".docs_affected", e.DocsAffected))
	}
	h.s(`</tbody></table></div>`)
	for _, e := range c.Evals {
		if len(e.TooShort) > 0 {
			h.w(`<details><summary>%s: %d item(s) too short to check (no text of %d words)</summary><div class="body ids">%s</div></details>`,
				esc(e.Name), len(e.TooShort), c.MinItemWords, esc(strings.Join(e.TooShort, ", ")))
		}
	}
	for _, e := range c.Evals {
		if len(e.Contaminated) == 0 {
			continue
		}
		h.w(`<details><summary>%s: %d contaminated item(s)</summary><div class="body scroll"><table><thead><tr><th>item</th><th class="r">docs</th><th class="r">matched n-grams</th><th>matched text</th><th>documents</th></tr></thead><tbody>`,
			esc(e.Name), len(e.Contaminated))
		for _, it := range e.Contaminated {
			h.w(`<tr><td class="mono nw">%s</td><td class="r">%s</td><td class="r">%s</td><td>%s</td><td class="ids">%s</td></tr>`, esc(it.Item), Group(it.DocCount),
				Group(it.Matches), esc(it.Text), esc(strings.Join(it.Docs, ", ")))
		}
		h.s(`</tbody></table></div></details>`)
	}
	h.s(`</section>`)
}

// reportShowBytes of each sample's text are shown.
const reportShowBytes = 1800

func (rep *Report) samplesSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="samples"><h2>Removed and edited documents</h2>`)
	h.s(`<p class="note">The first documents of each rule, in input order. Removed documents are not in the shards: their text is read again from the run's inputs, with earlier stages' edits replayed. Marked: the part the rule objects to.</p>`)
	shown := false
	for i := range s.Rules {
		r := &s.Rules[i]
		ss := rep.Samples[r.Label()]
		if len(ss) == 0 {
			continue
		}
		shown = true
		h.w(`<details><summary>%s/%s %s — %s %s, showing %d</summary><div class="body">`, esc(r.Stage), esc(r.Rule), actionTag(r.Action),
			Group(r.Docs), esc(actionPast(r.Action)), len(ss))
		for _, sm := range ss {
			h.w(`<article class="sample"><h4>%s <span class="tag">%s</span></h4><p>%s</p>`, esc(sm.ID), esc(sm.Source), esc(sm.Reason))
			h.w(`<p class="note">%s:%d · %s</p>`, esc(sm.File), sm.Line, esc(sm.TextNote))
			if len(sm.Metrics) > 0 {
				var parts []string
				for _, k := range sortedKeys(sm.Metrics) {
					parts = append(parts, k+"="+fmtFloat(sm.Metrics[k]))
				}
				h.w(`<p class="note mono">%s</p>`, esc(strings.Join(parts, " ")))
			}
			if sm.Text != "" {
				switch {
				case len(sm.Marks) > 0:
					h.w(`<p class="note">Marked: %s (%d).</p>`, esc(sm.MarkNote), len(sm.Marks))
				case sm.MarkNote != "":
					h.w(`<p class="note">%s.</p>`, esc(upperFirst(sm.MarkNote)))
				}
				ex, marks, cut := Excerpt(sm.Text, sm.Marks, reportShowBytes)
				h.w(`<pre class="doc">%s%s</pre>`, renderHTML(ex, marks), cutNote(cut, len(ex), len(sm.Text)))
			}
			if tw := sm.Twin; tw != nil {
				h.w(`<p class="note">Kept twin %s, recorded similarity %s`, esc(tw.ID), esc(fmtFloat(tw.Similarity)))
				if tw.Jaccard >= 0 {
					h.w(`, word n-gram Jaccard of the texts %s`, esc(fmtFloat(tw.Jaccard)))
				}
				h.w(` · %s</p>`, esc(tw.TextNote))
				if tw.Text != "" {
					ex, _, cut := Excerpt(tw.Text, nil, reportShowBytes/2)
					h.w(`<pre class="doc twin">%s%s</pre>`, esc(ex), cutNote(cut, len(ex), len(tw.Text)))
				}
			}
			h.s(`</article>`)
		}
		h.s(`</div></details>`)
	}
	if !shown {
		h.s(`<p>No document was removed or edited.</p>`)
	}
	h.s(`</section>`)
}

func cutNote(cut bool, shown, total int) string {
	if !cut {
		return ""
	}
	return esc(fmt.Sprintf("\n… (%s of %s bytes shown)", Group(int64(shown)), Group(int64(total))))
}

// renderHTML escapes text and wraps marks in <mark>.
func renderHTML(text string, spans []Span) string {
	var b strings.Builder
	pos := 0
	for _, s := range spans {
		if s.Start < pos || s.End > len(text) || s.Start >= s.End {
			continue
		}
		b.WriteString(esc(text[pos:s.Start]))
		if s.Label != "" {
			fmt.Fprintf(&b, `<mark title="%s">`, esc(s.Label))
		} else {
			b.WriteString("<mark>")
		}
		b.WriteString(esc(text[s.Start:s.End]))
		b.WriteString("</mark>")
		pos = s.End
	}
	b.WriteString(esc(text[pos:]))
	return b.String()
}

func (rep *Report) inputsSection(h *htmlw) {
	s := rep.Summary
	h.s(`<section id="inputs"><h2>Inputs and errors</h2><div class="scroll"><table><thead><tr><th>input</th><th>source</th><th class="r">docs</th><th class="r">issues</th><th>status now</th><th>read to the end</th></tr></thead><tbody>`)
	for _, in := range s.Inputs {
		complete := "yes"
		if !in.Complete {
			complete = `<b class="warn">no</b>`
		}
		h.w(`<tr><td class="mono">%s</td><td>%s</td><td class="r">%s</td><td class="r">%s</td><td>%s</td><td>%s</td></tr>`, esc(in.Path), esc(in.Source),
			Group(in.Docs), Group(in.Issues), esc(in.Status), complete)
	}
	h.s(`</tbody></table></div>`)
	h.w(`<p>%s input error(s).</p>`, num("error_count", s.ErrorCount))
	if len(s.Errors) > 0 {
		h.s(`<div class="scroll"><table><thead><tr><th>file</th><th class="r">line</th><th>rule</th><th>message</th></tr></thead><tbody>`)
		for _, e := range s.Errors {
			h.w(`<tr><td class="mono">%s</td><td class="r">%d</td><td>%s</td><td>%s</td></tr>`, esc(e.File), e.Line, esc(e.Rule), esc(e.Message))
		}
		h.s(`</tbody></table></div>`)
	}
	for _, n := range append(append([]string(nil), s.Notes...), rep.Notes...) {
		h.w(`<p class="note">Note: %s</p>`, esc(n))
	}
	h.s(`</section>`)
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}
