package main

import (
	"github.com/spf13/cobra"

	"winnow/stages/audit"
)

var whatifOpts struct {
	sets    []string
	sweeps  []string
	samples int
	asJSON  bool
	specDir string
}

var whatifCmd = &cobra.Command{
	Use:   "whatif RUN --set STAGE.KEY=VALUE... [--sweep STAGE.KEY=FROM:TO:STEP]",
	Short: "Recompute from stored metrics what other thresholds would keep or remove",
	Long: `Whatif re-decides every document of a finished run with other limits for
threshold rules, from the run's metrics files alone (no input is read):
how many documents and tokens each change would keep or remove, the net
change per source, and the first ids that would flip. With several --set
flags it shows their joint effect and each one alone. --sweep prints the
curve of one limit (on top of the --set values).

It first recomputes every rebuilt threshold stage at the run's own limits
and checks that this reproduces the run's decisions.

Documents an earlier stage removed were still measured by the later
per-document stages (shadow measurement), so loosening an early rule is
exact through those stages. Global stages (exact_dedup, near_dedup, and
decontaminate with a counting pass) are not recomputed: when a change
alters what reaches them, or reaches anything after them, the figures are
marked as an estimate and say why. Only limits can change, and langid's
languages (each document's detected language is stored); keys that
change what is measured need a re-run (winnow run --set).`,
	Example: `  winnow whatif out/ --set quality.fewest_words=80
  winnow whatif out/ --set quality.fewest_words=80 --set repetition.most_repeated_lines=0.2
  winnow whatif out/ --set langid.languages=en,de
  winnow whatif out/ --sweep quality.fewest_words=20:200:20 --json`,
	Args: cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		r, err := audit.Open(args[0], audit.OpenOptions{SpecDir: whatifOpts.specDir})
		if err != nil {
			return err
		}
		w, err := audit.RunWhatIf(r, audit.WhatIfOptions{Sets: whatifOpts.sets, Sweeps: whatifOpts.sweeps, Samples: whatifOpts.samples})
		if err != nil {
			return err
		}
		out := termOut(cmd.OutOrStdout())
		defer out.Flush()
		if whatifOpts.asJSON {
			return writeJSON(out, w)
		}
		return w.WriteText(out)
	},
}

func init() {
	f := whatifCmd.Flags()
	f.StringArrayVar(&whatifOpts.sets, "set", nil, "a new limit, STAGE.KEY=VALUE (repeatable)")
	f.StringArrayVar(&whatifOpts.sweeps, "sweep", nil, "a curve over one limit, STAGE.KEY=FROM:TO:STEP or STAGE.KEY=V1,V2,... (repeatable)")
	f.IntVar(&whatifOpts.samples, "samples", 5, "flipping document ids listed per direction")
	f.BoolVar(&whatifOpts.asJSON, "json", false, "print the result as JSON")
	f.StringVar(&whatifOpts.specDir, "spec-dir", "", "directory the run's spec was in (to rebuild stages; default: guessed)")
	rootCmd.AddCommand(whatifCmd)
}
