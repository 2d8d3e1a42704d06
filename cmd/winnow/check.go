package main

import (
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/run"
	"winnow/stages/spec"
)

var checkPhases bool

var checkCmd = &cobra.Command{
	Use:   "check SPEC",
	Short: "Validate a spec and its inputs without running it",
	Long: `Check loads the spec, reports every unknown key, wrong type and out-of-range
value with file:line:column, resolves every input path (a missing file or an
empty glob is an error), builds every stage, and prints the plan: inputs,
stages with their parameters' effects (e.g. the LSH S-curve of near_dedup).`,
	Example: `  winnow check configs/default.yaml
  winnow check spec.yaml --phases      # the phases to run with winnow run --phase`,
	Args: cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		sp, err := spec.LoadSpec(args[0])
		if err != nil {
			return err
		}
		inputs, err := spec.ResolveInputs(sp)
		if err != nil {
			return err
		}
		steps, err := sp.BuildStages(stages.Env{Checking: true})
		if err != nil {
			return err
		}
		if checkPhases {
			for _, p := range run.Phases(steps, record.PlannedOutput(sp.Output)) {
				fmt.Fprintln(cmd.OutOrStdout(), p.Name)
			}
			return nil
		}
		if _, err := record.OutputStage(sp.Output, stages.Env{Checking: true}); err != nil {
			return err
		}
		if _, err := record.OpenSink(sp.Output, stages.Env{Checking: true}, sp.Name); err != nil {
			return err
		}
		warnings, err := run.CheckStructure(inputs, steps)
		if err != nil {
			return err
		}
		w := termOut(cmd.OutOrStdout())
		defer w.Flush()
		if checkJSON {
			return printPlanJSON(w, sp, inputs, steps, warnings)
		}
		var total int64
		bySource := map[string]int{}
		for _, in := range inputs {
			if in.Size > 0 {
				total += in.Size
			}
			bySource[in.Options.Source]++
		}
		fmt.Fprintf(w, "spec %s (name %s, seed %d, config hash %s)\n", sp.File, sp.Name, sp.Seed, sp.ConfigHash)
		fmt.Fprintf(w, "inputs: %d files, %.1f MB\n", len(inputs), float64(total)/1e6)
		for _, in := range sp.Inputs {
			fmt.Fprintf(w, "  %-12s %d files, format %s\n", in.Source, bySource[in.Source], in.Format)
		}
		fmt.Fprintln(w, "stages:")
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for i, st := range steps {
			kind := ""
			var desc string
			var obj any
			if st.Stage != nil {
				kind, obj = st.Stage.Kind(), st.Stage
			} else {
				kind, obj = st.Global.Kind()+" (global)", st.Global
			}
			k, _ := stages.LookupKind(sp.Stages[i].Kind)
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\n", i+1, st.Name, kind, k.Doc)
			if st.Only != nil {
				fmt.Fprintf(tw, "\t\t  only\t%s (other documents pass untouched)\n", st.Only)
			}
			if d, ok := obj.(stages.Describer); ok {
				desc = d.Describe()
			}
			if ts, ok := obj.(stages.ThresholdStage); ok {
				for _, r := range ts.Rules() {
					if r.Enabled {
						fmt.Fprintf(tw, "\t\t  %s\tkeep %s %s %g\n", r.Key, r.Metric, r.Cmp, r.Limit)
					}
				}
			}
			if desc != "" {
				tw.Flush()
				fmt.Fprintln(w, indent(desc, "      "))
			}
		}
		tw.Flush()
		var srcs []string
		for _, in := range sp.Inputs {
			srcs = append(srcs, in.Source)
		}
		left, err := record.PredictLeftOut(sp.Output, stages.Env{Checking: true}, srcs)
		if err != nil {
			return err
		}
		if len(left) > 0 {
			fmt.Fprintln(w, "output (mix):")
			for _, l := range left {
				fmt.Fprintln(w, "  "+l)
			}
		}
		printStructureWarnings(w, warnings)
		fmt.Fprintln(w, "ok")
		return nil
	},
}

func indent(s, pre string) string {
	out := pre
	for i := 0; i < len(s); i++ {
		out += string(s[i])
		if s[i] == '\n' && i+1 < len(s) {
			out += pre
		}
	}
	return out
}

var checkJSON bool

// planStage is one stage of `check --json`.
type planStage struct {
	Name     string     `json:"name"`
	Kind     string     `json:"kind"`
	Global   bool       `json:"global"`
	Rules    []planRule `json:"rules,omitempty"`
	Describe string     `json:"describe,omitempty"`
	// Only is the stage's `only:` scope.
	Only *stages.Scope `json:"only,omitempty"`
}

// planRule is one enabled threshold: keep when metric <op> limit.
type planRule struct {
	Rule   string  `json:"rule"`
	Key    string  `json:"key"`
	Metric string  `json:"metric"`
	Keep   string  `json:"keep_when"`
	Limit  float64 `json:"limit"`
}

// printPlanJSON prints what `check` found as JSON.
func printPlanJSON(w io.Writer, sp *spec.Spec, inputs []read.InputFile, steps []spec.Step, warnings []run.StructureWarning) error {
	type planInput struct {
		Path   string `json:"path"`
		Source string `json:"source"`
		Bytes  int64  `json:"bytes"`
	}
	plan := struct {
		Spec       string      `json:"spec"`
		Name       string      `json:"name"`
		Seed       uint64      `json:"seed"`
		ConfigHash string      `json:"config_hash"`
		Inputs     []planInput `json:"inputs"`
		Stages     []planStage `json:"stages"`
		// Warnings are the line rules applied to technical sources.
		Warnings []run.StructureWarning `json:"warnings"`
	}{Spec: sp.File, Name: sp.Name, Seed: sp.Seed, ConfigHash: sp.ConfigHash, Warnings: warnings}
	if plan.Warnings == nil {
		plan.Warnings = []run.StructureWarning{}
	}
	for _, in := range inputs {
		plan.Inputs = append(plan.Inputs, planInput{Path: in.Display, Source: in.Options.Source, Bytes: in.Size})
	}
	for _, st := range steps {
		var obj any = st.Stage
		ps := planStage{Name: st.Name, Only: st.Only}
		if st.Stage != nil {
			ps.Kind = st.Stage.Kind()
		} else {
			obj, ps.Kind, ps.Global = st.Global, st.Global.Kind(), true
		}
		if ts, ok := obj.(stages.ThresholdStage); ok {
			for _, r := range ts.Rules() {
				if r.Enabled {
					ps.Rules = append(ps.Rules, planRule{Rule: r.Name, Key: r.Key, Metric: r.Metric, Keep: r.Cmp.String(), Limit: r.Limit})
				}
			}
		}
		if d, ok := obj.(stages.Describer); ok {
			ps.Describe = d.Describe()
		}
		plan.Stages = append(plan.Stages, ps)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(plan)
}

func init() {
	checkCmd.Flags().BoolVar(&checkJSON, "json", false, "print the plan as JSON")
	checkCmd.Flags().BoolVar(&checkPhases, "phases", false, "print only the phases of a split run, in order, one per line")
	rootCmd.AddCommand(checkCmd)
}

// printStructureWarnings prints the warnings of run.CheckStructure: a
// stage whose rules remove structural text applies to a source whose
// first documents look technical.
func printStructureWarnings(w io.Writer, warnings []run.StructureWarning) {
	if len(warnings) == 0 {
		return
	}
	fmt.Fprintln(w, "warnings:")
	for _, wn := range warnings {
		fmt.Fprintf(w, "  warning: %s\n", wn.Message)
	}
}
