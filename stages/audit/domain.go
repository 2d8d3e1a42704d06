package audit

import (
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"
	"unicode"

	"winnow/stages"
)

// What the audit shows of a domain stage (stages/domain.go): domain_score
// per source as a histogram with the stage's cut, the share of each
// source it kept, and the documents it scored highest and lowest. All of
// it comes from the stage's metrics file (every document the stage
// decided about has a row with its score, source and action), read in the
// summary's walk; the text of the top and bottom documents is re-read
// from the run's inputs as for the samples of removed documents.

// Domain section tuning.
const (
	// domainBins equal-width bins cover domain_score's range [0, 1].
	domainBins = 20
	// domainShownDocs highest and lowest scoring documents are kept per
	// domain stage (SummaryOptions.DomainDocs overrides).
	domainShownDocs = 5
	// domainTextChars characters of each shown document's text are kept
	// (whitespace runs collapsed to one space).
	domainTextChars = 200
)

// DomainSelection is one domain stage's scores: per source, and the
// documents at both ends.
type DomainSelection struct {
	Stage string `json:"stage"`
	// Method is "classifier" or "importance".
	Method string `json:"method"`
	// Mode is "min_score" (a threshold) or "keep_fraction" (a global
	// stage keeping a share of the documents).
	Mode         string  `json:"mode"`
	KeepFraction float64 `json:"keep_fraction,omitempty"`
	// Cut is the score line drawn: min_score, or in keep_fraction mode
	// the lowest score kept (for the importance method a sample, not a
	// threshold: removed documents may score above it). HasCut is false
	// when it is unknown (no rebuilt rule, no config value, nothing kept).
	Cut    float64 `json:"cut"`
	HasCut bool    `json:"has_cut"`
	// MaxRemoved is the highest score of a removed document (-1 when
	// none was removed).
	MaxRemoved float64 `json:"max_removed"`
	// Bins of width Width cover [0, 1]; a score of exactly 1 counts in
	// the last bin.
	Bins  int     `json:"bins"`
	Width float64 `json:"width"`
	// Docs, Kept, Removed, NotScored total the sources.
	Docs      int64          `json:"docs"`
	Kept      int64          `json:"kept"`
	Removed   int64          `json:"removed"`
	NotScored int64          `json:"not_scored"`
	Sources   []DomainSource `json:"sources"`
	// Top are the highest scoring documents (ties: earlier in input
	// order first), Bottom the lowest.
	Top    []DomainDoc `json:"top"`
	Bottom []DomainDoc `json:"bottom"`

	step   int
	cutSrc string // where Cut came from, for the caption
}

// DomainSource is one input source at a domain stage.
type DomainSource struct {
	Source string `json:"source"`
	// Docs the stage decided about (earlier stages' removals excluded);
	// Kept + Removed = Docs. NotScored documents (outside the stage's
	// sources) have a null score and are kept.
	Docs      int64 `json:"docs"`
	Kept      int64 `json:"kept"`
	Removed   int64 `json:"removed"`
	NotScored int64 `json:"not_scored"`
	// ShareKept is Kept over Docs.
	ShareKept float64 `json:"share_kept"`
	// KeptBins and RemovedBins count the scored documents per bin.
	KeptBins    []int64 `json:"kept_bins"`
	RemovedBins []int64 `json:"removed_bins"`
	// Mean and Median of the scores (0 when nothing was scored).
	Mean   float64 `json:"mean"`
	Median float64 `json:"median"`

	sum float64
	res []float64 // scores, for the median (bounded by domainMedianCap)
}

// domainMedianCap scores per source are kept for the median; beyond it
// the median is of a deterministic reservoir.
const domainMedianCap = 4096

// DomainDoc is one document at an end of the score range.
type DomainDoc struct {
	ID     string  `json:"id"`
	Source string  `json:"source"`
	File   string  `json:"file"`
	Line   int64   `json:"line"`
	Score  float64 `json:"score"`
	Kept   bool    `json:"kept"`
	// Text is the start of the document as the stage saw it (filled by
	// BuildReport; whitespace collapsed, at most domainTextChars
	// characters, "…" when cut); TextNote says where it came from or why
	// it is missing.
	Text     string `json:"text,omitempty"`
	TextNote string `json:"text_note,omitempty"`

	order stages.OrderKey
	trail *Trail
}

