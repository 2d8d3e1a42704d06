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
		key   string
		limit float64
		build func(k int) string
	}{
		{"dup_line_frac", 0.30, lineDoc("\n")},
		{"dup_para_frac", 0.30, lineDoc("\n\n")},
		{"dup_line_char_frac", 0.20, lineDoc("\n")},
		{"dup_para_char_frac", 0.20, lineDoc("\n\n")},
		{"top_2gram_frac", 0.20, phrase(2)},
		{"top_3gram_frac", 0.18, phrase(3)},
		{"top_4gram_frac", 0.16, phrase(4)},
		{"dup_5gram_frac", 0.15, dupDoc},
		{"dup_6gram_frac", 0.14, dupDoc},
		{"dup_7gram_frac", 0.13, dupDoc},
		{"dup_8gram_frac", 0.12, dupDoc},
		{"dup_9gram_frac", 0.11, dupDoc},
		{"dup_10gram_frac", 0.10, dupDoc},
	}
	def := buildStage(t, "repetition", nil).(ThresholdStage)
	for i, c := range cases {
		if r := def.Rules()[i]; r.Key != c.key || r.Limit != c.limit || r.Cmp != AtMost || !r.Enabled {
			t.Fatalf("default rule %d: %+v, want %s <= %v", i, r, c.key, c.limit)
		}
		st := buildStage(t, "repetition", only(t, "repetition", c.key, nil))
		in, out, vin, vout := straddle(t, st, c.key, c.limit, c.build)
		if c.limit-vin > 0.05 || vout-c.limit > 0.05 {
			t.Fatalf("%s: values %v and %v are not close to %v", c.key, vin, vout, c.limit)
		}
		expect(t, st, in, "")
		expect(t, st, out, c.key)
	}
}

// TestRepetitionAllMetricsAlways: every metric is stored even when the
// first rule drops.
func TestRepetitionAllMetricsAlways(t *testing.T) {
	st := buildStage(t, "repetition", nil)
	ten := words(filler(10))
	dec := expect(t, st, strings.Repeat(ten+"\n", 5), "dup_line_frac")
	if v := metric(t, st, dec, "dup_10gram_frac"); v < 0.7 {
		t.Fatalf("dup 10-gram fraction %v", v)
	}
}

func TestRepetitionParams(t *testing.T) {
	k, _ := LookupKind("repetition")
	for _, p := range []map[string]any{{"dup_line_fraction": 0.5}, {"top_2gram_frac": 1.5}, {"disable": []string{"min_words"}}} {
		if _, err := k.New(ParamsFromMap(p), Env{}); err == nil {
			t.Errorf("%v: no error", p)
		}
	}
	st := buildStage(t, "repetition", map[string]any{"dup_line_frac": 0.9, "disable": []string{"dup_line_char_frac",
		"top_2gram_frac", "top_3gram_frac", "top_4gram_frac", "dup_5gram_frac", "dup_6gram_frac", "dup_7gram_frac",
		"dup_8gram_frac", "dup_9gram_frac", "dup_10gram_frac", "dup_para_frac", "dup_para_char_frac"}})
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
		if dr.Metrics[0] != want.DupLineFrac || dr.Metrics[4] != want.TopNgram[0] || dr.Metrics[7] != want.DupNgram[0] {
			t.Fatalf("repetition metrics %v, filters %+v", dr.Metrics, want)
		}
		if dq.Metrics[0] != float64(90+i+2) {
			t.Fatalf("words %v", dq.Metrics[0])
		}
	}
}
