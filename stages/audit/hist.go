package audit

import (
	"io"
	"math"
	"sort"

	"winnow/stages"
)

// Histogram tuning.
const (
	// histBins is the number of equal-width bins between Lo and Hi: about
	// one per 20 px at report width.
	histBins = 40
	// histIntBins: an integer metric spanning at most this many values
	// gets one bin per value, so counts like "lines" read exactly.
	histIntBins = 60
	// histReservoir values per metric pick the binned range (the 0.5% and
	// 99.5% quantiles), so one extreme document does not squash the rest
	// into a single bin; those outside land in the under/over bins.
	histReservoir = 4096
	histLowQ      = 0.005
	histHighQ     = 0.995
)

// Histogram is the distribution of one metric over the documents a stage
// decided about (shadow measurements excluded). Bin 0 counts values below
// Lo, bin Bins+1 values at or above Lo+Bins*Width; bin i in between
// covers [Lo+(i-1)*Width, Lo+i*Width).
type Histogram struct {
	Stage  string  `json:"stage"`
	Metric string  `json:"metric"`
	Lo     float64 `json:"lo"`
	Width  float64 `json:"width"`
	Bins   int     `json:"bins"`
	// Kept are documents the stage kept; Removed those a rule on this
	// metric removed; Other those another rule of the stage removed.
	Kept    []int64 `json:"kept"`
	Removed []int64 `json:"removed"`
	Other   []int64 `json:"other"`
	// Missing counts documents where the metric does not apply (null).
	Missing int64   `json:"missing"`
	Docs    int64   `json:"docs"`
	Min     float64 `json:"min"`
	Max     float64 `json:"max"`
	// Constant is true when every measured value is the same (the report
	// lists such metrics instead of drawing them).
	Constant bool `json:"constant"`
	// Thresholds are the enabled rules on this metric.
	Thresholds []Threshold `json:"thresholds"`
}

// Threshold is one rule drawn on a histogram.
type Threshold struct {
	Rule  string  `json:"rule"`
	Key   string  `json:"key"`
	Cmp   string  `json:"keep_when"`
	Limit float64 `json:"limit"`
	// RemovesBelow is true when the rule removes values below the limit
	// (a minimum), false when it removes values above (a maximum).
	RemovesBelow bool `json:"removes_below"`
	// Removed counts the documents this rule removed.
	Removed int64 `json:"removed"`
}

// BinOf returns the bin index of v.
func (h *Histogram) BinOf(v float64) int {
	if v < h.Lo {
		return 0
	}
	i := int(math.Floor((v-h.Lo)/h.Width)) + 1
	if i > h.Bins {
		return h.Bins + 1
	}
	return i
}

// histSet bins every metric of every measured stage.
type histSet struct {
	steps []*histStep
}

type histStep struct {
	index int
	hists []*Histogram
	// ruleMetric maps a rule name to the metrics its rules look at.
	ruleMetric map[string]map[string]bool
}

type colStats struct {
	n        int64
	min, max float64
	allInt   bool
	res      []float64
	rng      uint64
}

func (c *colStats) add(v float64) {
	if c.n == 0 {
		c.min, c.max = v, v
	}
	c.n++
	c.min, c.max = math.Min(c.min, v), math.Max(c.max, v)
	if v != math.Trunc(v) {
		c.allInt = false
	}
	if len(c.res) < histReservoir {
		c.res = append(c.res, v)
		return
	}
	// Reservoir sampling with a fixed-seed xorshift: the same run gives
	// the same bins.
	c.rng ^= c.rng << 13
	c.rng ^= c.rng >> 7
	c.rng ^= c.rng << 17
	if j := c.rng % uint64(c.n); j < histReservoir {
		c.res[j] = v
	}
}

