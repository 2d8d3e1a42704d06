// Package stages holds the document model (Doc, OrderKey), the stage
// contracts (Stage, GlobalStage, Decision, Rule), stage parameters and the
// kind registry, and one file per stage kind. A stage kind never computes a
// text metric itself: those live in package filters, dedup and shard; the
// stages here only apply thresholds and say what happened. Reading inputs
// is package stages/read, running package stages/run, the ledger and shards
// package stages/record, the YAML spec package stages/spec.
package stages

import (
	"fmt"

	"winnow/stages/read"
)

// OrderKey is a document's stable position in the input: the index of its
// input file in the resolved input list (high 24 bits) and the index of the
// record inside that file (low 40 bits). Comparing two keys compares input
// order, which is what "the earliest document wins" means everywhere.
type OrderKey uint64

// Bits of an OrderKey given to the record index.
const orderRecordBits = 40

// MakeOrderKey packs an input index and a record index into an OrderKey.
func MakeOrderKey(input int, record int64) OrderKey {
	return OrderKey(uint64(input)<<orderRecordBits | uint64(record)&(1<<orderRecordBits-1))
}

// Input returns the input-file index of k.
func (k OrderKey) Input() int { return int(uint64(k) >> orderRecordBits) }

// Record returns the record index of k inside its input file.
func (k OrderKey) Record() int64 { return int64(uint64(k) & (1<<orderRecordBits - 1)) }

// String formats k as "input:record".
func (k OrderKey) String() string { return fmt.Sprintf("%d:%d", k.Input(), k.Record()) }

// Doc is one document moving through the pipeline.
type Doc struct {
	// ID is the id field of the record, or "<source>/<file>:<line>".
	ID string
	// Text is the document body; stages that edit replace it.
	Text string
	// Source is the label of the input group the document came from.
	Source string
	// File is the path of the input file ("-" for standard input).
	File string
	// Line is the 1-based line (JSONL, text blocks) or record number (WARC,
	// Parquet rows) of the document inside File.
	Line int64
	// Order is the document's stable input position.
	Order OrderKey
	// Meta holds extra fields of the input record and values stages attach
	// (language, confidence, token count...). It is written into output
	// shard lines. Keys are written in sorted order, so output stays
	// deterministic.
	Meta map[string]any
	// Tokens is the document's token count once the tokenizer has run
	// (0 before).
	Tokens int
	// Measured holds metric values that a later stage asked for (see
	// MetricUser), by "stage.metric" name; nil when none was asked for.
	// They are not written to output shards.
	Measured map[string]float64
}

// SetMeasured records a metric value a later stage asked for.
func (d *Doc) SetMeasured(name string, v float64) {
	if d.Measured == nil {
		d.Measured = make(map[string]float64, 2)
	}
	d.Measured[name] = v
}

// SetMeta sets one meta key, creating the map when needed.
func (d *Doc) SetMeta(key string, v any) {
	if d.Meta == nil {
		d.Meta = make(map[string]any, 4)
	}
	d.Meta[key] = v
}

// DocFromRead makes the pipeline's document from one read from an input:
// its order key is its input file's index and its line.
func DocFromRead(r *read.Doc) *Doc {
	return &Doc{ID: r.ID, Text: r.Text, Source: r.Source, File: r.File, Line: r.Line,
		Order: MakeOrderKey(r.Input, r.Line), Meta: r.Meta}
}
