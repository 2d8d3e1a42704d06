package langid

import (
	"math"
	"strings"
	"sync"
	"testing"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

// TestLangEdgeCases: degenerate inputs get defined results and no panic.
func TestLangEdgeCases(t *testing.T) {
	d := defaultDetector(t)
	en := udhrParagraphs(t, "en")[0]
	ru := udhrParagraphs(t, "ru")[0]
	ar := udhrParagraphs(t, "ar")[0]
	ja := udhrParagraphs(t, "ja")[0]
	cases := []struct {
		name, text, lang string
		letters          int
	}{
		{"empty", "", Undetermined, 0},
		{"whitespace", " \t\n\u00a0\u3000 ", Undetermined, 0},
		{"emoji", "😀🎉👍🏽🔥❤️🚀", Undetermined, 0},
		{"digits", "0123 4567 89 ٠١٢٣ ๑๒๓", Undetermined, 0},
		{"markup", "<div class=\"a\"><br/></div>&amp;&nbsp;", Undetermined, 0},
		{"NUL", "\x00\x00\x00", Undetermined, 0},
		{"invalid UTF-8", "\xff\xfe\xfd\xc3", Undetermined, 0},
		{"one letter", "x", Undetermined, 1}, // no trigram to score
		{"NUL inside text", strings.ReplaceAll(en, " ", "\x00"), "en", -1},
		{"Arabic (RTL)", ar, "ar", -1},
		{"Arabic with RTL marks", "\u202b" + ar + "\u202c", "ar", -1},
		{"Cyrillic majority", ru + " Hello world.", "ru", -1},
		{"Japanese with English", ja + " (see UN.org)", "ja", -1},
	}
	for _, c := range cases {
		r := d.Detect(c.text)
		if r.Lang != c.lang {
			t.Errorf("%s: lang %q, want %q (%+v)", c.name, r.Lang, c.lang, r)
		}
		if c.letters >= 0 && r.Letters != c.letters {
			t.Errorf("%s: %d letters, want %d", c.name, r.Letters, c.letters)
		}
		if r.Confidence < 0 || r.Confidence > 1 || r.LetterShare < 0 || r.LetterShare > 1 {
			t.Errorf("%s: out of range %+v", c.name, r)
		}
		if r.Lang == Undetermined && r.Confidence != 0 {
			t.Errorf("%s: undetermined with confidence %v", c.name, r.Confidence)
		}
	}
	// A mixed document's confidence is about its share of letters.
	mixed := d.Detect(ru + " " + en)
	want := float64(utf8.RuneCountInString(strings.Map(keepCyrillic, ru))) / float64(mixed.Letters)
	if math.Abs(mixed.ScriptShare-want) > 0.02 {
		t.Errorf("mixed: script share %.3f, want about %.3f", mixed.ScriptShare, want)
	}
}

func keepCyrillic(r rune) rune {
	if r >= 0x400 && r <= 0x4ff {
		return r
	}
	return -1
}

// TestLangScriptOnlyCandidates: a script that names one candidate decides
// without n-grams; one that names none gives Undetermined; a detector
// offered one Latin language answers it for any Latin text (why the
// default candidate list is wide).
func TestLangScriptOnlyCandidates(t *testing.T) {
	d, err := New(Options{Candidates: []string{"en", "ko", "el"}})
	if err != nil {
		t.Fatal(err)
	}
	for code, want := range map[string]string{"ko": "ko", "el": "el", "de": "en", "ru": Undetermined, "zh": Undetermined, "he": Undetermined} {
		p := udhrParagraphs(t, code)[1]
		if r := d.Detect(p); r.Lang != want || r.Windows != 0 {
			t.Errorf("%s text: %+v, want %s without sampling", code, r, want)
		}
	}
	zhOnly, err := New(Options{Candidates: []string{"zh", "en"}})
	if err != nil {
		t.Fatal(err)
	}
	if r := zhOnly.Detect(udhrParagraphs(t, "ja")[0]); r.Lang != Undetermined {
		t.Errorf("Japanese without ja candidate: %+v", r)
	}
}

// TestLangOptionsErrors: bad options are errors naming the value.
func TestLangOptionsErrors(t *testing.T) {
	for _, o := range []Options{
		{Candidates: []string{"en", "xx"}},
		{Candidates: []string{}},
		{Windows: -1},
		{Windows: MaxWindows + 1},
		{Windows: 5, MaxWindows: 4},
		{WindowChars: 10},
	} {
		if _, err := New(o); err == nil {
			t.Errorf("%+v: no error", o)
		}
	}
	if _, err := ParseCode("no"); err == nil || !strings.Contains(err.Error(), `"nb"`) {
		t.Errorf("ParseCode(no): %v", err)
	}
	if c, err := CanonicalCode(" DE "); err != nil || c != "de" {
		t.Errorf("CanonicalCode: %q %v", c, err)
	}
}

// TestLangSampling: long documents are sampled in bounded windows, more of
// them when they disagree; short ones are read whole.
func TestLangSampling(t *testing.T) {
	d := defaultDetector(t)
	de := strings.Join(udhrParagraphs(t, "de"), "\n")
	if r := d.Detect(de); r.Windows != DefaultWindows || r.Lang != "de" {
		t.Errorf("long German: %+v", r)
	}
	short := udhrParagraphs(t, "de")[0]
	if r := d.Detect(short); r.Windows != 1 {
		t.Errorf("short German: %d windows", r.Windows)
	}
	// A page half German, half French: the first samples
	// disagree, so more are taken, and the confidence says it is mixed.
	// (German first half, French second half: start and middle samples
	// read German, the end French.)
	dp, fp := udhrParagraphs(t, "de"), udhrParagraphs(t, "fr")
	r := d.Detect(strings.Join(dp[:15], "\n") + "\n" + strings.Join(fp[:15], "\n"))
	t.Logf("half German, half French: %+v", r)
	if r.Windows <= DefaultWindows || r.Windows > DefaultMaxWindows || r.Confidence > 0.8 || (r.Lang != "de" && r.Lang != "fr") {
		t.Errorf("mixed page: %+v", r)
	}
	for i, want := range []float64{0, 1, 0.5, 0.25, 0.75, 0.125, 0.625, 0.375, 0.875} {
		if got := sampleFrac(i); got != want {
			t.Errorf("sampleFrac(%d) = %v, want %v", i, got, want)
		}
	}
}

// TestLangConcurrentDetect: Detect (and the lingua detectors behind close
// calls) gives the same results from many goroutines as sequentially.
// Run with -race to check lingua's concurrency safety.
func TestLangConcurrentDetect(t *testing.T) {
	d := defaultDetector(t)
	var texts []string
	for _, code := range []string{"da", "nb", "sv", "es", "pt", "cs", "sk", "uk", "ru", "fa", "ar"} {
		texts = append(texts, udhrParagraphs(t, code)[:6]...)
		texts = append(texts, loadUDHR(t, code)[:6]...) // short ones: close calls
	}
	want := make([]Result, len(texts))
	for i, s := range texts {
		want[i] = d.Detect(s)
	}
	var wg sync.WaitGroup
	errs := make(chan string, 8*len(texts))
	for g := 0; g < 8; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range texts {
				i := (k + g*7) % len(texts)
				if r := d.Detect(texts[i]); r != want[i] {
					errs <- texts[i]
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for s := range errs {
		t.Errorf("concurrent result differs for %q", s)
	}
}

// FuzzLangDetect: any bytes give a result within range and no panic.
func FuzzLangDetect(f *testing.F) {
	for _, s := range []string{"", " ", "\x00", "\xff\xfe", "😀", "<a href='x'>y</a>", "&amp;",
		"Hello world, this is a test.", "Привет, мир", "שלום עולם", "مرحبا بالعالم", "日本語のテキスト", "中文文本",
		"e\u0301te\u0301 a\u0300 Paris", strings.Repeat("ab", 600), "<" + strings.Repeat("x", 600),
		"Anda bisa menyimpan berkas ini karena jendela sudah terbuka.", "Anda boleh menyimpan fail ini kerana tetingkap sudah dibuka."} {
		f.Add(s)
	}
	d := defaultDetector(f)
	cands := map[string]bool{Undetermined: true}
	for _, c := range d.Candidates() {
		cands[c] = true
	}
	f.Fuzz(func(t *testing.T, s string) {
		r := d.Detect(s)
		if !cands[r.Lang] || r.Confidence < 0 || r.Confidence > 1 || r.LetterShare < 0 || r.LetterShare > 1 ||
			r.ScriptShare < 0 || r.ScriptShare > 1 || r.Letters > len(s) {
			t.Fatalf("%q: %+v", s, r)
		}
	})
}

// TestLangTableBytes guards the memory of the packed tables of the
// default candidates, every language the models cover (21 MB when
// written, with 16-bit rows and 4-byte slots; 7.4 MB for the 31 common web
// languages).
func TestLangTableBytes(t *testing.T) {
	n := defaultDetector(t).TableBytes()
	t.Logf("packed tables: %.1f MB", float64(n)/(1<<20))
	if n < 16<<20 || n > 48<<20 {
		t.Errorf("packed tables take %d bytes", n)
	}
}

// TestLangLinguaText: close calls hand lingua only the sample's letters of
// the deciding script, without markup.
func TestLangLinguaText(t *testing.T) {
	for _, c := range []struct {
		in   string
		keep script
		want string
	}{
		{"<b>Hej</b> мир &amp; du", scriptLatin, " Hej        du"},
		{"<b>Hej</b> мир &amp; du", scriptCyrillic, "      мир     "},
		{"a < b & c", scriptLatin, "a < b & c"},
	} {
		if got := linguaText(c.in, c.keep); got != c.want {
			t.Errorf("linguaText(%q, %s) = %q, want %q", c.in, scriptNames[c.keep], got, c.want)
		}
	}
}

// TestLangQuantisation: the packed tables hold every log-probability of
// the default candidates' models without clamping (qScale leaves room
// down to -32 nats), and a stored value reads back within half a step of
// lingua's own probability.
func TestLangQuantisation(t *testing.T) {
	d := defaultDetector(t)
	for _, r := range d.byScript {
		if r.group == nil {
			continue
		}
		m := r.group.model
		if m.clamped != 0 {
			t.Errorf("%s: %d log-probabilities below -%.0f nats clamped", scriptNames[r.group.script], m.clamped, maxQuantNats)
		}
		// The first language's own trigrams read back as lingua's.
		probs, err := decodeModel(m.langs[0], 3)
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range probs[:min(len(probs), 2000)] {
			row, ok := m.tri.lookup(e.key)
			if e.p <= 0 {
				continue // lingua backs off from it
			}
			if !ok {
				t.Fatalf("%v: trigram %x missing", m.langs[0], e.key)
			}
			if got, want := m.logProb(row, 0), math.Log(e.p); math.Abs(got-want) > 0.5/qScale+1e-12 {
				t.Errorf("%v: trigram %x: %g, lingua %g", m.langs[0], e.key, got, want)
			}
		}
	}
	for _, lp := range []float64{-1e-9, -0.5, -3.14159, -17.25, -31.99} {
		q, clamped := quantise(lp)
		if clamped || q == 0 {
			t.Errorf("quantise(%g) = %d, clamped %v", lp, q, clamped)
		}
		if got := -float64(q) / qScale; math.Abs(got-lp) > 0.5/qScale && q != 1 {
			t.Errorf("quantise(%g) reads back as %g", lp, got)
		}
	}
	if q, clamped := quantise(-40); q != 65535 || !clamped {
		t.Errorf("quantise(-40) = %d, clamped %v", q, clamped)
	}
	if q, _ := quantise(0); q != 0 {
		t.Errorf("quantise(0) = %d, want 0 (p = 1 adds nothing, as in lingua)", q)
	}
}

// TestLangBelowU0300: every code point below U+0300 is NFC_Quick_Check=Yes
// (checked against golang.org/x/text/unicode/norm, an implementation of
// Unicode Standard Annex #15), so a sample of them needs no normalising,
// and the byte test agrees with decoding.
func TestLangBelowU0300(t *testing.T) {
	for r := rune(0); r < 0x300; r++ {
		s := "a" + string(r) + "b"
		if !norm.NFC.IsNormalString(s) || !belowU0300(s) {
			t.Errorf("U+%04X: normal %v, below %v", r, norm.NFC.IsNormalString(s), belowU0300(s))
		}
	}
	for _, s := range []string{"e\u0301", "\u0300", "ж", "\u1ea1", "\U0001F600"} {
		if belowU0300(s) {
			t.Errorf("%q reported below U+0300", s)
		}
	}
}

// FuzzLangDecodeRune: decodeRune agrees with unicode/utf8 at every offset,
// invalid and truncated sequences included.
func FuzzLangDecodeRune(f *testing.F) {
	for _, s := range []string{"", "a", "é", "\xc3", "\xc3(", "\xc0\x80", "\xdf\xbf", "жñ€😀", "\xe2\x82", "\xc2\xa0x"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		for i := 0; i < len(s); i++ {
			r, n := decodeRune(s, i)
			wr, wn := utf8.DecodeRuneInString(s[i:])
			if r != wr || n != wn {
				t.Fatalf("%q at %d: %U/%d, utf8 %U/%d", s, i, r, n, wr, wn)
			}
		}
	})
}
