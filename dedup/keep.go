package dedup

// Which copy survives: keep rules as priority keys.
//
// Exact and near dedup keep, of every group of copies, the document with
// the best priority; ties go to the earlier document in input order. A
// rule is turned into one uint64 per document while scanning (Priority;
// lower is better), so the reduce never needs the text, the source or the
// metrics again, and any split of the reduce across partitions, workers
// or processes sees the same keys:
//
//	first    0 for every document: input order alone decides (the default)
//	longest  ^characters: more Unicode characters first
//	sources  the index of the document's source in the list; sources not
//	         listed come after every listed one
//	metric   the metric's value, order-preserving float bits; prefer max
//	         inverts them; a document without the metric (or NaN) comes
//	         last
//
// Not implemented: combinations of rules (e.g. source first, then length).

import (
	"fmt"
	"math"
	"strings"
	"unicode/utf8"
)

// KeepBy names a keep rule.
type KeepBy uint8

// Keep rules.
const (
	KeepFirst KeepBy = iota
	KeepLongest
	KeepSources
	KeepMetric
)

// KeepRule chooses the survivor of a group of copies. The zero value keeps
// the first document in input order.
type KeepRule struct {
	By      KeepBy
	Sources []string // KeepSources: most preferred first
	Metric  string   // KeepMetric: metric name (as written in metrics)
	Max     bool     // KeepMetric: prefer the largest value (else the smallest)
}

// KeepFacts are what a rule may look at, gathered while scanning.
type KeepFacts struct {
	Text      string
	Source    string
	Metric    float64
	HasMetric bool
}

// Uniform reports whether the rule gives every document the same
// priority (input order alone decides).
func (r KeepRule) Uniform() bool { return r.By == KeepFirst }

// Priority returns the document's priority key: the document with the
// lowest key of a group of copies is kept, ties broken by input order.
func (r KeepRule) Priority(f KeepFacts) uint64 {
	switch r.By {
	case KeepLongest:
		return ^uint64(utf8.RuneCountInString(f.Text))
	case KeepSources:
		for i, s := range r.Sources {
			if s == f.Source {
				return uint64(i)
			}
		}
		return uint64(len(r.Sources))
	case KeepMetric:
		if !f.HasMetric || math.IsNaN(f.Metric) {
			return math.MaxUint64
		}
		k := floatKey(f.Metric)
		if r.Max {
			k = ^k
		}
		// ^k of the smallest float is MaxUint64 - 0; keep "missing"
		// strictly last.
		return min(k, math.MaxUint64-1)
	}
	return 0
}

// floatKey maps floats to uint64 in the same order (−0 and +0 equal).
func floatKey(v float64) uint64 {
	if v == 0 {
		v = 0
	}
	b := math.Float64bits(v)
	if b>>63 == 0 {
		return b | 1<<63
	}
	return ^b
}

// String describes the rule for check output and the ledger's audit.
func (r KeepRule) String() string {
	switch r.By {
	case KeepLongest:
		return "longest (most characters; ties: earliest)"
	case KeepSources:
		return fmt.Sprintf("sources in order %s, then any other source (ties: earliest)", strings.Join(r.Sources, ", "))
	case KeepMetric:
		pref := "smallest"
		if r.Max {
			pref = "largest"
		}
		return fmt.Sprintf("%s %s (documents without it last; ties: earliest)", pref, r.Metric)
	}
	return "first in input order"
}
