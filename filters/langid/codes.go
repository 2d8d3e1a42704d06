package langid

import (
	"fmt"
	"sort"
	"strings"

	"github.com/pemistahl/lingua-go"
)

// Undetermined is the code reported when no candidate can be named: the
// text has no letters, its letters are in a script no candidate uses, or
// none of its words is long enough to score.
const Undetermined = "und"

// commonWebCandidates are about thirty of the most common languages of
// web text (common practice: the largest language shares of public web
// crawls, from memory), chosen among those lingua-go models: a narrower
// candidate list for corpora known to hold only these.
var commonWebCandidates = []string{
	"ar", "bg", "cs", "da", "de", "el", "en", "es", "fa", "fi", "fr",
	"he", "hi", "hu", "id", "it", "ja", "ko", "nb", "nl", "pl", "pt",
	"ro", "ru", "sk", "sv", "th", "tr", "uk", "vi", "zh",
}

// AllLanguages returns the ISO 639-1 code of every language the bundled
// lingua-go models cover (75 in v1.4.0), sorted. It is the default
// candidate list: a language that is not a candidate is never named, and
// its documents are confidently mislabelled as a neighbour.
func AllLanguages() []string { return SupportedCodes() }

// DefaultCandidates returns the candidate list used when Options.Candidates
// is nil: AllLanguages().
func DefaultCandidates() []string { return AllLanguages() }

// CommonWebLanguages returns a narrower list of 31 common web languages
// (sorted), for corpora known to hold only these; detection over it is
// about twice as fast (see BenchmarkDetect).
func CommonWebLanguages() []string {
	return append([]string(nil), commonWebCandidates...)
}

// codeHints suggests the code lingua uses for a few common near misses.
var codeHints = map[string]string{
	"no": "nb", "iw": "he", "in": "id", "jp": "ja", "cn": "zh", "kr": "ko",
	"gr": "el", "dk": "da", "se": "sv", "ua": "uk", "cz": "cs", "zh-cn": "zh",
}

// ParseCode returns the lingua language of an ISO 639-1 code (any case) or
// an error naming the code and what lingua-go knows.
func ParseCode(code string) (lingua.Language, error) {
	c := strings.ToLower(strings.TrimSpace(code))
	if len(c) == 2 {
		if iso := lingua.GetIsoCode639_1FromValue(c); iso != lingua.UnknownIsoCode639_1 {
			if l := lingua.GetLanguageFromIsoCode639_1(iso); l != lingua.Unknown {
				return l, nil
			}
		}
	}
	msg := fmt.Sprintf("unknown language code %q", code)
	if h, ok := codeHints[c]; ok {
		msg += fmt.Sprintf(" (did you mean %q?)", h)
	} else {
		msg += " (known ISO 639-1 codes: " + strings.Join(SupportedCodes(), ", ") + ")"
	}
	return lingua.Unknown, fmt.Errorf("%s", msg)
}

// CanonicalCode returns code lower-cased and checked against the codes
// lingua-go models, or ParseCode's error.
func CanonicalCode(code string) (string, error) {
	l, err := ParseCode(code)
	if err != nil {
		return "", err
	}
	return codeOf(l), nil
}

// SupportedCodes returns every ISO 639-1 code lingua-go models, sorted.
func SupportedCodes() []string {
	var out []string
	for _, l := range lingua.AllLanguages() {
		out = append(out, codeOf(l))
	}
	sort.Strings(out)
	return out
}

func codeOf(l lingua.Language) string {
	return strings.ToLower(l.IsoCode639_1().String())
}

// scriptOfLanguage returns the one script lingua-go reads a language in
// (Japanese is reported as Han: kana decide it, see Detect).
func scriptOfLanguage(l lingua.Language) script {
	for _, g := range []struct {
		s     script
		langs []lingua.Language
	}{
		{scriptLatin, lingua.AllLanguagesWithLatinScript()},
		{scriptCyrillic, lingua.AllLanguagesWithCyrillicScript()},
		{scriptArabic, lingua.AllLanguagesWithArabicScript()},
		{scriptDevanagari, lingua.AllLanguagesWithDevanagariScript()},
	} {
		for _, x := range g.langs {
			if x == l {
				return g.s
			}
		}
	}
	switch l {
	case lingua.Chinese, lingua.Japanese:
		return scriptHan
	case lingua.Greek:
		return scriptGreek
	case lingua.Hebrew:
		return scriptHebrew
	case lingua.Korean:
		return scriptHangul
	case lingua.Thai:
		return scriptThai
	case lingua.Armenian:
		return scriptArmenian
	case lingua.Georgian:
		return scriptGeorgian
	case lingua.Bengali:
		return scriptBengali
	case lingua.Gujarati:
		return scriptGujarati
	case lingua.Punjabi:
		return scriptGurmukhi
	case lingua.Tamil:
		return scriptTamil
	case lingua.Telugu:
		return scriptTelugu
	}
	return scriptNone
}
