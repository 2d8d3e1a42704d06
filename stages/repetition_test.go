package stages

import (
	"fmt"
	"strings"
	"testing"

	"winnow/filters"
)

// straddle finds the padding k at which a document built by build(k)
// crosses the limit of one repetition metric (the metric falls as k
// grows), and returns the documents just inside (value <= limit) and just
// outside it with their values.
func straddle(t *testing.T, st Stage, name string, limit float64, build func(k int) string) (in, out string, vin, vout float64) {
	t.Helper()
	val := func(k int) float64 {
		return metric(t, st, st.Process(&Doc{Text: build(k)}), name)
	}
	if val(0) <= limit {
		t.Fatalf("%s: the unpadded document is already inside (%v <= %v)", name, val(0), limit)
	}
	k := 0
	for val(k) > limit {
		k++
		if k > 5000 {
			t.Fatalf("%s: no padding brings the value under %v", name, limit)
		}
	}
	return build(k), build(k - 1), val(k), val(k - 1)
}

// uniqueLines returns n distinct lines of four distinct words.
func uniqueLines(n int) []string {
	f := filler(4 * n)
	out := make([]string, n)
	for i := range out {
		out[i] = words(f[4*i : 4*i+4])
	}
	return out
}

// TestRepetitionThresholds places a document just inside and just outside
// each repetition threshold of Rae et al. 2021, appendix A, table A1 (from
// memory): duplicate line and paragraph fractions 0.30, their character
// fractions 0.20, top 2/3/4-gram character fractions 0.20/0.18/0.16,
// duplicate 5..10-gram character fractions 0.15 down to 0.10. Each
// document is held against its rule alone (the others disabled), and the
// two values must lie close to the limit on either side.
func TestRepetitionThresholds(t *testing.T) {
	repeatedLine := "the same boatyard notice line"
	lineDoc := func(sep string) func(k int) string {
		return func(k int) string {
			lines := []string{repeatedLine, repeatedLine, repeatedLine, repeatedLine}
			lines = append(lines, uniqueLines(k+1)...)
			return strings.Join(lines, sep)
		}
	}
	phrase := func(n int) func(k int) string {
		p := filler(n + 200)[200:]
		return func(k int) string {
			return words(filler(k), rep(words(p), 8))
		}
	}
	sentence := words(filler(310)[300:]) // ten distinct words
	dupDoc := func(k int) string { return sentence + " " + words(filler(k+1)) + " " + sentence }

	cases := []struct {
		rule  string // the rule and metric; its key is "most_" + rule without "_share"
		limit float64
		build func(k int) string
	}{
		{"repeated_lines_share", 0.30, lineDoc("\n")},
		{"repeated_paragraphs_share", 0.30, lineDoc("\n\n")},
		{"repeated_line_chars_share", 0.20, lineDoc("\n")},
		{"repeated_paragraph_chars_share", 0.20, lineDoc("\n\n")},
		{"top_2word_phrase_chars_share", 0.20, phrase(2)},
		{"top_3word_phrase_chars_share", 0.18, phrase(3)},
		{"top_4word_phrase_chars_share", 0.16, phrase(4)},
		{"repeated_5word_phrase_chars_share", 0.15, dupDoc},
		{"repeated_6word_phrase_chars_share", 0.14, dupDoc},
		{"repeated_7word_phrase_chars_share", 0.13, dupDoc},
		{"repeated_8word_phrase_chars_share", 0.12, dupDoc},
		{"repeated_9word_phrase_chars_share", 0.11, dupDoc},
		{"repeated_10word_phrase_chars_share", 0.10, dupDoc},
	}
	def := buildStage(t, "repetition", nil).(ThresholdStage)
	for i, c := range cases {
		key := "most_" + strings.TrimSuffix(c.rule, "_share")
		if r := def.Rules()[i]; r.Name != c.rule || r.Metric != c.rule || r.Key != key || r.Limit != c.limit || r.Cmp != AtMost || !r.Enabled {
			t.Fatalf("default rule %d: %+v, want %s: %s <= %s = %v", i, r, c.rule, c.rule, key, c.limit)
		}
		st := buildStage(t, "repetition", only(t, "repetition", key, nil))
		in, out, vin, vout := straddle(t, st, c.rule, c.limit, c.build)
		if c.limit-vin > 0.05 || vout-c.limit > 0.05 {
			t.Fatalf("%s: values %v and %v are not close to %v", c.rule, vin, vout, c.limit)
		}
		expect(t, st, in, "")
		expect(t, st, out, c.rule)
	}
}

// TestRepetitionAllMetricsAlways: every metric is stored even when the
// first rule drops.
func TestRepetitionAllMetricsAlways(t *testing.T) {
	st := buildStage(t, "repetition", nil)
	ten := words(filler(10))
	dec := expect(t, st, strings.Repeat(ten+"\n", 5), "repeated_lines_share")
	if v := metric(t, st, dec, "repeated_10word_phrase_chars_share"); v < 0.7 {
		t.Fatalf("dup 10-gram fraction %v", v)
	}
}

func TestRepetitionParams(t *testing.T) {
	k, _ := LookupKind("repetition")
	for _, p := range []map[string]any{{"repeated_lines": 0.5}, {"most_top_2word_phrase_chars": 1.5}, {"top_2word_phrase_chars_share": 0.5}, {"disable": []string{"fewest_words"}}} {
		if _, err := k.New(ParamsFromMap(p), Env{}); err == nil {
			t.Errorf("%v: no error", p)
		}
	}
	st := buildStage(t, "repetition", only(t, "repetition", "most_repeated_lines", map[string]any{"most_repeated_lines": 0.9}))
	expect(t, st, strings.Repeat("same line here\n", 5), "") // 4/5 = 0.8 <= 0.9
}

// TestQualityRepetitionShareSplit checks that the two stages measure the
// same document through the shared scratch pool with the same results as
// the filters package does directly.
func TestQualityRepetitionShareSplit(t *testing.T) {
	q := buildStage(t, "quality", nil)
	r := buildStage(t, "repetition", nil)
	for i := 0; i < 20; i++ {
		text := fmt.Sprintf("%s\n\n%s the hull", words(filler(60+i)), words(filler(30)))
		dq := q.Process(&Doc{Text: text})
		dr := r.Process(&Doc{Text: text})
		var s filters.Scratch
		want := filters.MeasureRepetition(&s, text)
		if dr.Metrics[0] != want.RepeatedLinesShare || dr.Metrics[4] != want.TopPhraseCharsShare[0] || dr.Metrics[7] != want.RepeatedPhraseCharsShare[0] {
			t.Fatalf("repetition metrics %v, filters %+v", dr.Metrics, want)
		}
		if dq.Metrics[0] != float64(90+i+2) {
			t.Fatalf("words %v", dq.Metrics[0])
		}
	}
}
