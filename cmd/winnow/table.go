package main

import (
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"winnow/stages"
	"winnow/stages/audit"
)

// printStageTable prints the per-stage document and byte flow of a run.
func printStageTable(w io.Writer, m *stages.Manifest, asJSON bool) error {
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

// parseBytes parses sizes like 512MiB, 2GB, 1e9 or 4096 ("" is 0).
func parseBytes(s string) (int64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, nil
	}
	units := []struct {
		suf string
		mul float64
	}{{"KiB", 1 << 10}, {"MiB", 1 << 20}, {"GiB", 1 << 30}, {"TiB", 1 << 40}, {"KB", 1e3}, {"MB", 1e6}, {"GB", 1e9}, {"TB", 1e12}, {"K", 1 << 10}, {"M", 1 << 20}, {"G", 1 << 30}, {"B", 1}}
	mul := 1.0
	for _, u := range units {
		if strings.HasSuffix(strings.ToUpper(s), strings.ToUpper(u.suf)) {
			s = strings.TrimSpace(s[:len(s)-len(u.suf)])
			mul = u.mul
			break
		}
	}
	f, err := strconv.ParseFloat(s, 64)
	if err != nil || f < 0 {
		return 0, fmt.Errorf("want a size like 512MiB, got %q", s)
	}
	return int64(f * mul), nil
}

// printShardTable prints each output shard's documents, tokens and
// per-source token shares.
func printShardTable(w io.Writer, m *stages.Manifest) {
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
	fmt.Fprint(tw, "shard\tdocs\ttokens\t")
	for _, s := range sources {
		fmt.Fprintf(tw, "%s\t", s)
	}
	fmt.Fprintln(tw)
	for _, o := range m.Outputs {
		fmt.Fprintf(tw, "%s\t%s\t%s\t", o.Path, audit.Group(o.Docs), audit.Group(o.Tokens))
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