func newHistSet(r *Run) (*histSet, error) {
	hs := &histSet{}
	for i, st := range r.Steps {
		if st.MetricsPath == "" {
			continue
		}
		mf, err := openMetrics(st.MetricsPath)
		if err != nil {
			return nil, err
		}
		var cols []*colStats
		for {
			row, err := mf.next()
			if err == io.EOF {
				break
			}
			if err != nil {
				mf.close()
				return nil, err
			}
			if row.Shadow() {
				continue
			}
			for len(cols) < len(row.Values) {
				cols = append(cols, &colStats{allInt: true, rng: 0x9E3779B97F4A7C15})
			}
			for j, v := range row.Values {
				if !math.IsNaN(v) && !math.IsInf(v, 0) {
					cols[j].add(v)
				}
			}
		}
		names := mf.names
		mf.close()
		st.MetricNames = names
		rules, _ := r.StepRules(st)
		hst := &histStep{index: i, ruleMetric: map[string]map[string]bool{}}
		for _, ru := range rules {
			if hst.ruleMetric[ru.Name] == nil {
				hst.ruleMetric[ru.Name] = map[string]bool{}
			}
			hst.ruleMetric[ru.Name][ru.Metric] = true
		}
		for j, name := range names {
			var c *colStats
			if j < len(cols) {
				c = cols[j]
			} else {
				c = &colStats{allInt: true}
			}
			h := &Histogram{Stage: st.Name, Metric: name, Thresholds: []Threshold{}}
			for _, ru := range rules {
				if ru.Enabled && ru.Metric == name {
					h.Thresholds = append(h.Thresholds, Threshold{Rule: ru.Name, Key: ru.Key, Cmp: ru.Cmp.String(), Limit: ru.Limit,
						RemovesBelow: ru.Cmp == stages.AtLeast || ru.Cmp == stages.Above})
				}
			}
			h.setRange(c)
			hst.hists = append(hst.hists, h)
		}
		hs.steps = append(hs.steps, hst)
	}
	return hs, nil
}

// setRange picks Lo, Width and Bins from the column's statistics.
func (h *Histogram) setRange(c *colStats) {
	h.Min, h.Max = c.min, c.max
	h.Constant = c.n > 0 && c.min == c.max
	lo, hi := c.min, c.max
	if len(c.res) > 0 {
		v := append([]float64(nil), c.res...)
		sort.Float64s(v)
		lo = v[int(histLowQ*float64(len(v)-1))]
		hi = v[int(math.Ceil(histHighQ*float64(len(v)-1)))]
	}
	// A threshold near the data is drawn inside the range: within half
	// the data's span of it, or anywhere when every value is the same.
	span := c.max - c.min
	for _, t := range h.Thresholds {
		if span == 0 || t.Limit >= c.min-span/2 && t.Limit <= c.max+span/2 {
			lo, hi = math.Min(lo, t.Limit), math.Max(hi, t.Limit)
		}
	}
	if c.n == 0 {
		lo, hi = 0, 1
	}
	switch {
	case c.allInt && hi-lo+1 <= histIntBins:
		h.Lo, h.Width, h.Bins = lo, 1, int(hi-lo)+1
	case hi <= lo:
		h.Lo, h.Width, h.Bins = lo-0.5, 1, 1
	default:
		w := (hi - lo) / histBins
		if c.allInt {
			w = math.Ceil(w)
		}
		h.Lo, h.Width, h.Bins = lo, w, histBins
		// The top quantile value itself belongs in the last bin.
		for h.BinOf(hi) > h.Bins {
			h.Bins++
		}
	}
	n := h.Bins + 2
	h.Kept, h.Removed, h.Other = make([]int64, n), make([]int64, n), make([]int64, n)
}

func (hs *histSet) add(t *Trail) {
	for _, hst := range hs.steps {
		row := t.Steps[hst.index].Row
		if row == nil || row.Shadow() {
			continue
		}
		drop := row.Action == "drop"
		for j, h := range hst.hists {
			h.Docs++
			if j >= len(row.Values) || math.IsNaN(row.Values[j]) {
				h.Missing++
				continue
			}
			b := h.BinOf(row.Values[j])
			switch {
			case !drop:
				h.Kept[b]++
			case hst.ruleMetric[row.Rule][h.Metric]:
				h.Removed[b]++
			default:
				h.Other[b]++
			}
		}
		if drop {
			for _, h := range hst.hists {
				for k := range h.Thresholds {
					if h.Thresholds[k].Rule == row.Rule {
						h.Thresholds[k].Removed++
					}
				}
			}
		}
	}
}

func (hs *histSet) finish() []*Histogram {
	var out []*Histogram
	for _, hst := range hs.steps {
		out = append(out, hst.hists...)
	}
	return out
}
