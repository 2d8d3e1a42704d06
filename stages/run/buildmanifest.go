package run

import (
	"winnow/stages/record"

	"winnow/stages/spec"
)

// buildManifest assembles the manifest from a finished (or interrupted)
// runner.
func buildManifest(version string, s *spec.Spec, r *Runner, seconds float64) *record.Manifest {
	m := &record.Manifest{ToolVersion: version, Name: s.Name, Config: s.Config, ConfigHash: s.ConfigHash, Seed: s.Seed,
		Inputs: r.InputSums, Errors: r.Errors, ErrorCount: r.ErrCount, InternalErrors: r.InternalErrors,
		DuplicateIDs: r.DuplicateIDs, DuplicateCheckStopped: r.DupCheckStopped, Interrupted: r.Interrupted, Seconds: seconds}
	if m.Inputs == nil {
		m.Inputs = []record.InputSummary{}
	}
	if m.Errors == nil {
		m.Errors = []record.RunError{}
	}
	for _, in := range m.Inputs {
		for rule, n := range in.Skips {
			if m.ReadSkips == nil {
				m.ReadSkips = map[string]int64{}
			}
			m.ReadSkips[rule] += n
		}
	}
	m.Stages = append(m.Stages, r.Read.Snapshot())
	m.Stages = append(m.Stages, r.Counters...)
	w := r.Write.Snapshot()
	if r.Output != nil {
		m.Outputs = r.Output.Files
		m.Mix = r.Output.Mix
		var toks int64
		for _, f := range r.Output.Files {
			toks += f.Tokens
		}
		// docs_out counts documents with at least one piece written (docs_in
		// minus the documents left out entirely); records_out the lines
		// (pieces); bytes_out the text bytes of the lines written.
		w.DocsOut, w.RecordsOut, w.BytesOut, w.TokensOut = r.Output.Docs, r.Output.Records, r.Output.TextBytes, toks
	}
	m.Stages = append(m.Stages, w)
	if m.Outputs == nil {
		m.Outputs = []record.OutputFile{}
	}
	for _, in := range r.InputSums {
		m.Totals.InputFiles++
		m.Totals.InputBytes += in.Bytes
	}
	m.Totals.DocsIn = r.Read.DocsIn
	m.Totals.DocsOut = w.DocsOut
	m.Totals.RecordsOut = w.RecordsOut
	m.Totals.BytesOut = w.BytesOut
	m.Totals.TokensOut = w.TokensOut
	return m
}
