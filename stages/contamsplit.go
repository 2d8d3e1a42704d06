package stages

// The contamination report built in parts (ReportSplitter): in a split
// run every unit of work observes a range of consecutive documents and
// saves what it observed; the process that finishes the run merges the
// parts in input order and calls Finish. A part is a JSON object:
//
//	{"stage": "decontaminate", "ngram": 13, "action": "drop", "index_items": 51,
//	 "ignored_ngrams": 7,            (only when Reduce ran: the n-grams ignored)
//	 "docs": 1200, "affected": 4, "dropped": 4, "edited": 0, "flagged": 0,
//	 "set_docs": [4],                (documents affected per eval set)
//	 "items": [{"index": 3, "text": "...", "docs": ["web/a.jsonl:7"], "doc_count": 1, "matches": 12}],
//	 "shared": [5]}                  (items matched only through others)
//
// items are in index order, shared sorted, docs in input order (at most
// contamReportDocs): the same report part always gives the same bytes.
// Merging adds the counts, keeps the text of an item's first part and
// appends its document ids up to the cap, which is what observing the
// documents in order does.

import (
	"bytes"
	"encoding/json"
	"fmt"
	"slices"
)

// contamPart is one saved part of the contamination report.
type contamPart struct {
	Stage      string           `json:"stage"`
	Ngram      int              `json:"ngram"`
	Action     string           `json:"action"`
	IndexItems int              `json:"index_items"`
	Ignored    *int             `json:"ignored_ngrams,omitempty"`
	Docs       int64            `json:"docs"`
	Affected   int64            `json:"affected"`
	Dropped    int64            `json:"dropped"`
	Edited     int64            `json:"edited"`
	Flagged    int64            `json:"flagged"`
	SetDocs    []int64          `json:"set_docs"`
	Items      []contamPartItem `json:"items"`
	Shared     []uint32         `json:"shared"`
}

// contamPartItem is one contaminated item of a part.
type contamPartItem struct {
	Index    uint32   `json:"index"`
	Text     string   `json:"text"`
	Docs     []string `json:"docs"`
	DocCount int64    `json:"doc_count"`
	Matches  int64    `json:"matches"`
}

