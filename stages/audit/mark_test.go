package audit

import (
	"math"
	"reflect"
	"strings"
	"testing"
)

func marked(text string, sp []Span) []string {
	var out []string
	for _, s := range sp {
		out = append(out, text[s.Start:s.End])
	}
	return out
}

// The repeated-line and repeated-paragraph counts follow Rae et al. 2021
// (appendix A, from memory): a line is a duplicate when it repeats an
// earlier line, so the first occurrence is not one.
func TestDupBlocks(t *testing.T) {
	text := "Buy now\nFresh paint\n  Buy now \n\nFresh paint\nBuy now"
	if got := marked(text, dupBlocks(text, false)); !reflect.DeepEqual(got, []string{"  Buy now ", "Fresh paint", "Buy now"}) {
		t.Errorf("lines: %q", got)
	}
	paras := "One para.\nstill one.\n\nTwo.\n\nOne para.\nstill one.\n\n\nTwo."
	if got := marked(paras, dupBlocks(paras, true)); !reflect.DeepEqual(got, []string{"One para.\nstill one.", "Two."}) {
		t.Errorf("paragraphs: %q", got)
	}
}

func TestNgramMarks(t *testing.T) {
	text := "the keel bolt the keel bolt and the keel"
	sp, gram := topNgram(text, 2)
	if gram != "the keel" || !reflect.DeepEqual(marked(text, sp), []string{"the keel", "the keel", "the keel"}) {
		t.Errorf("top 2-gram %q: %q", gram, marked(text, sp))
	}
	// "the keel bolt" repeats once: the second occurrence is covered.
	if got := marked(text, dupNgrams(text, 3)); !reflect.DeepEqual(got, []string{"the keel bolt"}) {
		t.Errorf("dup 3-grams: %q", got)
	}
	if sp, _ := topNgram("all words differ here", 2); sp != nil {
		t.Errorf("no repeated 2-gram, marked %v", sp)
	}
}

func TestMarkRuleByName(t *testing.T) {
	text := "- a bullet\nplain line...\n# heading with 42 !!"
	cases := map[string][]string{
		"bulleted_lines_share bulleted_lines_share":               {"- a bullet"},
		"ellipsis_ending_lines_share ellipsis_ending_lines_share": {"plain line..."},
		"symbols_per_word symbols_per_word":                       {"...", "#"},
		"words_with_letters_share words_with_letters_share":       {"-", "#", "42", "!!"},
		"words_too_few word_count":                                nil,
	}
	for desc, want := range cases {
		sp, note := markRule(desc, text)
		if got := marked(text, sp); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: %q (%s), want %q", desc, got, note, want)
		}
	}
	// every rule name of the repetition and lines stages is recognised
	notes := map[string]string{
		"repeated_lines_share repeated_lines_share":                             "repeat an earlier line",
		"repeated_line_chars_share repeated_line_chars_share":                   "repeat an earlier line",
		"repeated_paragraphs_share repeated_paragraphs_share":                   "repeat an earlier paragraph",
		"repeated_paragraph_chars_share repeated_paragraph_chars_share":         "repeat an earlier paragraph",
		"top_3word_phrase_chars_share top_3word_phrase_chars_share":             "3-word phrase",
		"repeated_10word_phrase_chars_share repeated_10word_phrase_chars_share": "10-word phrase",
		"stop_word_count stop_word_count":                                       "stop words",
		"has_placeholder_text has_placeholder_text":                             "lorem ipsum",
		"has_braces has_braces":                                                 "curly brackets",
	}
	for desc, want := range notes {
		if _, note := markRule(desc, "a\na"); !strings.Contains(note, want) {
			t.Errorf("%s: note %q, want %q", desc, note, want)
		}
	}
}

func TestLineDiffAndShingles(t *testing.T) {
	before := "Keep me.\nDrop me\nKeep me.\nAlso kept."
	after := "Keep me.\nKeep me.\nAlso kept."
	if got := marked(before, lineDiff(before, after)); !reflect.DeepEqual(got, []string{"Drop me"}) {
		t.Errorf("line diff %q", got)
	}
	a := "one two three four five six seven"
	b := "one two three four five six eight"
	j, sp := shingleDiff(a, b, 3)
	// 3-grams: a has 5, b has 5, 4 shared: J = 4/6.
	if math.Abs(j-4.0/6) > 1e-12 || !reflect.DeepEqual(marked(a, sp), []string{"seven"}) {
		t.Errorf("jaccard %v, marked %q", j, marked(a, sp))
	}
}

