package langid

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"io"
	"math"
	"os"
	"slices"
	"strings"
	"testing"
	"unicode"
)

// TestPairWordsParse: the embedded counts load, and each learnt model
// agrees with the marker words, which were written independently from
// memory: of the marker words a model has seen, most lean toward the
// languages their class speaks for (the rest are words the catalogues use
// in more than one standard). Measured 2026-12-03: Indonesian/Malay 244
// of 253, Bosnian/Croatian/Serbian 604 of 620.
func TestPairWordsParse(t *testing.T) {
	gs, err := loadPairGroups()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		group  string
		labels []string
		floor  float64
	}{{"ma", []string{"id", "ms"}, 0.9}, {"sc", []string{"bs", "hr", "sr"}, 0.9}} {
		g := gs[c.group]
		if g == nil || !slices.Equal(g.labels, c.labels) {
			t.Fatalf("group %s: %+v", c.group, g)
		}
		if len(g.logp) < 5000 {
			t.Fatalf("group %s: only %d words", c.group, len(g.logp))
		}
		agree, seen := 0, 0
		var against []string
		for w, class := range closeMarkers {
			lp, ok := g.logp[w]
			if !ok {
				continue
			}
			// for: the labels the class speaks for; the word agrees when
			// one of them is more probable than every other label.
			var forLabels []string
			for _, l := range g.labels {
				var one [numMarkers]int
				one[class] = 1
				if markerVotes(one, l) > 0 {
					forLabels = append(forLabels, l)
				}
			}
			if len(forLabels) == 0 || len(forLabels) == len(g.labels) {
				continue
			}
			seen++
			bestFor, bestOther := math.Inf(-1), math.Inf(-1)
			for i, l := range g.labels {
				if slices.Contains(forLabels, l) {
					bestFor = max(bestFor, float64(lp[i]))
				} else {
					bestOther = max(bestOther, float64(lp[i]))
				}
			}
			if bestFor > bestOther {
				agree++
			} else {
				against = append(against, w)
			}
		}
		slices.Sort(against)
		t.Logf("%s: model agrees with %d of %d marker words; against: %v", c.group, agree, seen, against)
		if seen < 100 || float64(agree) < c.floor*float64(seen) {
			t.Errorf("%s: model agrees with only %d of %d marker words", c.group, agree, seen)
		}
	}
}

// TestPairModelDecides: through the detector, a text with no marker word
// is decided by the word model's learnt vocabulary (from memory: jangkauan
// and pencocokan are Indonesian software terms, julat and padanan Malay).
func TestPairModelDecides(t *testing.T) {
	d := defaultDetector(t)
	g := pairModel("ma")
	for _, c := range []struct{ text, want string }{
		{"nilai tidak berada dalam jangkauan yang diizinkan, pencocokan pola gagal", "id"},
		{"nilai tidak berada dalam julat yang dibenarkan, padanan corak gagal", "ms"},
	} {
		m, sc, known := closeEvidence(c.text, closePairMaxBytes, g)
		if got := d.decideByModel(g, sc, known, m, malayicMarkerWeight); got != c.want {
			t.Errorf("%q: %q, want %q", c.text, got, c.want)
		}
	}
	m, sc, known := closeEvidence("Larkspur 42", closePairMaxBytes, g)
	if got := d.decideByModel(g, sc, known, m, malayicMarkerWeight); got != "" {
		t.Errorf("no known word: %q, want undecided", got)
	}
}

func gzipBytes(t testing.TB, s string) []byte {
	var b bytes.Buffer
	zw := gzip.NewWriter(&b)
	zw.Write([]byte(s))
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestPairWordsErrors(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"ma\tid\t\t10\nma\tid\tkata\n", "line 2: 3 fields"},
		{"ma\tid\t\t10\nma\tid\tkata\tx\n", `line 2: bad count "x"`},
		{"ma\tid\tkata\t3\n", `line 1: label "id" has no total`},
		{"ma\tid\t\t1\nma\tid\tkata\t2\n", `line 2: the counts of "id" exceed its total`},
		{"ma\tid\t\t1\nma\tid\t\t2\n", `line 2: second total for "id"`},
		{"ma\tid\t\tNaN\n", `line 1: bad count "NaN"`},
		{"ma\tid\t\t+Inf\n", `line 1: bad count "+Inf"`},
		{"ma\tid\t\t9\nma\tid\tw\t2\nma\tid\tw\t2\n", `line 3: second count of "w" for "id"`},
	} {
		_, err := parsePairWords(gzipBytes(t, c.in))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: %v, want %q", c.in, err, c.want)
		}
	}
	if _, err := parsePairWords([]byte("not gzip")); err == nil {
		t.Error("not gzip: no error")
	}
}

