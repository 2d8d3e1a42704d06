package audit

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"winnow/stages/termtext"
)

// WriteText prints the what-if as tables.
func (w *WhatIf) WriteText(out io.Writer) error {
	for _, c := range w.Checks {
		verdict := "all reproduced"
		if c.Mismatches > 0 {
			verdict = fmt.Sprintf("%s DIFFER (e.g. %s)", Group(c.Mismatches), strings.Join(c.Examples, "; "))
		}
		fmt.Fprintf(out, "check %s: %s decisions recomputed from stored metrics at the run's limits: %s\n", c.Stage, Group(c.Rows), verdict)
	}
	if len(w.Changes) > 0 {
		fmt.Fprintln(out, "\nchanges")
		for _, c := range w.Changes {
			for _, ru := range c.Rules {
				if ru.KeepWhen == "in" {
					fmt.Fprintf(out, "  %s: rule %s keeps %s in [%s] (run: [%s])\n", c.Set, ru.Rule, ru.Metric,
						strings.Join(ru.ToAllowed, ", "), strings.Join(ru.FromAllowed, ", "))
					continue
				}
				fmt.Fprintf(out, "  %s: rule %s keeps %s %s %s (run: %s)\n", c.Set, ru.Rule, ru.Metric, ru.KeepWhen,
					limitText(ru.ToLimit, ru.ToEnabled), limitText(ru.FromLimit, ru.FromEnabled))
			}
		}
	}
	if w.Combined != nil {
		title := "effect"
		if len(w.PerSet) > 0 {
			title = "effect of all changes together"
		}
		w.Combined.writeText(out, title, w.TokensKnown)
	}
	for _, p := range w.PerSet {
		p.writeText(out, "effect of "+p.Label+" alone", w.TokensKnown)
	}
	for _, sw := range w.Sweeps {
		fmt.Fprintf(out, "\nsweep %s.%s\n", sw.Stage, sw.Key)
		tw := tabwriter.NewWriter(out, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "%s\tremoved by %s\tdocs kept\ttokens kept\tnewly removed\tnewly kept\testimated\t\n", sw.Key, sw.Stage)
		for _, p := range sw.Points {
			toks := "n/a"
			if w.TokensKnown {
				toks = Group(p.TokensKept)
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", fmtValue(p.Value), Group(p.RemovedByStage), Group(p.DocsKept), toks,
				Group(p.NewlyRemoved), Group(p.NewlyKept), Group(p.Estimated))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if w.Combined == nil && len(w.Sweeps) == 0 {
		fmt.Fprintln(out, "no --set or --sweep given: only the check above was made")
	}
	for _, n := range w.Notes {
		fmt.Fprintf(out, "note: %s\n", n)
	}
	return nil
}

func limitText(l float64, enabled bool) string {
	if !enabled {
		return "(rule off)"
	}
	return fmtValue(l)
}

func (s *ScenarioResult) writeText(out io.Writer, title string, tokens bool) {
	fmt.Fprintf(out, "\n%s", title)
	switch {
	case s.Exact:
		fmt.Fprintln(out, " (exact: recomputed from stored metrics)")
	case s.Estimated > 0:
		fmt.Fprintf(out, " (ESTIMATE: %s document(s) rest on assumptions, see notes)\n", Group(s.Estimated))
	default:
		fmt.Fprintln(out, " (ESTIMATE: the input of a global stage changed, see notes)")
	}
	tokText := func(v int64) string {
		if !tokens {
			return "n/a"
		}
		return Group(v)
	}
	fmt.Fprintf(out, "  documents reaching the output: %s -> %s (%+d)\n", Group(s.DocsKeptRun), Group(s.DocsKept), s.DocsKept-s.DocsKeptRun)
	if tokens {
		fmt.Fprintf(out, "  tokens reaching the output:    %s -> %s (%+d)\n", Group(s.TokensKeptRun), Group(s.TokensKept), s.TokensKept-s.TokensKeptRun)
	}
	fmt.Fprintf(out, "  newly removed %s (%s tokens), newly kept %s (%s tokens), removed by another rule %s\n",
		Group(s.NewlyRemoved), tokText(s.TokensNewlyRemoved), Group(s.NewlyKept), tokText(s.TokensNewlyKept), Group(s.Moved))
	tw := tabwriter.NewWriter(out, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  stage\trule\tremoved (run)\tremoved\tchange\t")
	for _, r := range s.Rules {
		if r.Removed == r.RemovedRun {
			continue
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%+d\t\n", r.Stage, r.Rule, Group(r.RemovedRun), Group(r.Removed), r.Removed-r.RemovedRun)
	}
	for _, d := range s.Stages {
		if d.Estimate {
			fmt.Fprintf(tw, "  %s\t(global: estimate)\t%s\t%s\t%+d\t\n", d.Stage, Group(d.RemovedRun), Group(d.Removed), d.Removed-d.RemovedRun)
		}
	}
	tw.Flush()
	tw = tabwriter.NewWriter(out, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  source\tkept (run)\tkept\tdocs\ttokens\t")
	for _, src := range s.Sources {
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%+d\t%s\t\n", src.Source, Group(src.KeptRun), Group(src.Kept), src.DeltaDocs, signed(src.DeltaTokens, tokens))
	}
	tw.Flush()
	flips := func(label string, fs []Flip, total int64) {
		if len(fs) == 0 {
			return
		}
		fmt.Fprintf(out, "  %s (%d of %s):\n", label, len(fs), Group(total))
		for _, f := range fs {
			v := ""
			if f.Value != nil {
				v = " value " + fmtFloat(*f.Value)
			}
			fmt.Fprintf(out, "    %s  %s  %s/%s%s\n", termtext.Escape(f.ID), termtext.Escape(f.Source), f.Stage, f.Rule, v)
		}
	}
	flips("newly removed", s.FlipsRemoved, s.NewlyRemoved)
	flips("newly kept (removed in the run by)", s.FlipsKept, s.NewlyKept)
	for _, n := range s.Notes {
		fmt.Fprintf(out, "  note: %s\n", n)
	}
}

func signed(v int64, known bool) string {
	if !known {
		return "n/a"
	}
	if v > 0 {
		return "+" + Group(v)
	}
	return Group(v)
}
