package main

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"winnow/configs"
	"winnow/stages/spec"
	"winnow/stages/synth"
)

var demoOpts struct {
	out   string
	docs  int
	seed  uint64
	force bool
	run   runFlags
}

var demoCmd = &cobra.Command{
	Use:   "demo",
	Short: "Generate a small synthetic corpus and run the bundled demo spec on it",
	Long: `Demo generates a small corpus in the invented Larkspur Marine Works scenario
(repair manuals, forum threads, dealer pages with boilerplate, spam, copies,
pages in other languages, and a held-out eval set "hull-qa" partly leaked
into forum posts), writes the bundled demo spec next to it, runs it, and
prints what each stage removed and where the outputs are.`,
	Example: `  winnow demo
  winnow demo --out /tmp/larkspur --docs 5000`,
	Args: cobra.NoArgs,
	RunE: func(cmd *cobra.Command, args []string) error {
		dir := demoOpts.out
		var err error
		if dir == "" {
			if dir, err = os.MkdirTemp("", "winnow-demo-"); err != nil {
				return err
			}
		} else if entries, _ := os.ReadDir(dir); len(entries) > 0 && !demoOpts.force {
			return fmt.Errorf("%s is not empty: choose a fresh directory or pass --force", dir)
		}
		sp, err := writeDemo(dir, demoOpts.docs, demoOpts.seed)
		if err != nil {
			return err
		}
		fmt.Fprintf(os.Stderr, "winnow: demo corpus and spec in %s\n", dir)
		f := demoOpts.run
		f.force = true
		res, err := runLoaded(cmd.Context(), sp, f)
		if err != nil {
			return err
		}
		out := termOut(os.Stdout)
		printShardTable(out, res.Manifest)
		out.Flush()
		fmt.Printf("\nrun directory: %s\n  shards:   %s\n  ledger:   %s\n  manifest: %s\n",
			res.Dir, filepath.Join(res.Dir, "shards"), filepath.Join(res.Dir, "ledger"), filepath.Join(res.Dir, "manifest.json"))
		if err := writeDemoReport(res); err != nil {
			return err
		}
		return printDemoContamination(res)
	},
}

// writeDemo generates the corpus under dir/corpus and writes dir/demo.yaml.
func writeDemo(dir string, docs int, seed uint64) (*spec.Spec, error) {
	if _, err := synth.Generate(synth.Options{Dir: filepath.Join(dir, "corpus"), Docs: docs, Seed: seed}); err != nil {
		return nil, fmt.Errorf("generating the demo corpus: %w", err)
	}
	b, err := configs.FS.ReadFile("demo.yaml")
	if err != nil {
		return nil, err
	}
	p := filepath.Join(dir, "demo.yaml")
	if err := os.WriteFile(p, b, 0o644); err != nil {
		return nil, err
	}
	return spec.LoadSpec(p)
}

func init() {
	demoCmd.Flags().StringVar(&demoOpts.out, "out", "", "directory for corpus, spec and run (default: a new temp directory)")
	demoCmd.Flags().IntVar(&demoOpts.docs, "docs", 2000, "documents in the generated corpus")
	demoCmd.Flags().Uint64Var(&demoOpts.seed, "seed", 7, "corpus seed")
	demoCmd.Flags().BoolVar(&demoOpts.force, "force", false, "write into a non-empty --out")
	demoCmd.Flags().IntVar(&demoOpts.run.workers, "workers", 0, "worker goroutines (default: number of cores)")
	demoCmd.Flags().BoolVarP(&demoOpts.run.quiet, "quiet", "q", false, "no progress line")
	rootCmd.AddCommand(demoCmd)
}
