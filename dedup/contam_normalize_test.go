package dedup

import (
	"os"
	"strconv"
	"strings"
	"testing"
	"unicode"

	"golang.org/x/text/unicode/norm"
)

// caseFoldingFile holds the C and F entries of the Unicode Character
// Database's CaseFolding.txt (testdata/unicode-casefold/README.md, Unicode
// licence): the full case folding.
const caseFoldingFile = "../testdata/unicode-casefold/CaseFolding-CF.txt"

// readCaseFolding parses caseFoldingFile into a map from a code point to
// its full case folding.
func readCaseFolding(t testing.TB) map[rune]string {
	t.Helper()
	b, err := os.ReadFile(caseFoldingFile)
	if err != nil {
		t.Fatalf("%v: run testdata/unicode-casefold/build.sh", err)
	}
	fold := map[rune]string{}
	for n, line := range strings.Split(string(b), "\n") {
		line, _, _ = strings.Cut(line, "#")
		f := strings.Split(line, ";")
		if len(f) < 3 {
			continue
		}
		if st := strings.TrimSpace(f[1]); st != "C" && st != "F" {
			t.Fatalf("%s:%d: status %q", caseFoldingFile, n+1, st)
		}
		c, err := strconv.ParseUint(strings.TrimSpace(f[0]), 16, 32)
		if err != nil {
			t.Fatalf("%s:%d: %v", caseFoldingFile, n+1, err)
		}
		var m []rune
		for _, h := range strings.Fields(f[2]) {
			v, err := strconv.ParseUint(h, 16, 32)
			if err != nil {
				t.Fatalf("%s:%d: %v", caseFoldingFile, n+1, err)
			}
			m = append(m, rune(v))
		}
		fold[rune(c)] = string(m)
	}
	if len(fold) < 1500 {
		t.Fatalf("%s: only %d entries", caseFoldingFile, len(fold))
	}
	return fold
}

// refNormalize is the word normaliser's definition built from the Unicode
// data alone: NFKC (x/text's norm, UAX #15) and the full case folding of
// CaseFolding.txt, repeated until neither changes the text.
func refNormalize(fold map[rune]string, s string) string {
	for range 8 {
		n := norm.NFKC.String(s)
		var b strings.Builder
		for _, r := range n {
			if m, ok := fold[r]; ok {
				b.WriteString(m)
			} else {
				b.WriteRune(r)
			}
		}
		if b.String() == s {
			break
		}
		s = b.String()
	}
	return s
}

// TestContamFoldMatchesCaseFolding checks the word normaliser against
// Unicode's CaseFolding.txt (full folding, C and F entries) on every
// letter, mark and number: a lone character normalizes as NFKC followed
// by the file's folding does. Cherokee is the case in point: the file
// folds small letters to capitals (U+AB70 CHEROKEE SMALL LETTER A to
// U+13A0), where golang.org/x/text's case folding swaps them.
func TestContamFoldMatchesCaseFolding(t *testing.T) {
	fold := readCaseFolding(t)
	tok := newContamTokenizer()
	checked, bad := 0, 0
	for r := rune(0); r <= unicode.MaxRune; r++ {
		if !(unicode.IsLetter(r) || unicode.IsNumber(r)) {
			continue
		}
		s := string(r)
		want := refNormalize(fold, s)
		if strings.IndexFunc(want, func(r rune) bool { return !contamNormWordRune(r) }) >= 0 {
			continue // splits into several words (e.g. "㈠" is "(一)")
		}
		checked++
		tok.tokenize(s)
		got := strings.TrimSuffix(string(tok.norm), " ")
		if got != want {
			if bad++; bad <= 20 {
				t.Errorf("%U %q: normalized %+q, CaseFolding.txt and NFKC give %+q", r, s, got, want)
			}
		}
	}
	if bad > 20 {
		t.Errorf("... %d characters in all", bad)
	}
	if checked < 100000 {
		t.Fatalf("only %d characters checked", checked)
	}
}

// FuzzNormalizeWords checks the contamination word normaliser on any
// text: its output is words of word characters joined by single spaces,
// each word is already stable under NFKC and CaseFolding.txt's full
// folding (refNormalize), normalizing the output again changes nothing,
// and every word's original span lies inside the text, in order.
func FuzzNormalizeWords(f *testing.F) {
	for _, s := range []string{
		"The Quick, brown FOX! don't don’t hull-mounted",
		"ᏣᎳᎩ ꮳꮃꭹ Ᏸ ᏸ ΟΔΟΣ οδος Straße ﬁlter Ｈｕｌｌ",
		"cafe\u0301 \u1f80 \u0345\u0399 \u2126 \u212a \u0130 \u1e9e",
		"bad\xffbyte a\u00a0b ㈠ ™ ㎏",
	} {
		f.Add(s)
	}
	fold := readCaseFolding(f)
	f.Fuzz(func(t *testing.T, text string) {
		tok := newContamTokenizer()
		tok.tokenize(text)
		out := NormalizeWords(text)
		if out != strings.TrimSuffix(string(tok.norm), " ") {
			t.Fatalf("NormalizeWords %q, tokenizer %q", out, tok.norm)
		}
		if out != "" {
			for _, w := range strings.Split(out, " ") {
				if w == "" || strings.IndexFunc(w, func(r rune) bool { return !contamNormWordRune(r) }) >= 0 {
					t.Fatalf("word %q in %q", w, out)
				}
				if ref := refNormalize(fold, w); ref != w {
					t.Fatalf("word %+q is not folded: NFKC and CaseFolding.txt give %+q", w, ref)
				}
			}
		}
		if again := NormalizeWords(out); again != out {
			t.Fatalf("not idempotent: %+q -> %+q -> %+q", text, out, again)
		}
		last := int32(0)
		for i, w := range tok.words {
			if w.start < last || w.end < w.start || int(w.end) > len(text) || w.nend <= w.nstart {
				t.Fatalf("word %d spans %d..%d (normalized %d..%d) after %d in %d bytes", i, w.start, w.end, w.nstart, w.nend, last, len(text))
			}
			last = w.start
		}
	})
}