// SaveReport returns the part of the report observed (or merged) since
// the last save and starts a new, empty part. The n-grams Reduce ignored
// travel with the part, so the finishing process need not reduce.
func (d *Decontaminate) SaveReport() ([]byte, error) {
	r := &d.rep
	p := contamPart{
		Stage: d.name, Ngram: d.cfg.Ngram, Action: d.cfg.Action, IndexItems: len(d.itemSet),
		Docs: r.docs, Affected: r.affected, Dropped: r.dropped, Edited: r.edited, Flagged: r.flaged,
		SetDocs: slices.Clone(r.setDocs), Items: []contamPartItem{}, Shared: []uint32{},
	}
	if d.ignoredKnown {
		n := d.ignored
		p.Ignored = &n
	}
	keys := make([]uint32, 0, len(r.items))
	for k := range r.items {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	for _, k := range keys {
		it := r.items[k]
		p.Items = append(p.Items, contamPartItem{Index: k, Text: it.Text, Docs: it.Docs, DocCount: it.DocCount, Matches: it.Matches})
	}
	for k := range r.shared {
		p.Shared = append(p.Shared, k)
	}
	slices.Sort(p.Shared)
	data, err := json.Marshal(&p)
	if err != nil {
		return nil, fmt.Errorf("%s: saving the contamination report part: %w", d.name, err)
	}
	sweep := r.sinceSweep
	r.docs, r.affected, r.dropped, r.edited, r.flaged = 0, 0, 0, 0, 0
	r.init(d)
	r.sinceSweep = sweep
	return data, nil
}

// MergeReport adds a part saved by SaveReport of the same stage (same
// eval sets, n-gram and action). Parts must be merged in input order.
// A part that does not fit is an error and changes nothing.
func (d *Decontaminate) MergeReport(part []byte) error {
	var p contamPart
	dec := json.NewDecoder(bytes.NewReader(part))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&p); err != nil {
		return fmt.Errorf("%s: contamination report part: %w", d.name, err)
	}
	if dec.More() {
		return fmt.Errorf("%s: contamination report part: data after the part", d.name)
	}
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%s: contamination report part: "+format, append([]any{d.name}, args...)...)
	}
	switch {
	case p.Stage != d.name || p.Ngram != d.cfg.Ngram || p.Action != d.cfg.Action || p.IndexItems != len(d.itemSet):
		return bad("from stage %q (%d-grams, action %q, %d items), not this one (%q, %d-grams, action %q, %d items)",
			p.Stage, p.Ngram, p.Action, p.IndexItems, d.name, d.cfg.Ngram, d.cfg.Action, len(d.itemSet))
	case len(p.SetDocs) != len(d.sets):
		return bad("%d eval sets, want %d", len(p.SetDocs), len(d.sets))
	case !partCount(p.Docs) || !partCount(p.Affected) || !partCount(p.Dropped) || !partCount(p.Edited) || !partCount(p.Flagged):
		return bad("a document count is negative or above %d", maxPartCount)
	case p.Ignored != nil && (*p.Ignored < 0 || *p.Ignored > d.idx.KeyCount()):
		return bad("ignored_ngrams %d out of range (%d n-grams)", *p.Ignored, d.idx.KeyCount())
	case p.Ignored != nil && d.ignoredKnown && *p.Ignored != d.ignored:
		return bad("%d n-grams ignored, this stage ignores %d: parts of different runs", *p.Ignored, d.ignored)
	}
	for _, n := range p.SetDocs {
		if !partCount(n) {
			return bad("set_docs %d is negative or above %d", n, maxPartCount)
		}
	}
	for i, it := range p.Items {
		switch {
		case int64(it.Index) >= int64(len(d.itemSet)):
			return bad("item index %d out of range (%d items)", it.Index, len(d.itemSet))
		case i > 0 && it.Index <= p.Items[i-1].Index:
			return bad("items not in index order (%d after %d)", it.Index, p.Items[i-1].Index)
		case !partCount(it.DocCount) || !partCount(it.Matches):
			return bad("item %d: a count is negative or above %d", it.Index, maxPartCount)
		}
	}
	for i, k := range p.Shared {
		switch {
		case int64(k) >= int64(len(d.itemSet)):
			return bad("shared item index %d out of range (%d items)", k, len(d.itemSet))
		case i > 0 && k <= p.Shared[i-1]:
			return bad("shared items not sorted (%d after %d)", k, p.Shared[i-1])
		}
	}

	r := &d.rep
	if p.Ignored != nil {
		d.ignored, d.ignoredKnown = *p.Ignored, true
	}
	r.docs += p.Docs
	r.affected += p.Affected
	r.dropped += p.Dropped
	r.edited += p.Edited
	r.flaged += p.Flagged
	for i, n := range p.SetDocs {
		r.setDocs[i] += n
	}
	for _, it := range p.Items {
		ir := r.items[it.Index]
		if ir == nil {
			set := d.sets[d.itemSet[it.Index]]
			ir = &ContamItemReport{Item: set.Items[d.itemPos[it.Index]].ID, Text: it.Text}
			r.items[it.Index] = ir
		}
		ir.DocCount += it.DocCount
		ir.Matches += it.Matches
		for _, id := range it.Docs {
			if len(ir.Docs) >= contamReportDocs {
				break
			}
			ir.Docs = append(ir.Docs, id)
		}
	}
	for _, k := range p.Shared {
		r.shared[k] = true
	}
	return nil
}

// maxPartCount bounds every count of a part (2^53, the integers JSON
// readers keep exactly), so sums of parts cannot overflow.
const maxPartCount = 1 << 53

func partCount(n int64) bool { return n >= 0 && n <= maxPartCount }

var _ ReportSplitter = (*Decontaminate)(nil)
