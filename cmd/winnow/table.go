package main

import (
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"winnow/stages/audit"
	"winnow/stages/record"
)

// printStageTable prints the per-stage document and byte flow of a run.
func printStageTable(w io.Writer, m *record.Manifest, asJSON bool) error {
	if asJSON {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(map[string]any{"stages": m.Stages, "totals": m.Totals, "outputs": m.Outputs, "error_count": m.ErrorCount})
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "stage\tkind\tdocs in\tdocs out\tdropped\tedited\tMB in\tMB out\ttokens out\tseconds\t")
	for _, c := range m.Stages {
		toks := ""
		if c.TokensOut > 0 {
			toks = audit.Group(c.TokensOut)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%.2f\t%.2f\t%s\t%.2f\t\n", c.Name, c.Kind, audit.Group(c.DocsIn), audit.Group(c.DocsOut),
			audit.Group(c.Dropped), audit.Group(c.Edited), float64(c.BytesIn)/1e6, float64(c.BytesOut)/1e6, toks, c.Seconds)
	}
	return tw.Flush()
}

// printShardTable prints each output shard's documents, tokens and
// per-source token shares.
func printShardTable(w io.Writer, m *record.Manifest) {
	if len(m.Outputs) == 0 {
		return
	}
	seen := map[string]bool{}
	var sources []string
	for _, in := range m.Inputs {
		if !seen[in.Source] {
			seen[in.Source] = true
			sources = append(sources, in.Source)
		}
	}
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	counted := m.TokensCounted()
	fmt.Fprint(tw, "shard\tdocs\ttokens\t")
	for _, s := range sources {
		fmt.Fprintf(tw, "%s\t", s)
	}
	fmt.Fprintln(tw)
	for _, o := range m.Outputs {
		toks := "not counted"
		if counted {
			toks = audit.Group(o.Tokens)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t", o.Path, audit.Group(o.Docs), toks)
		for _, s := range sources {
			if o.Tokens > 0 {
				fmt.Fprintf(tw, "%.1f%%\t", 100*float64(o.Source[s])/float64(o.Tokens))
			} else {
				fmt.Fprint(tw, "-\t")
			}
		}
		fmt.Fprintln(tw)
	}
	tw.Flush()
}