// domainSet gathers the DomainSelection of every domain stage during a
// walk.
type domainSet struct {
	r      *Run
	n      int
	trails bool
	sel    []*DomainSelection
	srcs   []map[string]*DomainSource
	rng    uint64
	limit  []float64 // a ledger limit seen per selection (NaN: none)
}

func newDomainSet(r *Run, n int, trails bool) *domainSet {
	if n <= 0 {
		n = domainShownDocs
	}
	ds := &domainSet{r: r, n: n, trails: trails, rng: 0x9E3779B97F4A7C15}
	for i, st := range r.Steps {
		if st.Kind != "domain" || st.MetricsPath == "" {
			continue
		}
		d := &DomainSelection{Stage: st.Name, Method: "classifier", Mode: "min_score", Bins: domainBins, Width: 1.0 / domainBins,
			MaxRemoved: -1, Sources: []DomainSource{}, Top: []DomainDoc{}, Bottom: []DomainDoc{}, step: i}
		if p := st.Spec; p != nil && p.Params != nil {
			d.Method = p.Params.String("method", "classifier")
			if p.Params.Has("keep_fraction") {
				d.Mode = "keep_fraction"
				d.KeepFraction = p.Params.Float("keep_fraction", 0, 0, 1)
			}
		}
		if st.Global {
			d.Mode = "keep_fraction"
		}
		if d.Mode == "min_score" {
			if rules, err := r.StepRules(st); err == nil {
				for _, ru := range rules {
					if ru.Key == "min_score" {
						d.Cut, d.HasCut, d.cutSrc = ru.Limit, true, "rule"
					}
				}
			}
			if !d.HasCut && st.Spec != nil && st.Spec.Params != nil && st.Spec.Params.Has("min_score") {
				d.Cut, d.HasCut, d.cutSrc = st.Spec.Params.Float("min_score", 0, 0, 1), true, "config"
			}
		}
		ds.sel = append(ds.sel, d)
		ds.srcs = append(ds.srcs, map[string]*DomainSource{})
		ds.limit = append(ds.limit, math.NaN())
	}
	return ds
}

// scoreIndex returns the column of domain_score in the step's metrics.
func (ds *domainSet) scoreIndex(step int) int {
	for j, n := range ds.r.Steps[step].MetricNames {
		if n == "domain_score" {
			return j
		}
	}
	return -1
}

func (ds *domainSet) add(t *Trail) {
	for k, d := range ds.sel {
		row := t.Steps[d.step].Row
		if row == nil || row.Shadow() {
			continue
		}
		src := ds.srcs[k][row.Source]
		if src == nil {
			src = &DomainSource{Source: row.Source, KeptBins: make([]int64, d.Bins), RemovedBins: make([]int64, d.Bins)}
			ds.srcs[k][row.Source] = src
		}
		drop := row.Action == "drop"
		src.Docs++
		if drop {
			src.Removed++
			for _, rc := range t.Steps[d.step].Recs {
				if l, ok := rc.Limit.(float64); ok && rc.Rule == "domain_score" {
					ds.limit[k] = l
				}
			}
		} else {
			src.Kept++
		}
		score := math.NaN()
		if j := ds.scoreIndex(d.step); j >= 0 && j < len(row.Values) {
			score = row.Values[j]
		}
		if math.IsNaN(score) || math.IsInf(score, 0) {
			src.NotScored++
			continue
		}
		b := domainBin(score, d.Bins)
		if drop {
			src.RemovedBins[b]++
			d.MaxRemoved = math.Max(d.MaxRemoved, score)
		} else {
			src.KeptBins[b]++
			if d.Mode == "keep_fraction" && (!d.HasCut || score < d.Cut) {
				d.Cut, d.HasCut, d.cutSrc = score, true, "lowest kept"
			}
		}
		src.sum += score
		ds.addMedian(src, score)
		doc := DomainDoc{ID: row.Doc, Source: row.Source, Score: score, Kept: !drop, order: row.Order}
		d.Top = ds.insert(d.Top, doc, t, func(a, b *DomainDoc) bool { return a.Score > b.Score })
		d.Bottom = ds.insert(d.Bottom, doc, t, func(a, b *DomainDoc) bool { return a.Score < b.Score })
	}
}

// domainBin returns the bin of a score in [0, 1] (1 in the last bin).
func domainBin(score float64, bins int) int {
	return min(max(int(score*float64(bins)), 0), bins-1)
}

