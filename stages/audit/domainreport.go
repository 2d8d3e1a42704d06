package audit

import (
	"fmt"
	"math"
	"strings"
)

// The report's "Domain selection" section (domain.go gathers the data):
// per domain stage a table of the share of each source kept, a histogram
// of domain_score per source with the cut drawn, and the highest and
// lowest scoring documents with the start of their text.

// reportDomainDocs highest and lowest scoring documents are shown per
// domain stage.
const reportDomainDocs = 8

// domainCSS styles the section (appended to reportCSS).
const domainCSS = `
table.domain-docs td.txt{min-width:28ch;font-size:.82rem;color:var(--fg)}
table.domain-docs td.id{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:.8rem;word-break:break-all;min-width:24ch}
svg.dhist{width:100%;height:auto;display:block;background:#fff;border-radius:4px}
svg.dhist .axis{stroke:#8a93a3;stroke-width:1}
svg.dhist .lbl{fill:#4a5261}
svg.dhist .removed-side{fill:var(--side)}
svg.dhist .threshold{stroke:#1d2430;stroke-width:1.5;stroke-dasharray:4 3}
svg.dhist .tlbl{fill:#1d2430;font-weight:600}
@media (max-width:600px){.scroll table.domain-docs{min-width:0}table.domain-docs thead{display:none}table.domain-docs tr{display:grid;grid-template-columns:auto 1fr auto auto;border-bottom:1px solid var(--line);padding:4px 0}table.domain-docs td{border:0;padding:2px 6px}table.domain-docs td.id{grid-column:2/-1;min-width:0}table.domain-docs td.txt{grid-column:1/-1;min-width:0}}
`

func (rep *Report) domainNav() string {
	if len(rep.Summary.Domain) == 0 {
		return ""
	}
	return `<a href="#domain">Domain selection</a>`
}

// dnum writes a number of the domain section the browser test checks
// against the JSON: stage, source ("" for the stage's total) and field.
func dnum(stage, source, field string, v int64) string {
	return fmt.Sprintf(`<span class="n" data-dstage="%s" data-dsrc="%s" data-dk="%s">%s</span>`, esc(stage), esc(source), esc(field), Group(v))
}

func (rep *Report) domainSection(h *htmlw) {
	s := rep.Summary
	if len(s.Domain) == 0 {
		return
	}
	h.s(`<section id="domain"><h2>Domain selection</h2>`)
	h.s(`<p class="note">domain_score of every document each domain stage decided about, per source: kept (blue) and removed (red), with the stage's cut (dashed; the shaded side is removed). Below, the documents it scored highest and lowest, with the start of their text as the stage saw it.</p>`)
	for _, d := range s.Domain {
		h.w(`<h3>%s <span class="tag">%s</span></h3>`, esc(d.Stage), esc(d.Method))
		h.w(`<p class="note">%s · %s documents: %s kept, %s removed`, esc(d.CutLabel()), dnum(d.Stage, "", "docs", d.Docs),
			dnum(d.Stage, "", "kept", d.Kept), dnum(d.Stage, "", "removed", d.Removed))
		if d.NotScored > 0 {
			h.w(`, %s not scored (outside the stage's sources, kept)`, dnum(d.Stage, "", "not_scored", d.NotScored))
		}
		if d.Mode == "keep_fraction" && d.Method == "importance" {
			h.s(`. The importance method keeps a sample drawn in proportion to the importance weights, so removed documents may score above the lowest kept one`)
		}
		h.s(`.</p>`)
		h.s(`<div class="scroll"><table><thead><tr><th>source</th><th class="r">docs</th><th class="r">kept</th><th class="r">removed</th><th class="r">not scored</th><th class="r">share kept</th><th class="r">mean</th><th class="r">median</th></tr></thead><tbody>`)
		for _, src := range d.Sources {
			mean, med := "n/a", "n/a"
			if src.Docs > src.NotScored {
				mean, med = fmt.Sprintf("%.3f", src.Mean), fmt.Sprintf("%.3f", src.Median)
			}
			h.w(`<tr><td>%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td></tr>`,
				esc(src.Source), dnum(d.Stage, src.Source, "docs", src.Docs), dnum(d.Stage, src.Source, "kept", src.Kept),
				dnum(d.Stage, src.Source, "removed", src.Removed), dnum(d.Stage, src.Source, "not_scored", src.NotScored),
				esc(Percent(src.ShareKept)), mean, med)
		}
		h.s(`</tbody></table></div><div class="grid">`)
		for i := range d.Sources {
			src := &d.Sources[i]
			if src.Docs == src.NotScored {
				continue
			}
			h.w(`<figure><figcaption><b>%s</b> <span class="dim">· %s scored · %s kept</span></figcaption>%s</figure>`,
				esc(src.Source), Group(src.Docs-src.NotScored), esc(Percent(src.ShareKept)), domainHistSVG(d, src))
		}
		h.s(`</div>`)
		for _, end := range []struct {
			key, title string
			docs       []DomainDoc
		}{{"top", "Highest scores", d.Top}, {"bottom", "Lowest scores", d.Bottom}} {
			if len(end.docs) == 0 {
				continue
			}
			h.w(`<h4>%s</h4><div class="scroll"><table class="domain-docs" data-stage="%s" data-end="%s"><thead><tr><th class="r">#</th><th>id</th><th>source</th><th class="r">score</th><th>decision</th><th>text</th></tr></thead><tbody>`,
				esc(end.title), esc(d.Stage), end.key)
			for i, doc := range end.docs {
				dec := "kept"
				if !doc.Kept {
					dec = `<b class="warn">removed</b>`
				}
				text := esc(doc.Text)
				if doc.Text == "" {
					text = `<span class="note">` + esc(doc.TextNote) + `</span>`
				}
				h.w(`<tr><td class="r">%d</td><td class="id">%s</td><td>%s</td><td class="r">%.4f</td><td>%s</td><td class="txt">%s</td></tr>`,
					i+1, esc(doc.ID), esc(doc.Source), doc.Score, dec, text)
			}
			h.s(`</tbody></table></div>`)
		}
	}
	h.s(`</section>`)
}

