package main

import (
	"github.com/spf13/cobra"

	"winnow/stages/audit"
)

var explainOpts struct {
	asJSON  bool
	specDir string
}

var explainCmd = &cobra.Command{
	Use:   "explain RUN DOC_ID",
	Short: "Show every decision a run made about one document and where it ended up",
	Long: `Explain lists, in stage order, what each stage of a finished run did with
one document: kept, edited (with the counts of what changed) or removed, the
values it measured and each rule's limit with pass or fail. Stages after the
one that removed the document still measured it when they were in the same
segment (shadow measurement); those rows say what they would have decided.
The last line says which shard line holds the document (several when the
output split it into pieces) or which rule removed it.`,
	Example: `  winnow explain out/ forum-00000123
  winnow explain out/ "web/corpus/web/web-00000.jsonl.zst:24" --json`,
	Args: cobra.ExactArgs(2),
	RunE: func(cmd *cobra.Command, args []string) error {
		r, err := audit.Open(args[0], audit.OpenOptions{SpecDir: explainOpts.specDir})
		if err != nil {
			return err
		}
		ex, err := audit.Explain(r, args[1])
		if err != nil {
			return err
		}
		out := termOut(cmd.OutOrStdout())
		defer out.Flush()
		if explainOpts.asJSON {
			return writeJSON(out, ex)
		}
		return ex.WriteText(out)
	},
}

func init() {
	explainCmd.Flags().BoolVar(&explainOpts.asJSON, "json", false, "print the explanation as JSON")
	explainCmd.Flags().StringVar(&explainOpts.specDir, "spec-dir", "", "directory the run's spec was in (to rebuild rule limits; default: guessed)")
	rootCmd.AddCommand(explainCmd)
}