// addMedian keeps every score up to domainMedianCap, then a reservoir
// sample drawn with a fixed-seed xorshift (the same run gives the same
// median).
func (ds *domainSet) addMedian(src *DomainSource, v float64) {
	n := src.Docs - src.NotScored
	if len(src.res) < domainMedianCap {
		src.res = append(src.res, v)
		return
	}
	ds.rng ^= ds.rng << 13
	ds.rng ^= ds.rng >> 7
	ds.rng ^= ds.rng << 17
	if j := ds.rng % uint64(n); j < domainMedianCap {
		src.res[j] = v
	}
}

// insert puts doc into the sorted list when it ranks among the first n
// (better first; equal scores keep input order, which the walk follows).
func (ds *domainSet) insert(list []DomainDoc, doc DomainDoc, t *Trail, better func(a, b *DomainDoc) bool) []DomainDoc {
	i := sort.Search(len(list), func(i int) bool { return better(&doc, &list[i]) })
	if i >= ds.n {
		return list
	}
	doc.File, doc.Line = ds.r.Location(t)
	if ds.trails {
		doc.trail = t.Clone()
	}
	list = append(list, DomainDoc{})
	copy(list[i+1:], list[i:])
	list[i] = doc
	if len(list) > ds.n {
		list = list[:ds.n]
	}
	return list
}

func (ds *domainSet) finish() []*DomainSelection {
	var order []string
	seen := map[string]bool{}
	for _, in := range ds.r.Manifest.Inputs {
		if !seen[in.Source] {
			seen[in.Source] = true
			order = append(order, in.Source)
		}
	}
	for k, d := range ds.sel {
		names := append([]string(nil), order...)
		for _, name := range sortedKeys(ds.srcs[k]) {
			if !seen[name] {
				names = append(names, name)
			}
		}
		for _, name := range names {
			src := ds.srcs[k][name]
			if src == nil {
				continue
			}
			if src.Docs > 0 {
				src.ShareKept = float64(src.Kept) / float64(src.Docs)
			}
			if n := src.Docs - src.NotScored; n > 0 {
				src.Mean = src.sum / float64(n)
				v := append([]float64(nil), src.res...)
				sort.Float64s(v)
				if m := len(v); m%2 == 1 {
					src.Median = v[m/2]
				} else {
					src.Median = (v[m/2-1] + v[m/2]) / 2
				}
			}
			src.res = nil
			d.Sources = append(d.Sources, *src)
			d.Docs += src.Docs
			d.Kept += src.Kept
			d.Removed += src.Removed
			d.NotScored += src.NotScored
		}
		if d.Mode == "min_score" && !d.HasCut && !math.IsNaN(ds.limit[k]) {
			d.Cut, d.HasCut, d.cutSrc = ds.limit[k], true, "ledger"
		}
	}
	return ds.sel
}

// CutLabel says what the drawn line is.
func (d *DomainSelection) CutLabel() string {
	switch {
	case !d.HasCut:
		return "cut unknown"
	case d.Mode == "min_score":
		return "min_score " + trimZeros(fmt.Sprintf("%.4f", d.Cut))
	case d.Method == "importance":
		return fmt.Sprintf("keep_fraction %g sampled by importance weight: lowest kept score %s", d.KeepFraction, trimZeros(fmt.Sprintf("%.4f", d.Cut)))
	}
	return fmt.Sprintf("keep_fraction %g: lowest kept score %s", d.KeepFraction, trimZeros(fmt.Sprintf("%.4f", d.Cut)))
}

// domainTexts re-reads the text of the top and bottom documents of every
// domain stage (the run's own readers, earlier stages' edits replayed).
func (r *Run) domainTexts(sel []*DomainSelection) {
	var trails []*Trail
	for _, d := range sel {
		for _, list := range [][]DomainDoc{d.Top, d.Bottom} {
			for i := range list {
				if list[i].trail != nil {
					trails = append(trails, list[i].trail)
				}
			}
		}
	}
	if len(trails) == 0 {
		return
	}
	texts := r.fetchTexts(trails)
	for _, d := range sel {
		for _, list := range [][]DomainDoc{d.Top, d.Bottom} {
			for i := range list {
				doc := &list[i]
				if doc.trail == nil {
					continue
				}
				f := texts[doc.trail.Order]
				if !f.ok {
					doc.TextNote = f.note
					continue
				}
				text, note := r.textAt(doc.trail, d.step, f.text)
				doc.Text = DomainExcerpt(text, domainTextChars)
				doc.TextNote = f.note
				if note != "" {
					doc.TextNote += "; " + note
				}
			}
		}
	}
}

