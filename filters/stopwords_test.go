package filters

import (
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
)

// The supported languages: the ~30 common web languages the project
// promises plus a few more European and Asian ones the dataset has.
var wantStopwordLangs = strings.Fields("ar bg bn ca cs da de el en es et fa fi fr he hi hr hu id it ja ko lt lv ms nl no pl pt ro ru sk sl sv th tr uk ur vi zh")

// loadDataset reads the vendored stopwords-iso dataset (npm package
// "stopwords-iso" 1.1.0, MIT; testdata/stopwords-iso/).
func loadDataset(t *testing.T) map[string][]string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "stopwords-iso", "stopwords-iso.json"))
	if err != nil {
		t.Fatalf("vendored dataset: %v", err)
	}
	var m map[string][]string
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatalf("vendored dataset: %v", err)
	}
	return m
}

// TestStopwordListsMatchDataset checks that every supported language
// loads and that its embedded list is the dataset's list, entry for entry
// (source: open dataset, npm package stopwords-iso).
func TestStopwordListsMatchDataset(t *testing.T) {
	data := loadDataset(t)
	langs := StopwordLanguages()
	if strings.Join(langs, " ") != strings.Join(wantStopwordLangs, " ") {
		t.Fatalf("languages %v, want %v", langs, wantStopwordLangs)
	}
	for _, lang := range langs {
		raw, err := RawStopwords(lang)
		if err != nil {
			t.Fatal(err)
		}
		want := data[lang]
		if len(want) == 0 {
			t.Fatalf("%s: not in the dataset", lang)
		}
		if strings.Join(raw, "\n") != strings.Join(want, "\n") {
			t.Fatalf("%s: embedded list differs from the dataset (%d vs %d entries)", lang, len(raw), len(want))
		}
		sw, err := StopwordsFor(lang)
		if err != nil {
			t.Fatal(err)
		}
		// the loaded set is the dataset normalized: NormalizeEntry of each
		// entry, empty (punctuation-only) entries dropped, duplicates merged
		norm := map[string]bool{}
		for _, e := range want {
			if n := NormalizeEntry(e); n != "" {
				norm[n] = true
			}
		}
		var keys []string
		for k := range norm {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		if got := sw.Words(); strings.Join(got, "\n") != strings.Join(keys, "\n") {
			t.Fatalf("%s: %d normalized entries, want %d", lang, len(got), len(keys))
		}
		for _, e := range want {
			if NormalizeEntry(e) != "" && !sw.Contains(e) {
				t.Fatalf("%s: dataset entry %q not found", lang, e)
			}
		}
	}
	// Bokmål and Nynorsk, which language identification tells apart, use
	// the dataset's one Norwegian list
	no, _ := StopwordsFor("no")
	for _, code := range []string{"nb", "nn"} {
		if sw, err := StopwordsFor(code); err != nil || sw != no {
			t.Fatalf("%s: %v, want the Norwegian list", code, err)
		}
	}
	if got := strings.Join(StopwordCodes(), " "); !strings.Contains(got, "nb nl nn no") {
		t.Fatalf("codes %s", got)
	}
	if _, err := StopwordsFor("xx"); err == nil || !strings.Contains(err.Error(), `"xx"`) {
		t.Fatalf("unknown language: %v", err)
	}
	if !strings.Contains(StopwordLicense(), "MIT") {
		t.Fatal("licence text missing")
	}
}

func TestNormalizeWord(t *testing.T) {
	for in, want := range map[string]string{
		"The":        "the",
		"(boat),":    "boat",
		"«Wort»":     "wort",
		"ÉTÉ":        "été",
		"don't":      "don't",
		"...":        "",
		"🚤":          "",
		"x\x00":      "x",
		"ΣΚΑΦΟΣ.":    "σκαφοσ",
		"'ll":        "ll",
		"e.g.":       "e.g",
		"100%":       "100",
		"\xffab\xff": "ab", // invalid bytes at the ends are no letters: trimmed
	} {
		if got := string(NormalizeWord(nil, in)); got != want {
			t.Errorf("NormalizeWord(%q) = %q, want %q", in, got, want)
		}
	}
	// a fixed buffer too small for the result gives no result
	var buf [4]byte
	if got := NormalizeWord(buf[:0], "longword"); len(got) != 0 {
		t.Errorf("overflow: %q", got)
	}
}

func TestCountStopwords(t *testing.T) {
	var s Scratch
	en, _ := StopwordsFor("en")
	text := "The boat and THE mast, of course; with care. Have to be sure that it floats."
	s.Split(text)
	c := CountStopwords(&s, text, en)
	// Gopher eight: The, and, THE, of, with, Have, to, be, that = 9
	if c.Gopher != 9 {
		t.Errorf("gopher count %d, want 9", c.Gopher)
	}
	if c.Tokens != 16 || c.Matches < 9 || c.Density() <= 0.5 {
		t.Errorf("count %+v", c)
	}
	// German: der, die, und are entries of the German list
	de, _ := StopwordsFor("de")
	text = "Der Rumpf und die Farbe"
	s.Split(text)
	if c := CountStopwords(&s, text, de); c.Matches != 3 || c.Tokens != 5 || c.Gopher != 0 {
		t.Errorf("de count %+v", c)
	}
	// Vietnamese multi-word entries ("a ha") count once and cover two tokens
	vi, _ := StopwordsFor("vi")
	text = "a ha thuyền"
	s.Split(text)
	if c := CountStopwords(&s, text, vi); c.Matches != 1 || c.Covered != 2 || c.Tokens != 3 {
		t.Errorf("vi count %+v", c)
	}
	// Chinese is segmented greedily: 我们 (we) and 的 are entries
	zh, _ := StopwordsFor("zh")
	if !zh.Contains("我们") || !zh.Contains("的") {
		t.Fatal("zh list lacks 我们 or 的")
	}
	text = "我们的船"
	s.Split(text)
	if c := CountStopwords(&s, text, zh); c.Matches < 2 || c.Tokens < 3 {
		t.Errorf("zh count %+v", c)
	}
}

func TestStopwordsZeroAllocs(t *testing.T) {
	en, _ := StopwordsFor("en")
	docs := []string{boatyardText(7, 6000), boatyardText(8, 6000)}
	var s Scratch
	MeasureQuality(&s, docs[0], en)
	MeasureQuality(&s, docs[1], en)
	i := 0
	if a := testing.AllocsPerRun(50, func() { MeasureQuality(&s, docs[i%2], en); i++ }); a != 0 {
		t.Fatalf("MeasureQuality allocates %.1f times per document", a)
	}
}

// TestStopwordsForConcurrent: goroutines asking for different languages
// at once (as workers over a multilingual corpus do) load each list once
// and share it; run with -race, this found a shared map written while
// read.
func TestStopwordsForConcurrent(t *testing.T) {
	langs := StopwordLanguages()
	got := make([][]*Stopwords, 8)
	var wg sync.WaitGroup
	for g := range got {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range langs {
				sw, err := StopwordsFor(langs[(i+g*7)%len(langs)])
				if err != nil {
					t.Error(err)
					return
				}
				got[g] = append(got[g], sw)
			}
		}()
	}
	wg.Wait()
	for _, lang := range langs {
		want, _ := StopwordsFor(lang)
		if want == nil || want.Lang != lang {
			t.Fatalf("%s: %+v", lang, want)
		}
	}
	for g := range got {
		for i, sw := range got[g] {
			if lang := langs[(i+g*7)%len(langs)]; sw == nil || sw.Lang != lang {
				t.Fatalf("goroutine %d, call %d: list of %v, want %s", g, i, sw, lang)
			}
			if want, _ := StopwordsFor(sw.Lang); want != sw {
				t.Errorf("%s: two lists loaded", sw.Lang)
			}
		}
	}
}
