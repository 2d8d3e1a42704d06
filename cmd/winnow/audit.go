package main

import (
	"encoding/json"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"winnow/stages/audit"
	"winnow/stages/run"
	"winnow/stages/termtext"
)

var auditOpts struct {
	asJSON  bool
	rule    string
	samples int
	html    string
	specDir string
}

var auditCmd = &cobra.Command{
	Use:   "audit RUN",
	Short: "Show what every stage of a finished run removed or edited, and why",
	Long: `Audit reads a run directory (manifest.json, ledger/, metrics/,
contamination.json) and prints, per stage and rule, the documents, bytes
and tokens removed or edited with their share of the stage's input and a
few sample ids; the stage-by-stage flow of documents and tokens; a
per-source breakdown; the contamination summary; and the input errors.

Tokens are known when the run counted them (output.tokenizer): the token
stage measures every document, including those already removed (shadow
measurement), except documents removed before a global stage (dedup), for
which figures are marked as lower bounds (≥). Bytes are exact where a
stage's metrics or the manifest's counters tell them, else marked ~.

--rule R --samples N prints N documents the rule removed (R is a rule
name, or STAGE/RULE) with the offending part marked between [[ and ]]:
repeated lines, matched eval n-grams, what differs from a near-duplicate's
kept twin. Removed documents are not in the shards, so their text is read
again from the run's inputs at the file and line the ledger names; when
an input is gone (or changed size) this is said and only the ledger's
values are shown.

--html FILE writes one self-contained HTML report (no network access,
no scripts): the flow, a histogram per metric with its thresholds, the
removals per rule and source, a what-if sweep of every threshold (the
documents reaching the output at a few limits around the run's, computed
from stored metrics as winnow whatif --sweep does, estimates marked), the
contamination table and a sample of removed documents with their reasons.

A run with a domain stage also gets, in the text, the share of each source
the stage kept and a one-line histogram of domain_score per source, and in
the HTML report a histogram per source with the cut marked and the highest
and lowest scoring documents with the start of their text.`,
	Example: `  winnow audit out/
  winnow audit out/ --json | jq '.rules[] | select(.stage=="quality")'
  winnow audit out/ --rule repeated_lines_share --samples 3
  winnow audit out/ --html out/report.html`,
	Args: cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		out := termOut(cmd.OutOrStdout())
		defer out.Flush()
		if run.IsSplitRunDir(args[0]) {
			return auditSplit(out, args[0], auditOpts.asJSON)
		}
		r, err := audit.Open(args[0], audit.OpenOptions{SpecDir: auditOpts.specDir})
		if err != nil {
			return err
		}
		if auditOpts.rule != "" && auditOpts.html != "" {
			return fmt.Errorf("--rule and --html do not go together: the report already shows samples of every rule")
		}
		if auditOpts.rule != "" {
			n := auditOpts.samples
			if n <= 0 {
				n = 5
			}
			res, err := audit.RuleSamples(r, auditOpts.rule, n)
			if err != nil {
				return err
			}
			if auditOpts.asJSON {
				return writeJSON(out, res)
			}
			return res.WriteText(out)
		}
		n := auditOpts.samples
		if n <= 0 {
			n = 3
		}
		if auditOpts.html != "" {
			rep, err := audit.BuildReport(r, audit.ReportOptions{SampleIDs: n})
			if err != nil {
				return err
			}
			if err := rep.WriteHTMLFile(auditOpts.html); err != nil {
				return err
			}
			fmt.Fprintf(cmd.ErrOrStderr(), "winnow: report written to %s\n", termtext.EscapeLines(auditOpts.html))
			if auditOpts.asJSON {
				return writeJSON(out, rep.Summary)
			}
			return nil
		}
		s, _, err := audit.Summarize(r, audit.SummaryOptions{Samples: n})
		if err != nil {
			return err
		}
		if auditOpts.asJSON {
			return writeJSON(out, s)
		}
		return s.WriteText(out)
	},
}

// writeJSON prints v as indented JSON.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

func init() {
	f := auditCmd.Flags()
	f.BoolVar(&auditOpts.asJSON, "json", false, "print the audit as JSON")
	f.StringVar(&auditOpts.rule, "rule", "", "show removed documents of this rule (RULE or STAGE/RULE)")
	f.IntVar(&auditOpts.samples, "samples", 0, "sample ids per rule in the table (default 3), or documents shown with --rule (default 5)")
	f.StringVar(&auditOpts.html, "html", "", "write a self-contained HTML report to this file")
	f.StringVar(&auditOpts.specDir, "spec-dir", "", "directory the run's spec was in, against which its relative input and eval paths resolve (default: guessed from the run directory and output.dir)")
	rootCmd.AddCommand(auditCmd)
}

// writeDemoReport writes RUN/report.html for the demo and prints its path.
func writeDemoReport(res *run.RunResult) error {
	r, err := audit.Open(res.Dir, audit.OpenOptions{})
	if err != nil {
		return err
	}
	rep, err := audit.BuildReport(r, audit.ReportOptions{SampleIDs: 3})
	if err != nil {
		return err
	}
	p := filepath.Join(res.Dir, "report.html")
	if err := rep.WriteHTMLFile(p); err != nil {
		return err
	}
	fmt.Printf("  report:   %s\n", p)
	return nil
}

// auditSplit lists where an unfinished split run stands: units done per
// phase, the failed ones with their error, host and inputs, the missing
// ones, and the command that finishes each phase.
func auditSplit(out io.Writer, dir string, asJSON bool) error {
	st, err := run.ReadSplitStatus(dir)
	if err != nil {
		return err
	}
	if asJSON {
		if err := writeJSON(out, st); err != nil {
			return err
		}
	} else {
		fmt.Fprintf(out, "%s holds an unfinished split run of %s\n", dir, st.Spec)
		for _, p := range st.Phases {
			fmt.Fprintf(out, "phase %-16s %d of %d units done\n", p.Name, p.Done, p.Units)
			for _, f := range p.Failed {
				fmt.Fprintf(out, "  unit %d failed on %s (pid %d): %s\n    inputs: %s\n", f.Unit, f.Host, f.PID, f.Error, strings.Join(f.Inputs, ", "))
			}
			if len(p.Missing) > 0 {
				fmt.Fprintf(out, "  units not run: %s\n", intList(p.Missing))
			}
			if p.Rerun != "" {
				fmt.Fprintf(out, "  to finish it: %s   (any --task/--tasks; finished units are skipped)\n", p.Rerun)
			}
		}
	}
	return fmt.Errorf("the run in %s is not finished: audit needs its write phase (see above)", dir)
}

func intList(v []int) string {
	// Runs of three or more consecutive units read as ranges ("0-63"),
	// so that a phase not yet started does not print 64 numbers.
	var s []string
	for i := 0; i < len(v); {
		j := i
		for j+1 < len(v) && v[j+1] == v[j]+1 {
			j++
		}
		switch {
		case j-i >= 2:
			s = append(s, strconv.Itoa(v[i])+"-"+strconv.Itoa(v[j]))
		case j > i:
			s = append(s, strconv.Itoa(v[i]), strconv.Itoa(v[j]))
		default:
			s = append(s, strconv.Itoa(v[i]))
		}
		i = j + 1
	}
	return strings.Join(s, ", ")
}