// DomainExcerpt returns the start of text with every run of white space
// made one space, at most n characters, and "…" when it was cut.
func DomainExcerpt(text string, n int) string {
	var b strings.Builder
	chars := 0
	space := false
	for _, c := range strings.TrimSpace(text) {
		if unicode.IsSpace(c) {
			space = true
			continue
		}
		if space {
			if chars == n {
				return b.String() + "…"
			}
			b.WriteByte(' ')
			chars++
			space = false
		}
		if chars == n {
			return b.String() + "…"
		}
		b.WriteRune(c)
		chars++
	}
	return b.String()
}

// writeDomainHeadline prints, under the totals, the share of each source
// every domain stage kept.
func (s *Summary) writeDomainHeadline(w io.Writer) {
	for _, d := range s.Domain {
		var parts []string
		for _, src := range d.Sources {
			if src.NotScored == src.Docs {
				parts = append(parts, fmt.Sprintf("%s not scored (%s passed)", src.Source, Group(src.Docs)))
				continue
			}
			parts = append(parts, fmt.Sprintf("%s %s (%s of %s)", src.Source, Percent(src.ShareKept), Group(src.Kept), Group(src.Docs)))
		}
		if len(parts) == 0 {
			parts = []string{"no document reached it"}
		}
		fmt.Fprintf(w, "%s (%s, %s) kept: %s\n", d.Stage, d.Method, d.CutLabel(), strings.Join(parts, ", "))
	}
}

// domainSpark are the levels of the text histograms, lowest first.
var domainSpark = []rune(" ▁▂▃▄▅▆▇█")

// writeDomainText prints, per domain stage, each source's scores as a
// one-line histogram (0 to 1, the cut marked |) and the documents it
// scored highest and lowest.
func (s *Summary) writeDomainText(w io.Writer) error {
	for _, d := range s.Domain {
		fmt.Fprintf(w, "\ndomain_score at stage %s (%s; %s): per source, %d bins from 0 to 1", d.Stage, d.Method, d.CutLabel(), d.Bins)
		if d.HasCut {
			fmt.Fprint(w, ", | at the cut")
		}
		fmt.Fprintln(w)
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "source\tdocs\tkept\tshare kept\tmedian\tscores 0..1")
		for _, src := range d.Sources {
			med := "n/a"
			if src.Docs > src.NotScored {
				med = fmt.Sprintf("%.3f", src.Median)
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t[%s]\n", src.Source, Group(src.Docs), Group(src.Kept), Percent(src.ShareKept), med, domainSparkline(d, &src))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		for _, end := range []struct {
			name string
			docs []DomainDoc
		}{{"highest", d.Top}, {"lowest", d.Bottom}} {
			if len(end.docs) == 0 {
				continue
			}
			var parts []string
			for _, doc := range end.docs {
				parts = append(parts, fmt.Sprintf("%s (%s, %.4f)", doc.ID, doc.Source, doc.Score))
			}
			fmt.Fprintf(w, "  %s: %s\n", end.name, strings.Join(parts, ", "))
		}
	}
	return nil
}

// domainSparkline draws a source's bins as block characters scaled to its
// fullest bin, with | before the bin that holds the cut.
func domainSparkline(d *DomainSelection, src *DomainSource) string {
	var peak int64
	for i := 0; i < d.Bins; i++ {
		peak = max(peak, src.KeptBins[i]+src.RemovedBins[i])
	}
	cutBin := -1
	if d.HasCut {
		cutBin = domainBin(d.Cut, d.Bins)
	}
	var b strings.Builder
	for i := 0; i < d.Bins; i++ {
		if i == cutBin {
			b.WriteRune('|')
		}
		c := src.KeptBins[i] + src.RemovedBins[i]
		lvl := 0
		if c > 0 && peak > 0 {
			lvl = 1 + int(float64(c)*float64(len(domainSpark)-2)/float64(peak))
			lvl = min(lvl, len(domainSpark)-1)
		}
		b.WriteRune(domainSpark[lvl])
	}
	return b.String()
}
