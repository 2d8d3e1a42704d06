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
}

// Truth is what Generate planted. It is written as Dir/truth.jsonl (one
// TruthDoc per line, in corpus order) and returned.
type Truth struct {
	Docs []TruthDoc
	// EvalPath is the held-out eval set (JSONL with "id", "question",
	// "answer"), written to Dir/evals/hull-qa.jsonl.
	EvalPath string
	// Files lists the corpus files written, by source.
	Files map[string][]string
}

// TruthDoc describes one generated corpus document.
type TruthDoc struct {
	ID     string `json:"id"`
	Source string `json:"source"` // manuals | forum | dealer | web
	File   string `json:"file"`
	// Kind is manual, forum, dealer, spam, foreign, exact_copy, near_copy.
	Kind string `json:"kind"`
	// CopyOf is the id of the original for exact_copy and near_copy.
	CopyOf string `json:"copy_of,omitempty"`
	// Jaccard is the measured word 5-gram Jaccard similarity to CopyOf.
	Jaccard float64 `json:"jaccard,omitempty"`
	// Lang is the ISO 639-1 code of the document's language.
	Lang string `json:"lang"`
	// EvalItems are the ids of eval items planted in the document.
	EvalItems []string `json:"eval_items,omitempty"`
	// Leak says how they were planted: verbatim, recased, paraphrase.
	Leak string `json:"leak,omitempty"`
}