// Geometry of the domain histograms (user units; the SVG scales).
const (
	dhW, dhH        = 360.0, 180.0
	dhLeft, dhRight = 34.0, 10.0
	dhTop, dhBottom = 24.0, 22.0
	dhFont          = 11.0
	dhTick          = 4.0
)

// domainHistSVG draws one source's scores over [0, 1]: bars stacked kept
// then removed, the cut as a dashed line with the removed side shaded
// (not for an importance sample, which has no score threshold).
func domainHistSVG(d *DomainSelection, src *DomainSource) string {
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="dhist" data-chart="domain:%s/%s" viewBox="0 0 %g %g" role="img" aria-label="%s">`,
		esc(d.Stage), esc(src.Source), dhW, dhH, esc("domain_score of source "+src.Source+" at stage "+d.Stage))
	plotL, plotR, plotT, plotB := dhLeft, dhW-dhRight, dhTop, dhH-dhBottom
	xOf := func(v float64) float64 { return plotL + (plotR-plotL)*v }
	var peak int64 = 1
	for i := 0; i < d.Bins; i++ {
		peak = max(peak, src.KeptBins[i]+src.RemovedBins[i])
	}
	yOf := func(c int64) float64 { return (plotB - plotT) * float64(c) / float64(peak) }
	if d.HasCut && !(d.Mode == "keep_fraction" && d.Method == "importance") {
		fmt.Fprintf(&b, `<rect class="removed-side" x="%.2f" y="%.2f" width="%.2f" height="%.2f"/>`, plotL, plotT, math.Max(0, xOf(d.Cut)-plotL), plotB-plotT)
	}
	bw := (plotR - plotL) / float64(d.Bins)
	for i := 0; i < d.Bins; i++ {
		x := plotL + float64(i)*bw + 0.4
		y := plotB
		lo := float64(i) * d.Width
		label := fmt.Sprintf("[%s, %s)", trimZeros(fmt.Sprintf("%.2f", lo)), trimZeros(fmt.Sprintf("%.2f", lo+d.Width)))
		if i == d.Bins-1 {
			label = fmt.Sprintf("[%s, 1]", trimZeros(fmt.Sprintf("%.2f", lo)))
		}
		for _, part := range []struct {
			c     int64
			class string
		}{{src.KeptBins[i], "kept"}, {src.RemovedBins[i], "removed"}} {
			if part.c == 0 {
				continue
			}
			hgt := yOf(part.c)
			fmt.Fprintf(&b, `<rect class="%s" x="%.2f" y="%.2f" width="%.2f" height="%.2f"><title>%s: %s %s</title></rect>`,
				part.class, x, y-hgt, bw-0.8, hgt, esc(label), Group(part.c), part.class)
			y -= hgt
		}
	}
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%g" x2="%g" y2="%g"/>`, plotL, plotB, plotR, plotB)
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%g" x2="%g" y2="%g"/>`, plotL, plotT, plotL, plotB)
	fmt.Fprintf(&b, `<text class="lbl" x="%g" y="%.2f" text-anchor="end" font-size="%g">%s</text>`, plotL-3, plotT+dhFont*0.8, dhFont, esc(shortCount(peak)))
	fmt.Fprintf(&b, `<text class="lbl" x="%g" y="%g" text-anchor="end" font-size="%g">0</text>`, plotL-3, plotB, dhFont)
	for i, v := range []float64{0, 0.5, 1} {
		anchor := []string{"start", "middle", "end"}[i]
		fmt.Fprintf(&b, `<line class="axis" x1="%.2f" y1="%g" x2="%.2f" y2="%g"/>`, xOf(v), plotB, xOf(v), plotB+dhTick)
		fmt.Fprintf(&b, `<text class="lbl" x="%.2f" y="%g" text-anchor="%s" font-size="%g">%s</text>`, xOf(v), plotB+dhTick+dhFont, anchor, dhFont, shortNum(v))
	}
	if d.HasCut {
		x := xOf(d.Cut)
		fmt.Fprintf(&b, `<line class="threshold" x1="%.2f" y1="%g" x2="%.2f" y2="%g"><title>%s</title></line>`, x, plotT-4, x, plotB, esc(d.CutLabel()))
		anchor, lx := "start", x+3
		if x > dhW*0.6 {
			anchor, lx = "end", x-3
		}
		lbl := "min_score " + shortNum(d.Cut)
		if d.Mode == "keep_fraction" {
			lbl = "lowest kept " + shortNum(d.Cut)
		}
		fmt.Fprintf(&b, `<text class="tlbl" x="%.2f" y="%g" text-anchor="%s" font-size="%g">%s</text>`, lx, plotT-8, anchor, dhFont, esc(lbl))
	}
	b.WriteString(`</svg>`)
	return b.String()
}