// FuzzParsePairWords: any counts file either fails with an error or gives
// groups whose log-probabilities are finite, at most 0, one per label, and
// sum (with the unseen mass) to at most 1 per label.
func FuzzParsePairWords(f *testing.F) {
	for _, s := range []string{"ma\tid\t\t10\nma\tms\t\t5\nma\tid\tkata\t3\nma\tms\tkata\t1\n", "# x\n", "ma\tid\t\t1e300\nma\tid\tw\t1e300\n", "a\tb\t\t0\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		gs, err := parsePairWords(gzipBytes(t, s))
		if err != nil {
			return
		}
		for name, g := range gs {
			for w, lp := range g.logp {
				if len(lp) != len(g.labels) {
					t.Fatalf("%s %q: %d values for %d labels", name, w, len(lp), len(g.labels))
				}
				for _, v := range lp {
					if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) || v > 0 {
						t.Fatalf("%s %q: log-probability %v", name, w, v)
					}
				}
			}
		}
	})
}

// FuzzForWords: every word is non-empty, lower-case, made of letters and
// inner hyphens, and found in order in the lower-cased text.
func FuzzForWords(f *testing.F) {
	for _, s := range []string{"", "Laki-laki dan Perempuan", "--a--b--", "ÉTÉ été", "x\xffy", strings.Repeat("a", 100)} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		low := strings.ToLower(s)
		at := 0
		var buf [64]byte
		forWords(s, buf[:0], func(w []byte) {
			if len(w) == 0 || w[0] == '-' || w[len(w)-1] == '-' {
				t.Fatalf("word %q", w)
			}
			for _, r := range string(w) {
				if r != '-' && (!unicode.IsLetter(r) || unicode.ToLower(r) != r) {
					t.Fatalf("word %q has %q", w, r)
				}
			}
			i := strings.Index(low[at:], string(w))
			if i < 0 {
				t.Fatalf("word %q not in %q after %d", w, low, at)
			}
			at += i + len(w)
		})
	})
}

// labelled is a text and the language it is written in.
type labelled struct{ code, text string }

// closeAcc counts, per language, the texts the detector names right with
// the word models (as Detect does) and with the marker words alone (the
// decision before the models).
type closeAcc struct{ model, markers, n int }

func measureClose(d *Detector, texts []labelled) map[string]*closeAcc {
	res := map[string]*closeAcc{}
	for _, e := range texts {
		a := res[e.code]
		if a == nil {
			a = &closeAcc{}
			res[e.code] = a
		}
		a.n++
		if d.Detect(e.text).Lang == e.code {
			a.model++
		}
		first, _ := d.detectStages(e.text, false)
		got, pick := first.Lang, ""
		c := closeCounts(e.text, closePairMaxBytes)
		switch got {
		case "bs", "hr", "sr":
			pick = decideSerboCroatian(c, got)
		case "id", "ms":
			pick = decideMalayic(c)
		}
		if pick != "" {
			got = pick
		}
		if got == e.code {
			a.markers++
		}
	}
	return res
}

// checkClose logs the accuracies and fails when the word models do worse
// than the markers alone, or below its floor, for a language of codes.
func checkClose(t *testing.T, res map[string]*closeAcc, floors map[string]float64) {
	t.Helper()
	var codes []string
	for c := range floors {
		codes = append(codes, c)
	}
	slices.Sort(codes)
	for _, code := range codes {
		a := res[code]
		if a == nil || a.n == 0 {
			t.Errorf("%s: no texts", code)
			continue
		}
		m, k := float64(a.model)/float64(a.n), float64(a.markers)/float64(a.n)
		t.Logf("%s: word model %.1f%%, marker words alone %.1f%% (%d texts)", code, 100*m, 100*k, a.n)
		if a.model < a.markers {
			t.Errorf("%s: the word model does worse than the markers alone", code)
		}
		if m < floors[code] {
			t.Errorf("%s: %.1f%% < %.0f%%", code, 100*m, 100*floors[code])
		}
	}
}

// TestCloseSecondSet: Indonesian, Malay, Bosnian, Croatian and Serbian
// (Latin script) texts from the catalogues of 14 Debian packages that
// neither the counts nor testdata/langeval read (testdata/closepairs, its
// README). Measured 2026-12-03, word models against marker words alone:
// Bosnian 76.2% / 58.3% (151 texts), Croatian 96.8% / 92.6% (311),
// Indonesian 99.7% / 96.3% (324), Malay 99.5% / 97.9% (188), Serbian
// 98.9% / 85.4% (261). Floors: one point or so below. The Serbo-Croatian part was looked at before the
// Bosnian/Croatian/Serbian model was adopted (pairdata/README.md), so for
// those three it is a second measurement, not a blind one.
func TestCloseSecondSet(t *testing.T) {
	f, err := os.Open("../../testdata/closepairs/texts.jsonl.gz")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	var texts []labelled
	dec := json.NewDecoder(zr)
	for {
		var r struct{ ID, Text string }
		if err := dec.Decode(&r); err == io.EOF {
			break
		} else if err != nil {
			t.Fatal(err)
		}
		code, _, ok := strings.Cut(r.ID, "/")
		if !ok {
			t.Fatalf("id %q has no language", r.ID)
		}
		texts = append(texts, labelled{code, r.Text})
	}
	if len(texts) != 1235 {
		t.Fatalf("%d texts, want 1235", len(texts))
	}
	checkClose(t, measureClose(defaultDetector(t), texts), map[string]float64{"bs": 0.75, "hr": 0.95, "id": 0.98, "ms": 0.98, "sr": 0.97})
}
