// Package audit reads a finished run directory — manifest.json,
// ledger/<stage>.jsonl.zst, metrics/<stage>.jsonl.zst, contamination.json
// and the output shards — and answers three questions about it:
//
//   - what every stage removed or edited, and why (Summarize, RuleSamples,
//     the HTML Report);
//   - what happened to one document (Explain);
//   - what other thresholds would keep or remove (RunWhatIf).
//
// Everything is computed in one streaming pass over the run's files
// (Run.Walk merges them by input order, holding one line per file), so
// memory does not grow with the run: only the rows of a table, a few
// samples per rule, histogram reservoirs of 4096 values per metric and,
// for what-if across a global stage, a bounded set of flipped ids.
//
// The package is generic over stages: it knows a stage only by its name,
// kind, metric names and, for threshold stages, the rule table the stage
// rebuilt from the manifest's config reports (stages.ThresholdStage).
// Global stages (dedup, contamination with a counting pass) are never
// recomputed. Text of removed documents, which the shards do not hold,
// is read again from the run's inputs with the run's own readers.
package audit
