package audit

import (
	"fmt"
	"html"
	"math"
	"strings"
)

// Charts are drawn as inline SVG by this file: a bar row (one horizontal
// stacked bar, no text inside, so it stays readable at any width because
// its labels are HTML around it) and a histogram (a fixed 360 x 210 user
// space that a phone shows at about its natural size and a desktop grid
// shows three to a row).

// seg is one part of a stacked bar.
type seg struct {
	value float64
	class string
	title string
}

// barSVG draws one stacked horizontal bar whose full width is total.
func barSVG(segs []seg, total float64, chart string) string {
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="bar" data-chart="%s" viewBox="0 0 1000 24" preserveAspectRatio="none" role="img" aria-label="%s">`,
		esc(chart), esc(chart))
	b.WriteString(`<rect class="track" x="0" y="0" width="1000" height="24"/>`)
	x := 0.0
	for _, s := range segs {
		if s.value <= 0 || total <= 0 {
			continue
		}
		w := 1000 * s.value / total
		if w < 2 {
			w = 2 // a non-zero part stays visible
		}
		if x+w > 1000 {
			w = 1000 - x
		}
		fmt.Fprintf(&b, `<rect class="%s" x="%.2f" y="0" width="%.2f" height="24"><title>%s</title></rect>`, s.class, x, w, esc(s.title))
		x += w
	}
	b.WriteString(`</svg>`)
	return b.String()
}

// Histogram layout in SVG user units.
const (
	hW, hH               = 360.0, 210.0
	hLeft, hRight        = 40.0, 10.0
	hTop, hBottom        = 36.0, 34.0
	hGap                 = 6.0 // gap between the under/over bins and the range
	hEdgeBin             = 8.0 // width of the under/over bins
	hTick                = 4.0
	hFont                = 11.0
	hMaxThresholdLabels  = 2
	hThresholdLabelSpace = 13.0
)

// histSVG draws a histogram with its thresholds: the removed side of each
// threshold is shaded, bars are stacked kept / removed by a rule on this
// metric / removed by another rule.
func histSVG(h *Histogram) string {
	var b strings.Builder
	id := h.Stage + "." + h.Metric
	fmt.Fprintf(&b, `<svg class="hist" data-chart="hist:%s" viewBox="0 0 %g %g" role="img" aria-label="%s">`,
		esc(id), hW, hH, esc("distribution of "+h.Metric+" at stage "+h.Stage))
	plotL, plotR := hLeft+hEdgeBin+hGap, hW-hRight-hEdgeBin-hGap
	plotT, plotB := hTop, hH-hBottom
	n := h.Bins
	lo, hi := h.Lo, h.Lo+float64(n)*h.Width
	xOf := func(v float64) float64 {
		if hi <= lo {
			return plotL
		}
		return plotL + (plotR-plotL)*(v-lo)/(hi-lo)
	}
	var maxC int64 = 1
	for i := 0; i < n+2; i++ {
		if c := h.Kept[i] + h.Removed[i] + h.Other[i]; c > maxC {
			maxC = c
		}
	}
	yOf := func(c int64) float64 { return plotB - (plotB-plotT)*float64(c)/float64(maxC) }

	// Shaded removed side of every threshold, behind the bars.
	for _, t := range h.Thresholds {
		x := math.Max(hLeft, math.Min(hW-hRight, xOf(t.Limit)))
		if t.RemovesBelow {
			fmt.Fprintf(&b, `<rect class="removed-side" x="%.2f" y="%.2f" width="%.2f" height="%.2f"/>`, hLeft, plotT, math.Max(0, x-hLeft), plotB-plotT)
		} else {
			fmt.Fprintf(&b, `<rect class="removed-side" x="%.2f" y="%.2f" width="%.2f" height="%.2f"/>`, x, plotT, math.Max(0, hW-hRight-x), plotB-plotT)
		}
	}
	bar := func(x, w float64, i int) {
		y := plotB
		for _, part := range []struct {
			c     int64
			class string
			what  string
		}{{h.Kept[i], "kept", "kept"}, {h.Removed[i], "removed", "removed by this metric's rule"}, {h.Other[i], "other", "removed by another rule"}} {
			if part.c == 0 {
				continue
			}
			top := yOf(part.c) - (plotB - y)
			fmt.Fprintf(&b, `<rect class="%s" x="%.2f" y="%.2f" width="%.2f" height="%.2f"><title>%s: %s %s</title></rect>`,
				part.class, x, top, math.Max(w, 0.5), y-top, esc(binLabel(h, i)), Group(part.c), part.what)
			y = top
		}
	}
	bw := (plotR - plotL) / float64(max(n, 1))
	for i := 1; i <= n; i++ {
		bar(plotL+float64(i-1)*bw+0.3, bw-0.6, i)
	}
	bar(hLeft, hEdgeBin, 0)
	bar(hW-hRight-hEdgeBin, hEdgeBin, n+1)

	// Axes and labels.
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%.2f" x2="%g" y2="%.2f"/>`, hLeft, plotB, hW-hRight, plotB)
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="%.2f" x2="%g" y2="%.2f"/>`, hLeft, plotT, hLeft, plotB)
	fmt.Fprintf(&b, `<text class="lbl" x="%g" y="%.2f" text-anchor="end" font-size="%g">%s</text>`, hLeft-3, plotT+hFont*0.8, hFont, esc(shortCount(maxC)))
	fmt.Fprintf(&b, `<text class="lbl" x="%g" y="%.2f" text-anchor="end" font-size="%g">0</text>`, hLeft-3, plotB, hFont)
	ticks := []float64{lo, (lo + hi) / 2, hi}
	anchors := []string{"start", "middle", "end"}
	unit := h.Width == 1 && h.Lo == math.Trunc(h.Lo)
	if unit {
		// One bin per integer: label the first, middle and last values at
		// their bins' centres.
		ticks = []float64{lo, math.Floor((lo + hi - 1) / 2), hi - 1}
		anchors = []string{"middle", "middle", "middle"}
		if n == 1 {
			ticks, anchors = ticks[:1], anchors[:1]
		} else if n == 2 {
			ticks, anchors = []float64{lo, lo + 1}, anchors[:2]
		}
	}
	for i, v := range ticks {
		x := xOf(v)
		if unit {
			x = xOf(v + 0.5)
		}
		fmt.Fprintf(&b, `<line class="axis" x1="%.2f" y1="%.2f" x2="%.2f" y2="%.2f"/>`, x, plotB, x, plotB+hTick)
		fmt.Fprintf(&b, `<text class="lbl" x="%.2f" y="%.2f" text-anchor="%s" font-size="%g">%s</text>`, x, plotB+hTick+hFont, anchors[i], hFont, esc(shortNum(v)))
	}
	fmt.Fprintf(&b, `<text class="lbl dim" x="%g" y="%.2f" text-anchor="start" font-size="%g">&lt;</text>`, hLeft, plotB+hTick+hFont*2.2, hFont*0.9)
	fmt.Fprintf(&b, `<text class="lbl dim" x="%g" y="%.2f" text-anchor="end" font-size="%g">&gt;</text>`, hW-hRight, plotB+hTick+hFont*2.2, hFont*0.9)
	// Thresholds on top.
	for k, t := range h.Thresholds {
		x := xOf(t.Limit)
		clipped, class := "", "threshold"
		if x < hLeft || x > hW-hRight {
			// Far outside the data: a faint line at the edge, and the
			// label says so.
			clipped, class = " (off scale)", "threshold off"
			x = math.Max(hLeft, math.Min(hW-hRight, x))
		}
		fmt.Fprintf(&b, `<line class="%s" x1="%.2f" y1="%.2f" x2="%.2f" y2="%.2f"><title>%s</title></line>`, class, x, plotT-4, x, plotB,
			esc(fmt.Sprintf("%s: keep when %s %s %s", t.Rule, h.Metric, t.Cmp, shortNum(t.Limit))))
		if k < hMaxThresholdLabels {
			anchor := "start"
			lx := x + 3
			if x > hW*0.6 {
				anchor, lx = "end", x-3
			}
			fmt.Fprintf(&b, `<text class="tlbl" x="%.2f" y="%.2f" text-anchor="%s" font-size="%g">%s</text>`, lx, hTop-6-float64(k)*hThresholdLabelSpace, anchor, hFont,
				esc(fmt.Sprintf("%s %s %s%s", t.Key, t.Cmp, shortNum(t.Limit), clipped)))
		}
	}
	b.WriteString(`</svg>`)
	return b.String()
}

// binLabel describes bin i of h.
func binLabel(h *Histogram, i int) string {
	switch {
	case i == 0:
		return "below " + shortNum(h.Lo)
	case i == h.Bins+1:
		return shortNum(h.Lo+float64(h.Bins)*h.Width) + " and above"
	case h.Width == 1 && h.Lo == math.Trunc(h.Lo):
		return shortNum(h.Lo + float64(i-1))
	}
	a := h.Lo + float64(i-1)*h.Width
	return fmt.Sprintf("[%s, %s)", shortNum(a), shortNum(a+h.Width))
}

// shortNum formats an axis value in at most about 5 characters.
func shortNum(v float64) string {
	a := math.Abs(v)
	switch {
	case a == 0:
		return "0"
	case a >= 1e6:
		return trimZeros(fmt.Sprintf("%.1f", v/1e6)) + "M"
	case a >= 1e4:
		return trimZeros(fmt.Sprintf("%.1f", v/1e3)) + "k"
	case a >= 100 || v == math.Trunc(v):
		return fmt.Sprintf("%.0f", v)
	case a >= 1:
		return trimZeros(fmt.Sprintf("%.2f", v))
	}
	return trimZeros(fmt.Sprintf("%.3f", v))
}

func trimZeros(s string) string {
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s
}

func shortCount(c int64) string {
	if c >= 10000 {
		return shortNum(float64(c))
	}
	return Group(c)
}

func esc(s string) string { return html.EscapeString(s) }
