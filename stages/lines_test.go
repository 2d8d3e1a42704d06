package stages

import (
	"strings"
	"testing"
)

// Line rules of Raffel et al. 2020, "Exploring the Limits of Transfer
// Learning with a Unified Text-to-Text Transformer", section 2.2 (from
// memory; a secondary description of the corpus agrees on the numbers):
// lines need terminal punctuation and at least 3 words; a page with fewer
// than 5 sentences, "lorem ipsum" or "{" is dropped; lines
// with "javascript" or a policy notice are removed; citation markers are
// deleted.

// fiveSentences is a clean page of exactly five sentences, the fewest
// Raffel et al. 2020, section 2.2, keeps.
var fiveSentences = strings.Join([]string{
	"Sand the hull down to bare gelcoat before the first coat.",
	"The yard crew checks every seacock when a boat is hauled out.",
	"Replace the raw-water impeller each season and keep a spare aboard.",
	"Check the stern gland for drips before every launch.",
	"Grease the winches once a month during the sailing season.",
}, "\n")

func linesStageT(t *testing.T, p map[string]any) Stage { return buildStage(t, "lines", p) }

func TestLinesFewestWordsPerLine(t *testing.T) {
	st := linesStageT(t, nil)
	// Raffel et al. 2020, section 2.2: lines of at least 3 words are kept
	dec := expect(t, st, fiveSentences+"\nThree words suffice.", "")
	if dec.Action != Keep {
		t.Fatalf("a three-word line was removed: %v %v", dec.Action, dec.Changes)
	}
	dec = expect(t, st, fiveSentences+"\nTwo words.", "")
	if dec.Action != Edit || dec.Changes["short_lines"] != 1 || dec.Text != fiveSentences {
		t.Fatalf("two-word line: %v %v %q", dec.Action, dec.Changes, dec.Text)
	}
}

func TestLinesFewestSentences(t *testing.T) {
	st := linesStageT(t, nil)
	// Raffel et al. 2020, section 2.2: pages of fewer than 5 sentences are discarded
	dec := expect(t, st, fiveSentences, "") // 5 sentences: kept
	if v := metric(t, st, dec, "sentence_count"); v != 5 {
		t.Fatalf("sentences %v", v)
	}
	four := strings.Join(strings.Split(fiveSentences, "\n")[:4], "\n")
	dec = expect(t, st, four, "sentences_too_few") // 4: dropped
	if dec.Value != 4.0 || dec.Limit != 5.0 {
		t.Fatalf("value %v limit %v", dec.Value, dec.Limit)
	}
	// sentences are counted after cleaning: removed lines do not count
	expect(t, st, four+"\nClick here", "sentences_too_few")
	// the limit is a spec key
	expect(t, linesStageT(t, map[string]any{"fewest_sentences": 4}), four, "")
}

func TestLinesPageRules(t *testing.T) {
	st := linesStageT(t, nil)
	expect(t, st, fiveSentences+"\nLorem ipsum dolor sit amet, consectetur.", "has_placeholder_text")
	expect(t, st, fiveSentences+"\nThe config was {\"a\": 1} in the end.", "has_braces")
	// even inside a line the other rules would remove
	expect(t, st, "{\n"+fiveSentences, "has_braces")
	expect(t, linesStageT(t, map[string]any{"reject_pages_with_braces": false}), "{\n"+fiveSentences, "")
}

func TestLinesRemovals(t *testing.T) {
	st := linesStageT(t, nil)
	page := fiveSentences + "\n" + strings.Join([]string{
		"Please enable JavaScript in your browser to see all boats.",
		"Read our Privacy Policy before you order spare parts online.",
		"Larkspur Marine Works home page",
		"The keel bolts were replaced in 2019 [1] after a survey [citation needed].",
	}, "\n")
	dec := expect(t, st, page, "")
	want := map[string]int{"javascript_lines": 1, "policy_notice_lines": 1, "unpunctuated_lines": 1, "citation_marks": 2}
	if dec.Action != Edit || len(dec.Changes) != len(want) {
		t.Fatalf("changes %v, want %v", dec.Changes, want)
	}
	for k, v := range want {
		if dec.Changes[k] != v {
			t.Fatalf("changes %v, want %v", dec.Changes, want)
		}
	}
	if !strings.HasSuffix(dec.Text, "\nThe keel bolts were replaced in 2019 after a survey.") {
		t.Fatalf("text %q", dec.Text)
	}
	for _, name := range []string{"javascript_lines", "policy_notice_lines", "unpunctuated_lines", "citation_marks"} {
		if metric(t, st, dec, name) != float64(want[name]) {
			t.Fatalf("metric %s", name)
		}
	}
	if metric(t, st, dec, "input_lines") != 9 || metric(t, st, dec, "kept_lines") != 6 {
		t.Fatalf("line metrics %v", dec.Metrics)
	}
}

func TestLinesParams(t *testing.T) {
	k, _ := LookupKind("lines")
	for _, p := range []map[string]any{{"fewest_words": 3}, {"fewest_sentences": -1}, {"remove_policy_notice_lines": "maybe"}} {
		if _, err := k.New(ParamsFromMap(p), Env{}); err == nil {
			t.Errorf("%v: no error", p)
		}
	}
	st := linesStageT(t, map[string]any{"fewest_words_per_line": 2, "remove_unpunctuated_lines": false})
	dec := expect(t, st, fiveSentences+"\nCall us today\nHi", "")
	if dec.Changes["short_lines"] != 1 || !strings.Contains(dec.Text, "Call us today") {
		t.Fatalf("%v %q", dec.Changes, dec.Text)
	}
}

func TestRedactStage(t *testing.T) {
	st := buildStage(t, "redact", nil)
	dec := st.Process(&Doc{Text: "Mail yard@larkspur.example or ring +44 20 7946 0958 from 192.0.2.4."})
	if dec.Action != Edit || dec.Text != "Mail <EMAIL> or ring <PHONE> from <IP>." {
		t.Fatalf("%v %q", dec.Action, dec.Text)
	}
	if dec.Changes["email"] != 1 || dec.Changes["ip"] != 1 || dec.Changes["phone"] != 1 || len(dec.Metrics) != 3 {
		t.Fatalf("changes %v metrics %v", dec.Changes, dec.Metrics)
	}
	if dec := st.Process(&Doc{Text: "nothing to hide, version 1.2.3"}); dec.Action != Keep || dec.Metrics[0] != 0 {
		t.Fatalf("%v", dec)
	}
	st = buildStage(t, "redact", map[string]any{"email_placeholder": "[e-mail]", "phone": false})
	if dec := st.Process(&Doc{Text: "a@b.io +44 20 7946 0958"}); dec.Text != "[e-mail] +44 20 7946 0958" || len(dec.Changes) != 1 {
		t.Fatalf("%q %v", dec.Text, dec.Changes)
	}
	if _, err := func() (Stage, error) {
		k, _ := LookupKind("redact")
		return k.New(ParamsFromMap(map[string]any{"emails": true}), Env{})
	}(); err == nil {
		t.Fatal("unknown key accepted")
	}
}
