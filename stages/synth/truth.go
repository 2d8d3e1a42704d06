// Package synth generates synthetic corpora in the invented demo scenario
// (Larkspur Marine Works, a fictional boatyard cooperative): repair
// manuals, forum threads, dealer pages with boilerplate, spam, exact and
// near copies, pages in other languages, and a held-out eval set partly
// leaked into the corpus. All text comes from the package's own templates
// and word banks. A truth file records what was planted, so tests and
// benchmarks can measure what the pipeline finds.
package synth

// Options configures Generate.
type Options struct {
	// Dir is the output directory; it is created when missing.
	Dir string
	// Docs is the number of corpus documents (0: derive from Bytes).
	Docs int
	// Bytes is the approximate uncompressed corpus size (0: use Docs).
	Bytes int64
	// Seed makes the corpus deterministic.
	Seed uint64
	// Format is one of "jsonl.zst" (default), "jsonl.gz", "txt", "warc".
	Format string
	// NearJaccard is the target word 5-gram Jaccard similarity of planted
	// near copies to their originals (default 0.9).
	NearJaccard float64
	// Files is the number of files per source (default 1).
	Files int
	// OmitTruthDocs leaves Truth.Docs empty (truth.jsonl is still
	// written), so memory stays flat for very large corpora; read the
	// truth back with ReadTruth when needed.
	OmitTruthDocs bool
}

// Truth is what Generate planted. It is written as Dir/truth.jsonl (one
// TruthDoc per line, in corpus order) and returned.
type Truth struct {
	Docs []TruthDoc
	// EvalPath is the held-out eval set (JSONL with "id", "question",
	// "answer"), written to Dir/evals/hull-qa.jsonl.
	EvalPath string
	// Files lists the corpus files written, by source, as paths joined
	// with Dir, in corpus order (for txt: the per-file directories).
	Files map[string][]string
	// NumDocs is the number of documents written.
	NumDocs int
	// Bytes is the uncompressed serialized size of the corpus: JSONL
	// lines, WARC records (headers included) or txt file contents.
	Bytes int64
	// SourceBytes is Bytes by source.
	SourceBytes map[string]int64
	// Counts is the number of documents by Kind.
	Counts map[string]int
	// EvalItems is the number of items in the eval set.
	EvalItems int
}

// TruthDoc describes one generated corpus document.
type TruthDoc struct {
	ID     string `json:"id"`
	Source string `json:"source"` // manuals | forum | dealer | web
	// File is the corpus file holding the document, relative to Dir
	// with forward slashes (for txt: the document's own file).
	File string `json:"file"`
	// Line is the 1-based position of the document in File: the JSONL
	// line, or the WARC conversion record counted without the leading
	// warcinfo record; 1 for txt.
	Line int `json:"line"`
	// Kind is manual, forum, dealer, spam, foreign, junk, exact_copy,
	// near_copy.
	Kind string `json:"kind"`
	// Detail refines Kind: the spam kind (keywords, repeated_lines,
	// symbols, bullets, ellipsis, placeholder_text, code), or for copies the
	// Kind of the original.
	Detail string `json:"detail,omitempty"`
	// CopyOf is the id of the original for exact_copy and near_copy.
	CopyOf string `json:"copy_of,omitempty"`
	// Jaccard is the measured word 5-gram Jaccard similarity to CopyOf
	// (1 for exact copies), computed exactly by ShingleJaccard: words are
	// maximal runs of Unicode letters and digits, lower-cased.
	Jaccard float64 `json:"jaccard,omitempty"`
	// Target is the similarity a near copy was planted at: NearJaccard for
	// the main near copies (measured Jaccard >= Target where the text
	// allows), or one of the low targets 0.5 and 0.3 (measured <= Target).
	Target float64 `json:"target,omitempty"`
	// Lang is the ISO 639-1 code of the document's language.
	Lang string `json:"lang"`
	// EvalItems are the ids of eval items planted in the document.
	EvalItems []string `json:"eval_items,omitempty"`
	// Leak says how they were planted: verbatim, recased, paraphrase.
	Leak string `json:"leak,omitempty"`
	// URL is the document's (invented) address, the "url" field of JSONL
	// and the WARC-Target-URI of WARC.
	URL string `json:"url"`
	// RecordID is the WARC-Record-ID without angle brackets
	// ("urn:uuid:..."), for the warc format only.
	RecordID string `json:"record_id,omitempty"`
}
