// Package read turns input files into documents: it resolves the inputs'
// paths (files, globs with "**", directories, "-"), sniffs and removes
// gzip/zstd compression, and parses JSONL, text, WARC and Parquet records.
// It knows nothing of stages, the ledger or the spec.
package read

// Doc is one document as read from an input record. The run turns it into
// a stages.Doc (stages.DocFromRead); this package knows nothing of stages.
type Doc struct {
	// ID is the id field of the record, or "<source>/<file>:<line>".
	ID string
	// Text is the document body.
	Text string
	// Source is the label of the input group the document came from.
	Source string
	// File is the path of the input file ("-" for standard input).
	File string
	// Line is the 1-based line (JSONL, text blocks) or record number (WARC,
	// Parquet rows) of the document inside File.
	Line int64
	// Input is the index of File in the run's resolved input list.
	Input int
	// Meta holds the record's extra fields.
	Meta map[string]any
}

// maxInputFiles is the most input files one run may have: a document's
// order key keeps the input index in its high 24 bits (stages.OrderKey).
const maxInputFiles = 1 << 24

// SetMeta sets one meta key, creating the map when needed.
func (d *Doc) SetMeta(key string, v any) {
	if d.Meta == nil {
		d.Meta = make(map[string]any, 4)
	}
	d.Meta[key] = v
}
