package audit

import (
	"fmt"
	"io"
	"text/tabwriter"
)

// Shares of documents, bytes and tokens.
//
// A rule's share of documents alone can hide what it costs: a page rule
// that drops 8% of the documents may drop the longest ones and with them
// 39% of the text, and an edit that touches every document may cut a
// third of each. So beside each rule's and stage's share of documents the
// audit gives its share of bytes (of what the stage took in: dropped
// documents whole, and what edits cut, from the ledger's "bytes") and of
// tokens (of the dropped documents, as the token stage counted them; the
// text an edit cuts is never tokenized, so edits say "not counted").

// heavyShareFactor and heavyShareFloor pick the rules a note names: those
// whose share of bytes is at least heavyShareFactor times their share of
// documents and at least heavyShareFloor (our own rule of thumb: a rule
// that takes out much more text than documents is worth a look).
const (
	heavyShareFactor = 2.0
	heavyShareFloor  = 0.05
)

// fillShares sets the byte and token shares of every rule and stage row
// and adds a note for each rule whose share of bytes outweighs its share
// of documents. It runs after the flow is built (token figures of a stage
// come from it).
func (s *Summary) fillShares(r *Run) {
	flowOf := func(step int) *FlowRow {
		switch {
		case step == -1 && len(s.Flow) > 0:
			return &s.Flow[0]
		case step >= 0 && step+1 < len(s.Flow)-1:
			return &s.Flow[step+1]
		}
		return nil
	}
	for i := range s.Flow {
		f := &s.Flow[i]
		if f.Stage == "read" || f.Stage == "write" {
			continue
		}
		f.BytesRemoved = f.BytesIn - f.BytesOut
		if f.DocsIn > 0 {
			f.DroppedShare = float64(f.Dropped) / float64(f.DocsIn)
		}
		if f.BytesIn > 0 {
			f.BytesShare = float64(f.BytesRemoved) / float64(f.BytesIn)
		}
		if f.TokensKnown && f.TokensExact && f.TokensIn > 0 {
			f.TokensShare = ratio(f.TokensRemoved, f.TokensIn)
		}
	}
	for i := range s.Rules {
		rr := &s.Rules[i]
		f := flowOf(rr.step)
		if f == nil {
			continue
		}
		if rr.BytesKnown && f.BytesIn > 0 {
			rr.BytesShare = ratio(rr.Bytes, f.BytesIn)
		}
		if rr.TokensKnownAll() && f.TokensKnown && f.TokensExact && f.TokensIn > 0 {
			rr.TokensShare = ratio(rr.Tokens, f.TokensIn)
		}
		if rr.BytesShare != nil && *rr.BytesShare >= heavyShareFloor && *rr.BytesShare >= heavyShareFactor*rr.Share {
			verb := "removed"
			if rr.Action == "edit" {
				verb = "edited"
			}
			s.Notes = append(s.Notes, fmt.Sprintf("%s %s %s of the stage's documents but took out %s of its bytes",
				rr.Label(), verb, Percent(rr.Share), Percent(*rr.BytesShare)))
		}
	}
}

func ratio(a, b int64) *float64 {
	v := float64(a) / float64(b)
	return &v
}

// BytesShareCell is a rule's share of bytes as shown in tables.
func (r *RuleRow) BytesShareCell() string {
	if r.BytesShare == nil {
		return "n/a"
	}
	if !r.BytesExact {
		return "~" + Percent(*r.BytesShare)
	}
	return Percent(*r.BytesShare)
}

// TokensShareCell is a rule's share of tokens as shown in tables: "not
// counted" for edits and when some removed document had no count.
func (r *RuleRow) TokensShareCell() string {
	if r.TokensShare == nil {
		return "not counted"
	}
	return Percent(*r.TokensShare)
}

// TokensShareCell is a stage's share of tokens removed by drops.
func (f *FlowRow) TokensShareCell() string {
	if f.TokensShare == nil {
		return "not counted"
	}
	return Percent(*f.TokensShare)
}

// writeStageShares prints what each stage removed as shares of what it
// took in: documents dropped, bytes dropped or cut, tokens of the
// dropped documents.
func (s *Summary) writeStageShares(w io.Writer) error {
	if len(s.Flow) < 3 {
		return nil
	}
	fmt.Fprintln(w, "\nremoved by stage (shares of the stage's documents, bytes and tokens in; tokens of dropped documents only)")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "stage\tdocs dropped\tdocs %\tbytes removed\tbytes %\ttokens removed\ttokens %\t")
	for _, f := range s.Flow[1 : len(s.Flow)-1] {
		toks := "not counted"
		switch {
		case !f.TokensKnown || f.Dropped > 0 && f.TokensUnknown == f.Dropped:
		case f.TokensUnknown > 0:
			toks = "≥" + Group(f.TokensRemoved)
		default:
			toks = Group(f.TokensRemoved)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", f.Stage, Group(f.Dropped), Percent(f.DroppedShare),
			HumanBytes(f.BytesRemoved), Percent(f.BytesShare), toks, f.TokensShareCell())
	}
	return tw.Flush()
}

// pct is a share in the HTML report, marked with its JSON key (data-p)
// so the browser test can compare it with `audit --json`; "not counted"
// when v is nil, "~" in front when not exact.
func pct(key string, v *float64, exact bool) string {
	if v == nil {
		return "not counted"
	}
	pre := ""
	if !exact {
		pre = "~"
	}
	return fmt.Sprintf(`%s<span class="p" data-p="%s">%s</span>`, pre, esc(key), esc(Percent(*v)))
}

// stageSharesTable is the report's table of what each stage removed, as
// shares of what it took in.
func (rep *Report) stageSharesTable(h *htmlw) {
	s := rep.Summary
	if len(s.Flow) < 3 {
		return
	}
	h.s(`<h3>Removed, as shares of each stage's input</h3><div class="scroll"><table><thead><tr><th>stage</th><th class="r">docs dropped</th><th class="r">share of docs</th><th class="r">bytes removed (drops and edits)</th><th class="r">share of bytes</th><th class="r">share of tokens (drops)</th></tr></thead><tbody>`)
	for i := 1; i < len(s.Flow)-1; i++ {
		f := &s.Flow[i]
		k := "flow." + f.Stage
		h.w(`<tr><td>%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td><td class="r">%s</td></tr>`,
			esc(f.Stage), num(k+".dropped", f.Dropped), pct(k+".dropped_share", &f.DroppedShare, true), num(k+".bytes_removed", f.BytesRemoved),
			pct(k+".bytes_share", &f.BytesShare, true), pct(k+".tokens_share", f.TokensShare, true))
	}
	h.s(`</tbody></table></div>`)
}
