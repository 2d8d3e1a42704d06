package dedup

import (
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// Normalization equivalences from the Unicode Standard: UAX #15 (NFKC maps
// ligatures, full-width forms and no-break space to their compatibility
// equivalents; NFD and NFC forms of "é" are one NFKC form) and
// CaseFolding.txt (full folding maps "ß" to "ss" and final sigma to sigma).
// From memory.
func TestNormalizeWords(t *testing.T) {
	cases := []struct{ in, want string }{
		{"The Quick, brown FOX!", "the quick brown fox"},
		{"  many\t\tspaces\n\n and\r\nlines ", "many spaces and lines"},
		{"don't", "dont"},
		{"don’t", "dont"},
		{"'quoted' words", "quoted words"},
		{"hull-mounted", "hull mounted"},
		{"Ｈｕｌｌ ＱＡ", "hull qa"},
		{"ﬁlter", "filter"},
		{"Straße", "strasse"},
		{"STRASSE", "strasse"},
		{"caf\u00e9", "caf\u00e9"},
		{"cafe\u0301", "caf\u00e9"},
		{"a\u00a0b", "a b"},
		{"ΟΔΟΣ", "οδοσ"},
		{"οδος", "οδοσ"},
		{"3.5 mm, 1,000 ft", "3 5 mm 1 000 ft"},
		{"em—dash and “quotes”", "em dash and quotes"},
		{"", ""},
		{"?!... --", ""},
		{"bad\xffbyte", "bad byte"},
	}
	for _, c := range cases {
		if got := NormalizeWords(c.in); got != c.want {
			t.Errorf("NormalizeWords(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

// TestTokenizerSpans checks that every word maps back to the original
// bytes it came from.
func TestTokenizerSpans(t *testing.T) {
	text := "Hull, Keel; don't STOP—café ﬁt."
	tok := newContamTokenizer()
	tok.tokenize(text)
	want := []string{"Hull", "Keel", "don't", "STOP", "café", "ﬁt"}
	if len(tok.words) != len(want) {
		t.Fatalf("%d words, want %d", len(tok.words), len(want))
	}
	for i, w := range tok.words {
		if got := text[w.start:w.end]; got != want[i] {
			t.Errorf("word %d spans %q, want %q", i, got, want[i])
		}
	}
}

func contamBuild(t testing.TB, n int, items ...string) *ContamIndex {
	t.Helper()
	b := NewContamBuilder(n)
	for i, it := range items {
		if got, _, err := b.Add(it); err != nil || got != i {
			t.Fatalf("Add(%d) = %d, %v", i, got, err)
		}
	}
	return b.Build()
}

const contamLongItem = "What torque should the keel bolts of a thirty foot sloop be tightened to after a haul out season"

func TestIndexMatchesNgrams(t *testing.T) {
	x := contamBuild(t, 13, contamLongItem, "Which sealant suits teak decks", "")
	words := len(strings.Fields(contamLongItem))
	if got := x.ItemNgrams(0); got != words-13+1 {
		t.Errorf("item 0 has %d n-grams, want %d", got, words-12)
	}
	if x.ItemNgrams(1) != 1 || x.ItemNgrams(2) != 0 || x.ItemWords(1) != 5 {
		t.Errorf("short item: ngrams %d words %d; empty item ngrams %d", x.ItemNgrams(1), x.ItemWords(1), x.ItemNgrams(2))
	}
	if x.KeyCount() != words-12+1 {
		t.Errorf("KeyCount = %d", x.KeyCount())
	}
	s := x.NewScanner()
	doc := "Forum post. " + strings.ToUpper(contamLongItem) + "?? thanks in advance"
	hits := s.Scan(doc, nil)
	if len(hits) != words-12 {
		t.Fatalf("verbatim item: %d hits, want %d", len(hits), words-12)
	}
	m := SummarizeHits(hits)
	if len(m) != 1 || m[0].Item != 0 || m[0].Count != words-12 || m[0].Start != 2 || m[0].End != int32(2+words) {
		t.Fatalf("summary %+v", m)
	}
	a, b := s.ByteSpan(m[0].Start, m[0].End)
	if got := doc[a:b]; got != strings.ToUpper(contamLongItem) {
		t.Errorf("span %q", got)
	}
	if got := s.Excerpt(m[0].Start, m[0].End, 30); got != "what torque should the keel…" {
		t.Errorf("excerpt %q", got)
	}
	// 12 consecutive words of the item are not a 13-gram.
	twelve := strings.Join(strings.Fields(contamLongItem)[:12], " ")
	if hits := s.Scan("intro "+twelve+" outro", nil); len(hits) != 0 {
		t.Errorf("12 words matched: %v", hits)
	}
}

func TestIndexShortItemsExact(t *testing.T) {
	x := contamBuild(t, 13, "Which sealant suits teak decks?", "Teak decks")
	s := x.NewScanner()
	cases := []struct {
		doc  string
		want []uint32
	}{
		{"I asked: which SEALANT suits teak-decks, and nobody knew.", []uint32{0, 1}},
		{"which sealant suits teak", nil},
		{"which sealant really suits teak decks", []uint32{1}},
		{"teak deck", nil},
		{"teakdecks", nil},
	}
	for _, c := range cases {
		var got []uint32
		for _, m := range SummarizeHits(s.Scan(c.doc, nil)) {
			got = append(got, m.Item)
		}
		if fmt.Sprint(contamSorted(got)) != fmt.Sprint(c.want) {
			t.Errorf("%q matched %v, want %v", c.doc, got, c.want)
		}
	}
}

func contamSorted(v []uint32) []uint32 {
	out := append([]uint32(nil), v...)
	for i := range out {
		for j := i + 1; j < len(out); j++ {
			if out[j] < out[i] {
				out[i], out[j] = out[j], out[i]
			}
		}
	}
	return out
}

func TestIndexSharedNgramAndIgnore(t *testing.T) {
	common := "please choose the single best answer from the options listed below for each"
	x := contamBuild(t, 13, common+" question one about hulls", common+" question two about sails")
	s := x.NewScanner()
	hits := s.Scan("Intro: "+common+" anything", nil)
	if len(hits) != 2 || hits[0].Key != hits[1].Key || hits[0].Item == hits[1].Item {
		t.Fatalf("shared n-gram hits %+v", hits)
	}
	// Attribution: both items match only the shared window, so the first
	// is credited and the second is explained by it.
	if m := SummarizeHits(hits); len(m) != 2 || m[0].Item != 0 || m[0].Distinct != 1 || m[1].Distinct != 0 {
		t.Errorf("attribution %+v", m)
	}
	if m := SummarizeHits(s.Scan(common+" question two about sails", nil)); len(m) != 2 || m[0].Item != 1 || m[0].Count != 5 || m[1].Distinct != 0 {
		t.Errorf("attribution of item 1: %+v", m)
	}
	ignore := make([]uint64, (x.KeyCount()+63)/64)
	k := hits[0].Key
	ignore[k>>6] |= 1 << (k & 63)
	if got := s.Scan("Intro: "+common+" anything", ignore); len(got) != 0 {
		t.Errorf("ignored key still hit: %+v", got)
	}
	if got := s.Scan(common+" question one about", ignore); len(got) == 0 || got[0].Item != 0 {
		t.Errorf("other keys of item 0 should still hit: %+v", got)
	}
}

// The removal rule of Brown et al. 2020, appendix C ("Test Set
// Contamination Studies", from memory): remove the matched 13-gram plus
// 200 characters on either side, split the document there, drop pieces
// shorter than 200 characters, and drop documents split into more than 10
// pieces.
func TestCutSpansBrownRule(t *testing.T) {
	filler := func(n int) string { return strings.Repeat("x", n) }
	match := strings.Repeat("m", 50)
	// 1000 chars, match, 1000 chars: two pieces of 800 remain.
	doc := filler(1000) + match + filler(1000)
	r := CutSpans(doc, [][2]int{{1000, 1050}}, 200, 200, 10)
	if r.Split != 2 || len(r.Pieces) != 2 || len(r.Pieces[0]) != 800 || len(r.Pieces[1]) != 800 || r.Removed != 450 || r.TooMany {
		t.Fatalf("basic cut: split %d pieces %d removed %d", r.Split, len(r.Pieces), r.Removed)
	}
	// A left piece of 399 characters keeps 199 (< 200, dropped); 400
	// keeps exactly 200 (kept).
	for _, c := range []struct {
		left int
		kept int
	}{{399, 1}, {400, 2}} {
		doc := filler(c.left) + match + filler(1000)
		r := CutSpans(doc, [][2]int{{c.left, c.left + 50}}, 200, 200, 10)
		if r.Split != 2 || len(r.Pieces) != c.kept {
			t.Errorf("left %d: split %d kept %d, want kept %d", c.left, r.Split, len(r.Pieces), c.kept)
		}
	}
	// k matches 1000 characters apart split the text into k+1 pieces:
	// 10 pieces are kept, 11 mean the document is dropped.
	for _, k := range []int{9, 10} {
		var sb strings.Builder
		var spans [][2]int
		for i := 0; i < k; i++ {
			sb.WriteString(filler(1000))
			spans = append(spans, [2]int{sb.Len(), sb.Len() + 50})
			sb.WriteString(match)
		}
		sb.WriteString(filler(1000))
		r := CutSpans(sb.String(), spans, 200, 200, 10)
		if r.Split != k+1 || r.TooMany != (k+1 > 10) {
			t.Errorf("%d matches: split %d too many %v", k, r.Split, r.TooMany)
		}
	}
	// Margins are characters, not bytes.
	doc = strings.Repeat("é", 300) + match + strings.Repeat("é", 300)
	r = CutSpans(doc, [][2]int{{600, 650}}, 200, 50, 10)
	if len(r.Pieces) != 2 || utf8.RuneCountInString(r.Pieces[0]) != 100 || r.Removed != 450 {
		t.Errorf("rune margins: %d pieces, first %d runes, removed %d", len(r.Pieces), utf8.RuneCountInString(r.Pieces[0]), r.Removed)
	}
	// Overlapping windows merge; a match at the start leaves no left piece.
	doc = match + filler(1000)
	r = CutSpans(doc, [][2]int{{0, 50}, {10, 40}}, 200, 200, 10)
	if r.Split != 1 || len(r.Pieces) != 1 || len(r.Pieces[0]) != 800 {
		t.Errorf("start match: split %d pieces %d", r.Split, len(r.Pieces))
	}
}

// contamFixture is an invented corpus of boatyard text with eval items
// planted verbatim, re-cased and re-punctuated, and paraphrased.
type contamFixture struct {
	items []string
	docs  []string
	leak  []string // "", verbatim, recased, paraphrase
	item  []int
}

var contamWords = strings.Fields(`hull keel rudder mast boom winch cleat bilge pump deck hatch tiller
	sail jib genoa mainsheet halyard shackle bolt seacock impeller gasket antifouling gelcoat epoxy
	varnish teak bronze stainless anchor chain windlass fender mooring dock slip yard crane cradle
	engine diesel filter injector alternator battery wiring fuse gauge propeller shaft cutlass bearing
	stern bow port starboard beam draft ballast fiberglass resin blister osmosis survey inspect replace
	tighten loosen grease flush drain winterize launch haul check torque clean sand paint seal leak
	crack repair fit order measure the a of to and with for on in after before when how what which why`)

func contamRandomText(r *rand.Rand, words int) string {
	var sb strings.Builder
	for i := 0; i < words; i++ {
		if i > 0 {
			sb.WriteByte(' ')
		}
		sb.WriteString(contamWords[r.IntN(len(contamWords))])
	}
	return sb.String()
}

func contamRecase(r *rand.Rand, s string) string {
	w := strings.Fields(s)
	for i := range w {
		switch r.IntN(4) {
		case 0:
			w[i] = strings.ToUpper(w[i])
		case 1:
			w[i] = strings.ToUpper(w[i][:1]) + w[i][1:]
		}
		switch r.IntN(6) {
		case 0:
			w[i] += ","
		case 1:
			w[i] += "."
		case 2:
			w[i] = "\"" + w[i] + "\""
		}
	}
	return strings.Join(w, "  ")
}

func contamParaphrase(r *rand.Rand, s string) string {
	w := strings.Fields(s)
	for i := range w {
		if i%5 == 2 { // 80% of words kept
			w[i] = "zz" + contamWords[r.IntN(len(contamWords))]
		}
	}
	return strings.Join(w, " ")
}

func newContamFixture(seed uint64, items, docs int) *contamFixture {
	r := rand.New(rand.NewPCG(seed, 1))
	f := &contamFixture{}
	for i := 0; i < items; i++ {
		f.items = append(f.items, contamRandomText(r, 14+r.IntN(30)))
	}
	for d := 0; d < docs; d++ {
		body := contamRandomText(r, 80+r.IntN(200))
		leak, it := "", -1
		switch d % 5 {
		case 1:
			leak, it = "verbatim", r.IntN(items)
			body += " " + f.items[it] + " " + contamRandomText(r, 40)
		case 2:
			leak, it = "recased", r.IntN(items)
			body = contamRandomText(r, 30) + " " + contamRecase(r, f.items[it]) + " " + body
		case 3:
			leak, it = "paraphrase", r.IntN(items)
			body += " " + contamParaphrase(r, f.items[it])
		}
		f.docs = append(f.docs, body)
		f.leak = append(f.leak, leak)
		f.item = append(f.item, it)
	}
	return f
}

// contamRefShares is an independent reference: the set of normalized 13-gram
// strings of the items (lower-cased, split on anything but letters and
// digits), tested against the document's 13-gram strings.
func contamRefShares(items []string, n int) func(doc string) map[int]bool {
	split := func(s string) []string {
		return strings.FieldsFunc(strings.ToLower(strings.ReplaceAll(s, "'", "")), func(r rune) bool {
			return !unicode.IsLetter(r) && !unicode.IsDigit(r)
		})
	}
	grams := map[string][]int{}
	for i, it := range items {
		w := split(it)
		for j := 0; j+n <= len(w); j++ {
			g := strings.Join(w[j:j+n], " ")
			grams[g] = append(grams[g], i)
		}
	}
	return func(doc string) map[int]bool {
		w := split(doc)
		out := map[int]bool{}
		for j := 0; j+n <= len(w); j++ {
			for _, i := range grams[strings.Join(w[j:j+n], " ")] {
				out[i] = true
			}
		}
		return out
	}
}

// Brown et al. 2020, appendix C (from memory): a test item counts as
// contaminated when a training document shares a 13-gram with it. Planted
// fixture: recall must be 100% for verbatim and re-cased/re-punctuated
// plants; every hit must be confirmed by an independent reference
// implementation (no false positives on documents sharing no 13-gram).
func TestPlantedRecallAndPrecision(t *testing.T) {
	f := newContamFixture(7, 300, 500)
	x := contamBuild(t, 13, f.items...)
	s := x.NewScanner()
	ref := contamRefShares(f.items, 13)
	found := map[string]int{}
	total := map[string]int{}
	for d, doc := range f.docs {
		got := map[int]bool{}
		for _, m := range SummarizeHits(s.Scan(doc, nil)) {
			got[int(m.Item)] = true
		}
		want := ref(doc)
		if fmt.Sprint(got) != fmt.Sprint(want) {
			t.Errorf("doc %d (%s): index found %v, reference %v", d, f.leak[d], got, want)
		}
		if f.leak[d] != "" {
			total[f.leak[d]]++
			if got[f.item[d]] {
				found[f.leak[d]]++
			}
		}
	}
	for _, k := range []string{"verbatim", "recased"} {
		if found[k] != total[k] || total[k] == 0 {
			t.Errorf("%s recall %d/%d", k, found[k], total[k])
		}
	}
	t.Logf("paraphrase (80%% word overlap) recall %d/%d", found["paraphrase"], total["paraphrase"])
}

func TestBytesPerNgram(t *testing.T) {
	f := newContamFixture(3, 2000, 0)
	x := contamBuild(t, 13, f.items...)
	bpn := x.BytesPerNgram()
	if bpn < 12 || bpn > 24 {
		t.Errorf("bytes per n-gram %.1f outside [12, 24]", bpn)
	}
	t.Logf("%d keys, %d bytes, %.2f bytes/n-gram", x.KeyCount(), x.Bytes(), bpn)
}

func TestScanAllocs(t *testing.T) {
	f := newContamFixture(5, 200, 20)
	x := contamBuild(t, 13, append(f.items, "short item here")...)
	s := x.NewScanner()
	doc := strings.Join(f.docs, " ")
	s.Scan(doc, nil) // warm the buffers
	if a := testing.AllocsPerRun(10, func() { s.Scan(doc, nil) }); a != 0 {
		t.Errorf("Scan allocates %.0f times per document", a)
	}
}

// TestIndexParts: an item's parts are indexed apart (no n-gram spans two
// parts), parts shorter than minWords are left out, and an item with no
// part left is reported by words 0.
func TestIndexParts(t *testing.T) {
	b := NewContamBuilder(4)
	q := "which rig has one mast" // 5 words: its 4-grams
	it, words, keys, err := b.AddParts([]string{q, "sloop", "gaff cutter", "bermuda rigged sloop"}, 3)
	if err != nil || it != 0 || words != 5 || keys != 2+1 {
		t.Fatalf("AddParts = %d, %d, %d, %v", it, words, keys, err)
	}
	if _, words, keys, _ := b.AddParts([]string{"ketch", "yawl rig"}, 3); words != 0 || keys != 0 {
		t.Errorf("all parts too short: words %d keys %d", words, keys)
	}
	x := b.Build()
	s := x.NewScanner()
	for _, c := range []struct {
		doc  string
		hits int
	}{
		{"so which rig has one mast then", 2},
		{"a bermuda rigged sloop", 1},        // a 3-word part, whole
		{"one mast sloop gaff cutter", 0},    // parts glued in the document are not the item's n-grams
		{"the gaff cutter and the ketch", 0}, // 2-word parts are not indexed
		{"has one mast sloop gaff", 0},       // no n-gram across the question and a choice
		{"bermuda rigged sloop yawl rig", 1},
	} {
		if got := len(s.Scan(c.doc, nil)); got != c.hits {
			t.Errorf("%q: %d hits, want %d", c.doc, got, c.hits)
		}
	}
}