func TestExcerptAndRender(t *testing.T) {
	text := strings.Repeat("x", 1000) + "\nBAD PART\n" + strings.Repeat("y", 1000)
	sp := []Span{{Start: 1001, End: 1009}}
	ex, marks, cut := Excerpt(text, sp, 500)
	if !cut || len(ex) > 500 || len(marks) != 1 || ex[marks[0].Start:marks[0].End] != "BAD PART" {
		t.Fatalf("excerpt cut %v len %d marks %v", cut, len(ex), marks)
	}
	if got := Render("a bad b", []Span{{Start: 2, End: 5}}, "[[", "]]"); got != "a [[bad]] b" {
		t.Errorf("render %q", got)
	}
	if got := renderHTML("<b> & bad", []Span{{Start: 6, End: 9, Label: `q"x`}}); got != `&lt;b&gt; &amp; <mark title="q&#34;x">bad</mark>` {
		t.Errorf("html %q", got)
	}
	if got := mergeSpans([]Span{{Start: 5, End: 9}, {Start: 0, End: 3}, {Start: 2, End: 6}}); !reflect.DeepEqual(got, []Span{{Start: 0, End: 9}}) {
		t.Errorf("merge %v", got)
	}
}

func TestFlatScanner(t *testing.T) {
	line := []byte(`{"doc":"a\"b\u00e9","source":"web","order":1099511627777,"bytes":12,"action":"drop","rule":"r","dropped_by":"x","m1":0.25,"m2":null,"m3":-1e-3,"nested":{"k":[1,"}"]},"flag":true}`)
	var got []string
	sc := flatScanner{b: line}
	err := sc.object(func(key []byte, str string, num float64, kind byte) error {
		switch kind {
		case 's':
			got = append(got, string(key)+"="+str)
		case 'n', 'b':
			got = append(got, string(key)+"#"+strings.TrimRight(strings.TrimRight(strings.Replace(fmtFloat(num), ",", "", -1), "0"), "."))
		default:
			got = append(got, string(key)+"("+string(kind)+")")
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{`doc=a"bé`, "source=web", "order#1099511627777", "bytes#12", "action=drop", "rule=r", "dropped_by=x",
		"m1#0.25", "m2(z)", "m3#-0.001", "nested(o)", "flag#1"}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("scanned %q\nwant    %q", got, want)
	}
	if sc.orderRaw != "1099511627777" {
		t.Errorf("order %q", sc.orderRaw)
	}
	for _, bad := range []string{`{"a":}`, `{"a":1`, `["a"]`, `{"a":tru}`, `{"a":"x}`} {
		sc := flatScanner{b: []byte(bad)}
		if err := sc.object(func([]byte, string, float64, byte) error { return nil }); err == nil {
			t.Errorf("%s: no error", bad)
		}
	}
}

func TestHistogramBins(t *testing.T) {
	c := &colStats{allInt: true, rng: 1}
	for v := 0; v < 30; v++ {
		c.add(float64(v))
	}
	h := &Histogram{}
	h.setRange(c)
	if h.Width != 1 || h.Bins != 30 || h.BinOf(0) != 1 || h.BinOf(29) != 30 || h.BinOf(-1) != 0 || h.BinOf(30) != 31 {
		t.Errorf("integer bins: lo %v width %v bins %d", h.Lo, h.Width, h.Bins)
	}
	c = &colStats{allInt: true, rng: 1}
	for v := 0.0; v <= 1; v += 0.001 {
		c.add(v)
	}
	c.allInt = false
	h = &Histogram{}
	h.setRange(c)
	// The top of the range lands in the last bin, not the overflow bin.
	if h.BinOf(c.res[len(c.res)-1]) > h.Bins+1 || h.Bins < histBins {
		t.Errorf("float bins: lo %v width %v bins %d", h.Lo, h.Width, h.Bins)
	}
}
