package stages

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"
)

// ContamReport is the content of OUT/contamination.json:
//
//	{
//	  "stage": "decontaminate", "ngram": 13, "min_item_words": 8, "action": "drop",
//	  "max_doc_frequency": 0, "ignored_ngrams": 0,
//	  "index_ngrams": 61234, "index_bytes_per_ngram": 15.2,
//	  "docs_scanned": 10000, "docs_affected": 41,
//	  "docs_dropped": 41, "docs_edited": 0, "docs_flagged": 0,
//	  "evals": [{
//	    "name": "hull-qa", "files": ["evals/hull-qa.jsonl"],
//	    "items": 200, "short_items": 0, "items_too_short": 1,
//	    "too_short_to_check": ["hq-0150"],
//	    "items_contaminated": 12, "percent_contaminated": 6,
//	    "docs_affected": 41, "items_sharing_only": 3,
//	    "contaminated": [{
//	      "item": "hq-0007", "docs": ["forum/f.jsonl:12", ...],
//	      "doc_count": 3, "matches": 27, "text": "how often should ..."
//	    }, ...]
//	  }, ...]
//	}
//
// Eval sets appear in spec order, contaminated items in eval-file order,
// document ids in input order (at most 100 per item; doc_count is
// complete). "matches" counts matched n-gram positions over all documents;
// "text" is the normalized text of the first matched run of n-grams. An
// item is credited with a document only when the document matches one of
// its n-grams that no better-matching item in the same document explains
// (dedup.SummarizeHits); "items_sharing_only" counts the items that shared
// n-grams with documents only through other items (e.g. eval items written
// from one template) and are not counted as contaminated. "short_items"
// counts the items matched only whole (their longest part is shorter than
// ngram words); "too_short_to_check" lists the items with no part of
// min_item_words words, which were not matched at all, and
// "percent_contaminated" is over the items checked.
type ContamReport struct {
	Stage           string           `json:"stage"`
	Ngram           int              `json:"ngram"`
	MinItemWords    int              `json:"min_item_words"`
	Action          string           `json:"action"`
	MaxDocFrequency int              `json:"max_doc_frequency"`
	IgnoredNgrams   int              `json:"ignored_ngrams"`
	IndexNgrams     int              `json:"index_ngrams"`
	IndexBytesPer   float64          `json:"index_bytes_per_ngram"`
	DocsScanned     int64            `json:"docs_scanned"`
	DocsAffected    int64            `json:"docs_affected"`
	DocsDropped     int64            `json:"docs_dropped"`
	DocsEdited      int64            `json:"docs_edited"`
	DocsFlagged     int64            `json:"docs_flagged"`
	Evals           []ContamEvalStat `json:"evals"`
}

// ContamEvalStat is one eval set's line of the report.
type ContamEvalStat struct {
	Name              string             `json:"name"`
	Files             []string           `json:"files"`
	Items             int                `json:"items"`
	ShortItems        int                `json:"short_items"`
	ItemsTooShort     int                `json:"items_too_short"`
	TooShort          []string           `json:"too_short_to_check"`
	ItemsContaminated int                `json:"items_contaminated"`
	Percent           float64            `json:"percent_contaminated"`
	DocsAffected      int64              `json:"docs_affected"`
	ItemsSharedOnly   int                `json:"items_sharing_only"`
	Contaminated      []ContamItemReport `json:"contaminated"`
}

// ContamItemReport is one contaminated item.
type ContamItemReport struct {
	Item     string   `json:"item"`
	Docs     []string `json:"docs"`
	DocCount int64    `json:"doc_count"`
	Matches  int64    `json:"matches"`
	Text     string   `json:"text"`
}

// WriteTable prints the report as the table `winnow audit` and `winnow
// contam` show: one line per eval set, then each contaminated item with
// its documents and matched text.
func (r *ContamReport) WriteTable(w io.Writer) error { return r.WriteTableN(w, 0) }

// WriteTableN is WriteTable listing at most maxItems contaminated items
// per eval set (0: all) and at most contamTableDocs document ids per item.
func (r *ContamReport) WriteTableN(w io.Writer, maxItems int) error {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "eval set\titems\ttoo short to check\tcontaminated\t%%\tdocs affected\t\n")
	for _, e := range r.Evals {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%.1f%%\t%d\t\n", e.Name, e.Items, e.ItemsTooShort, e.ItemsContaminated, e.Percent, e.DocsAffected)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "%d-gram overlap, action %s; %d documents scanned, %d affected (%d dropped, %d cut, %d flagged)",
		r.Ngram, r.Action, r.DocsScanned, r.DocsAffected, r.DocsDropped, r.DocsEdited, r.DocsFlagged)
	if r.MaxDocFrequency > 0 {
		fmt.Fprintf(w, "; %d n-grams found in more than %d documents ignored", r.IgnoredNgrams, r.MaxDocFrequency)
	}
	fmt.Fprintln(w)
	for _, e := range r.Evals {
		if e.ItemsTooShort > 0 {
			ids := e.TooShort[:min(len(e.TooShort), contamTableDocs)]
			fmt.Fprintf(w, "%s: %d item(s) too short to check (fewer than %d words in every part): %s", e.Name, e.ItemsTooShort, r.MinItemWords, strings.Join(ids, ", "))
			if more := e.ItemsTooShort - len(ids); more > 0 {
				fmt.Fprintf(w, " (+%d more in contamination.json)", more)
			}
			fmt.Fprintln(w)
		}
	}
	for _, e := range r.Evals {
		if len(e.Contaminated) == 0 {
			continue
		}
		fmt.Fprintf(w, "\n%s: contaminated items\n", e.Name)
		for i, it := range e.Contaminated {
			if maxItems > 0 && i == maxItems {
				fmt.Fprintf(w, "  ... and %d more (see contamination.json)\n", len(e.Contaminated)-i)
				break
			}
			docs := it.Docs[:min(len(it.Docs), contamTableDocs)]
			fmt.Fprintf(w, "  %s  %d doc(s), %d matched n-gram(s)\n    text: %q\n    docs: %s",
				it.Item, it.DocCount, it.Matches, it.Text, strings.Join(docs, ", "))
			if more := it.DocCount - int64(len(docs)); more > 0 {
				fmt.Fprintf(w, " (+%d more)", more)
			}
			fmt.Fprintln(w)
		}
	}
	return nil
}

// ReadContamReport loads a contamination.json file.
func ReadContamReport(path string) (*ContamReport, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var r ContamReport
	if err := json.Unmarshal(data, &r); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &r, nil
}

// PrintContamination prints the report at path (a contamination.json, or
// a run directory holding one) as a table, or as its JSON when asJSON.
func PrintContamination(w io.Writer, path string, asJSON bool) error {
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		path = filepath.Join(path, "contamination.json")
	}
	if asJSON {
		data, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		_, err = w.Write(data)
		return err
	}
	r, err := ReadContamReport(path)
	if err != nil {
		return err
	}
	return r.WriteTable(w)
}
