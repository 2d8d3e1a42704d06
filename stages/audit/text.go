package audit

import (
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"winnow/stages"
	"winnow/stages/termtext"
)

// Group formats n with thousands separators.
func Group(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// HumanBytes formats a byte count with a decimal unit ("812 B", "4.1 kB",
// "5.99 MB").
func HumanBytes(n int64) string {
	neg := n < 0
	if neg {
		n = -n
	}
	var s string
	switch {
	case n < 1000:
		s = fmt.Sprintf("%d B", n)
	case n < 1e6:
		s = fmt.Sprintf("%.1f kB", float64(n)/1e3)
	case n < 1e9:
		s = fmt.Sprintf("%.2f MB", float64(n)/1e6)
	case n < 1e12:
		s = fmt.Sprintf("%.2f GB", float64(n)/1e9)
	default:
		s = fmt.Sprintf("%.2f TB", float64(n)/1e12)
	}
	if neg {
		return "-" + s
	}
	return s
}

// Percent formats a share (0..1) as a percentage with one decimal, or two
// below 1%.
func Percent(f float64) string {
	p := 100 * f
	if p != 0 && p < 1 && p > -1 {
		return fmt.Sprintf("%.2f%%", p)
	}
	return fmt.Sprintf("%.1f%%", p)
}

// BytesCell is a rule's bytes as shown in tables: "n/a" when unknown and
// "~" in front when estimated.
func (r *RuleRow) BytesCell() string {
	switch {
	case !r.BytesKnown:
		return "n/a"
	case !r.BytesExact:
		return "~" + HumanBytes(r.Bytes)
	}
	return HumanBytes(r.Bytes)
}

// TokensCell is a rule's tokens as shown in tables: "n/a" when no removed
// document was measured, "≥N" when some were not.
func (r *RuleRow) TokensCell() string {
	switch {
	case r.Action != "drop" || r.TokensDocs == 0:
		return "not counted"
	case r.TokensDocs < r.Docs:
		return "≥" + Group(r.Tokens)
	}
	return Group(r.Tokens)
}

// TokensCell formats a token figure of the flow.
func (f *FlowRow) TokensCell(v int64) string {
	switch {
	case !f.TokensKnown:
		return "not counted"
	case !f.TokensExact:
		return "≥" + Group(v)
	}
	return Group(v)
}

// WriteText prints the summary as the tables `winnow audit` shows.
func (s *Summary) WriteText(w io.Writer) error {
	fmt.Fprintf(w, "run %s (%s): winnow %s, config %s", s.Name, s.Run, s.ToolVersion, s.ConfigHash)
	if s.Interrupted {
		fmt.Fprint(w, ", INTERRUPTED (the ledger covers the documents decided before the stop)")
	}
	fmt.Fprintf(w, "\n%s documents read from %s file(s) (%s) -> %s documents in the output", Group(s.Totals.DocsIn),
		Group(int64(s.Totals.InputFiles)), HumanBytes(s.Totals.InputBytes), Group(s.Totals.DocsOut))
	if s.TokenStage != "" {
		fmt.Fprintf(w, ", %s tokens", Group(s.Totals.TokensOut))
	} else {
		fmt.Fprint(w, ", tokens not counted (no output.tokenizer)")
	}
	fmt.Fprintln(w)
	for _, l := range s.LeftOut {
		fmt.Fprintf(w, "left out of the output: %s\n", l)
	}
	s.writeDomainHeadline(w)

	fmt.Fprintln(w, "\nflow")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "stage\tkind\tdocs in\tdocs out\tremoved\tedited\tbytes in\tbytes out\ttokens in\ttokens out\t")
	for _, f := range s.Flow {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", f.Stage, f.Kind, Group(f.DocsIn), Group(f.DocsOut),
			Group(f.Dropped), Group(f.Edited), HumanBytes(f.BytesIn), HumanBytes(f.BytesOut), f.TokensCell(f.TokensIn), f.TokensCell(f.TokensOut))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, f := range s.Flow {
		if f.Skipped > 0 {
			fmt.Fprintf(w, "%s: %s of its %s documents in were outside its only: scope (passed untouched, not measured)\n",
				f.Stage, Group(f.Skipped), Group(f.DocsIn))
		}
	}

	if err := s.writeStageShares(w); err != nil {
		return err
	}

	fmt.Fprintln(w, "\nremoved or edited, by stage and rule (shares of the stage's documents, bytes and tokens in)")
	if len(s.Rules) == 0 {
		fmt.Fprintln(w, "  nothing was removed or edited")
	} else {
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "stage\trule\taction\tdocs\tdocs %\tbytes\tbytes %\ttokens\ttokens %\tsample ids")
		for i := range s.Rules {
			r := &s.Rules[i]
			ids := make([]string, len(r.Samples))
			for j, id := range r.Samples {
				ids[j] = termtext.Escape(id)
			}
			samples := strings.Join(ids, ", ")
			if ch := changesText(r.Changes); ch != "" && r.Action == "edit" {
				samples = ch + "; " + samples
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\n", r.Stage, r.Rule, r.Action, Group(r.Docs), Percent(r.Share),
				r.BytesCell(), r.BytesShareCell(), r.TokensCell(), r.TokensShareCell(), samples)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}

	fmt.Fprintln(w, "\nby source (documents)")
	var stageCols []string
	seen := map[string]bool{}
	for _, f := range s.Flow[1 : len(s.Flow)-1] {
		for _, src := range s.Sources {
			for _, rc := range src.Removed {
				if rc.Stage == f.Stage && !seen[f.Stage] {
					seen[f.Stage] = true
					stageCols = append(stageCols, f.Stage)
				}
			}
		}
	}
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	hdr := "source\tread\tread errors\t"
	for _, c := range stageCols {
		hdr += "-" + c + "\t"
	}
	hdr += "to output\ttokens to output\tin shards\t"
	fmt.Fprintln(tw, hdr)
	for _, src := range s.Sources {
		line := fmt.Sprintf("%s\t%s\t%s\t", src.Source, Group(src.DocsRead), Group(src.ReadErrors))
		for _, c := range stageCols {
			n := int64(0)
			for _, rc := range src.Removed {
				if rc.Stage == c {
					n = rc.Docs
				}
			}
			line += Group(n) + "\t"
		}
		toks := "n/a"
		if s.TokenStage != "" {
			toks = Group(src.TokensToOutput)
		}
		shards := "n/a"
		if src.OutputDocs >= 0 {
			shards = Group(src.OutputDocs)
		}
		line += Group(src.ToOutput) + "\t" + toks + "\t" + shards + "\t"
		fmt.Fprintln(tw, line)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if err := s.writeDomainText(w); err != nil {
		return err
	}

	fmt.Fprintln(w, "\ncontamination")
	if s.Contamination == nil {
		fmt.Fprintln(w, "  no contamination report (the run has no decontaminate stage)")
	} else if err := writeContam(&indent{w: w}, s.Contamination); err != nil {
		return err
	}

	missing := 0
	for _, in := range s.Inputs {
		if in.Status != "ok" {
			missing++
		}
	}
	fmt.Fprintf(w, "\ninputs: %d file(s)", len(s.Inputs))
	if missing == 0 {
		fmt.Fprintln(w, ", all still present (the text of removed documents can be shown with --rule R --samples N)")
	} else {
		fmt.Fprintf(w, ", %d missing or changed since the run (their removed documents' text cannot be shown):\n", missing)
		for _, in := range s.Inputs {
			if in.Status != "ok" {
				fmt.Fprintf(w, "  %s: %s\n", termtext.Escape(in.Path), in.Status)
			}
		}
	}
	fmt.Fprintf(w, "input errors: %d\n", s.ErrorCount)
	for _, e := range s.Errors {
		loc := e.File
		if e.Line > 0 {
			loc += fmt.Sprintf(":%d", e.Line)
		} else if e.Offset > 0 {
			loc += fmt.Sprintf(" at byte %d", e.Offset)
		}
		rule := ""
		if e.Rule != "" {
			rule = e.Rule + ": "
		}
		fatal := ""
		if e.Fatal {
			fatal = " (the rest of the file was not read)"
		}
		fmt.Fprintf(w, "  %s: %s%s%s\n", termtext.Escape(loc), termtext.Escape(rule), termtext.Escape(e.Message), fatal)
	}
	if n := s.ErrorCount - int64(len(s.Errors)); n > 0 {
		fmt.Fprintf(w, "  ... and %d more in ledger/read.jsonl.zst\n", n)
	}
	for _, n := range s.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}

// changesText formats summed edit changes ("lines_removed 120, chars 3,400").
func changesText(ch map[string]int64) string {
	if len(ch) == 0 {
		return ""
	}
	keys := sortedKeys(ch)
	parts := make([]string, 0, len(keys))
	for _, k := range keys {
		parts = append(parts, k+" "+Group(ch[k]))
	}
	return strings.Join(parts, ", ")
}

// indent prefixes every line written through it with two spaces.
type indent struct {
	w   io.Writer
	mid bool // the last write did not end a line
}

// Write indents p.
func (in *indent) Write(p []byte) (int, error) {
	var b []byte
	for _, c := range p {
		if !in.mid && c != '\n' {
			b = append(b, ' ', ' ')
		}
		b = append(b, c)
		in.mid = c != '\n'
	}
	if _, err := in.w.Write(b); err != nil {
		return 0, err
	}
	return len(p), nil
}

// contamShownItems contaminated items are listed per eval set in the
// audit text; contamination.json (and winnow contam) has them all.
const contamShownItems = 5

// writeContam prints the per-eval-set summary and the first items.
func writeContam(w io.Writer, c *stages.ContamReport) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	// Items too short to check are not checked: the percentage is over
	// the items checked (items minus too short), as in contamination.json.
	fmt.Fprintln(tw, "eval set\titems\ttoo short\titems checked\tcontaminated\t% of checked\tdocs affected\t")
	for _, e := range c.Evals {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%.1f%%\t%s\t\n", e.Name, Group(int64(e.Items)), Group(int64(e.ItemsTooShort)),
			Group(int64(e.Items-e.ItemsTooShort)), Group(int64(e.ItemsContaminated)), e.Percent, Group(e.DocsAffected))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "%d-gram overlap, action %s: %s documents scanned, %s affected (%s dropped, %s cut, %s flagged)\n", c.Ngram, c.Action,
		Group(c.DocsScanned), Group(c.DocsAffected), Group(c.DocsDropped), Group(c.DocsEdited), Group(c.DocsFlagged))
	for _, e := range c.Evals {
		if e.ItemsTooShort > 0 {
			ids := e.TooShort[:min(len(e.TooShort), contamShownItems)]
			more := ""
			if n := e.ItemsTooShort - len(ids); n > 0 {
				more = fmt.Sprintf(" (+%d more in contamination.json)", n)
			}
			fmt.Fprintf(w, "  %s: %s item(s) too short to check (fewer than %d words in every part): %s%s\n", e.Name, Group(int64(e.ItemsTooShort)),
				c.MinItemWords, strings.Join(ids, ", "), more)
		}
	}
	for _, e := range c.Evals {
		for i, it := range e.Contaminated {
			if i == contamShownItems {
				fmt.Fprintf(w, "  ... %d more in contamination.json\n", len(e.Contaminated)-contamShownItems)
				break
			}
			text := it.Text
			if len(text) > 90 {
				text = text[:90]
				for len(text) > 0 && !utf8Start(text[len(text)-1]) {
					text = text[:len(text)-1]
				}
				text += "…"
			}
			eg := ""
			if len(it.Docs) > 0 {
				eg = ", e.g. " + it.Docs[0]
			}
			fmt.Fprintf(w, "  %s/%s: %s doc(s)%s: %q\n", e.Name, it.Item, Group(it.DocCount), eg, text)
		}
	}
	return nil
}
