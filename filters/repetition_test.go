package filters

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"unicode/utf8"
)

// refRepetition computes the repetition metrics of Rae et al. 2021 the
// plain way, with strings and maps, from the definitions (appendix A,
// from memory): a duplicate is an occurrence after the first; character
// fractions count characters (runes); the top n-gram fraction is the
// count of the most frequent n-gram (when it repeats) times its
// characters over all word characters; the duplicate n-gram fraction
// counts the characters of words covered by a later occurrence of an
// n-gram, each word once.
func refRepetition(text string) Repetition {
	var r Repetition
	_, lines, paras := refSplit(text)
	total := utf8.RuneCountInString(text)
	seen := map[string]bool{}
	dup, dupChars := 0, 0
	for _, l := range lines {
		if seen[l.text] {
			dup++
			dupChars += utf8.RuneCountInString(l.text)
		}
		seen[l.text] = true
	}
	if len(lines) > 0 {
		r.RepeatedLinesShare = float64(dup) / float64(len(lines))
		r.RepeatedLineCharsShare = float64(dupChars) / float64(total)
	}
	// paragraphs are compared on their original spans
	var s Scratch
	s.Split(text)
	seen = map[string]bool{}
	dup, dupChars = 0, 0
	for _, p := range s.Paras {
		span := text[p.Start:p.End]
		if seen[span] {
			dup++
			dupChars += utf8.RuneCountInString(span)
		}
		seen[span] = true
	}
	if len(paras) > 0 {
		r.RepeatedParagraphsShare = float64(dup) / float64(len(paras))
		r.RepeatedParagraphCharsShare = float64(dupChars) / float64(total)
	}

	// phrases are of whitespace-separated tokens (see spacedTokens)
	words := strings.Fields(text)
	wordChars := 0
	for _, w := range words {
		wordChars += utf8.RuneCountInString(w)
	}
	gram := func(i, n int) (string, int) {
		chars := 0
		for _, w := range words[i : i+n] {
			chars += utf8.RuneCountInString(w)
		}
		return strings.Join(words[i:i+n], "\x00"), chars
	}
	for n := 2; n <= 4; n++ {
		count := map[string]int{}
		bestC, bestL := 0, 0
		for i := 0; i+n <= len(words); i++ {
			g, chars := gram(i, n)
			count[g]++
			if c := count[g]; c > bestC || (c == bestC && chars > bestL) {
				bestC, bestL = c, chars
			}
		}
		if bestC >= 2 {
			r.TopPhraseCharsShare[n-2] = math.Min(1, float64(bestC*bestL)/float64(wordChars))
		}
	}
	for n := 5; n <= 10; n++ {
		seen := map[string]bool{}
		covered := make([]bool, len(words))
		for i := 0; i+n <= len(words); i++ {
			g, _ := gram(i, n)
			if seen[g] {
				for k := i; k < i+n; k++ {
					covered[k] = true
				}
			}
			seen[g] = true
		}
		chars := 0
		for i, c := range covered {
			if c {
				chars += utf8.RuneCountInString(words[i])
			}
		}
		if wordChars > 0 {
			r.RepeatedPhraseCharsShare[n-5] = float64(chars) / float64(wordChars)
		}
	}
	return r
}

func repEqual(a, b Repetition) bool {
	eq := func(x, y float64) bool { return math.Abs(x-y) < 1e-12 }
	if !eq(a.RepeatedLinesShare, b.RepeatedLinesShare) || !eq(a.RepeatedLineCharsShare, b.RepeatedLineCharsShare) ||
		!eq(a.RepeatedParagraphsShare, b.RepeatedParagraphsShare) || !eq(a.RepeatedParagraphCharsShare, b.RepeatedParagraphCharsShare) {
		return false
	}
	for i := range a.TopPhraseCharsShare {
		if !eq(a.TopPhraseCharsShare[i], b.TopPhraseCharsShare[i]) {
			return false
		}
	}
	for i := range a.RepeatedPhraseCharsShare {
		if !eq(a.RepeatedPhraseCharsShare[i], b.RepeatedPhraseCharsShare[i]) {
			return false
		}
	}
	return true
}

// randomRepetitive builds text from a small vocabulary with copied spans,
// repeated lines and repeated paragraphs, so every metric has work to do.
func randomRepetitive(r *rand.Rand) string {
	vocab := []string{"hull", "keel", "the", "boat", "sand", "paint", "é", "日本", "a", "of", "deck", "mast"}
	var words []string
	n := r.IntN(200)
	for len(words) < n {
		if len(words) > 10 && r.IntN(4) == 0 {
			// copy an earlier span
			start := r.IntN(len(words) - 5)
			l := 1 + r.IntN(min(15, len(words)-start))
			words = append(words, words[start:start+l]...)
			continue
		}
		words = append(words, vocab[r.IntN(len(vocab))])
	}
	var b strings.Builder
	for i, w := range words {
		b.WriteString(w)
		switch {
		case i%7 == 6 && r.IntN(3) == 0:
			b.WriteString("\n\n")
		case r.IntN(6) == 0:
			b.WriteString("\n")
		default:
			b.WriteString(" ")
		}
	}
	return b.String()
}

func TestRepetitionMatchesReference(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	var s Scratch
	for iter := 0; iter < 1500; iter++ {
		text := randomRepetitive(r)
		got := MeasureRepetition(&s, text)
		want := refRepetition(text)
		if !repEqual(got, want) {
			t.Fatalf("text %q:\n got %+v\nwant %+v", trunc(text), got, want)
		}
	}
	for seed := uint64(0); seed < 8; seed++ {
		text := boatyardText(seed, 6000)
		if got, want := MeasureRepetition(&s, text), refRepetition(text); !repEqual(got, want) {
			t.Fatalf("boatyard %d:\n got %+v\nwant %+v", seed, got, want)
		}
	}
}

// TestRepetitionWorkedExamples checks values computed by hand.
func TestRepetitionWorkedExamples(t *testing.T) {
	var s Scratch
	// Three lines, the third repeats the first: 1/3 of the lines; the
	// repeat has 7 of the 23 characters (three lines of 7, two newlines).
	r := MeasureRepetition(&s, "aa bb c\ndd ee f\naa bb c")
	if math.Abs(r.RepeatedLinesShare-1.0/3) > 1e-12 || math.Abs(r.RepeatedLineCharsShare-7.0/23) > 1e-12 {
		t.Fatalf("lines: %v %v", r.RepeatedLinesShare, r.RepeatedLineCharsShare)
	}
	// "ab cd ef ab cd gh": the 2-gram "ab cd" occurs twice with 4
	// characters, over 12 word characters: 8/12. No 3-gram repeats.
	r = MeasureRepetition(&s, "ab cd ef ab cd gh")
	if math.Abs(r.TopPhraseCharsShare[0]-8.0/12) > 1e-12 || r.TopPhraseCharsShare[1] != 0 || r.TopPhraseCharsShare[2] != 0 {
		t.Fatalf("top n-grams: %v", r.TopPhraseCharsShare)
	}
	// "x y x y x y": overlapping occurrences; count times length exceeds
	// the text and is capped at 1 (2-gram "x y": 3*2/6, 4-gram "x y x y":
	// 2*4/6).
	r = MeasureRepetition(&s, "x y x y x y")
	if r.TopPhraseCharsShare != [3]float64{1, 1, 1} {
		t.Fatalf("top n-grams: %v", r.TopPhraseCharsShare)
	}
	// Ten distinct words then the same ten: the second copy is covered
	// by repeated 5..10-grams, half of the word characters.
	ten := "one two three four five six seven eight nine ten"
	r = MeasureRepetition(&s, ten+" "+ten)
	for i, f := range r.RepeatedPhraseCharsShare {
		if math.Abs(f-0.5) > 1e-12 {
			t.Fatalf("dup %d-gram fraction %v, want 0.5", i+5, f)
		}
	}
	// No repeated n-gram: all zero.
	r = MeasureRepetition(&s, ten)
	if r.TopPhraseCharsShare != [3]float64{} || r.RepeatedPhraseCharsShare != [6]float64{} {
		t.Fatalf("distinct words: %+v", r)
	}
}

// TestRepetitionZeroAllocs proves the n-gram pass allocates nothing per
// word once the scratch has grown.
func TestRepetitionZeroAllocs(t *testing.T) {
	docs := []string{boatyardText(5, 8000), boatyardText(6, 8000)}
	var s Scratch
	MeasureRepetition(&s, docs[0])
	MeasureRepetition(&s, docs[1])
	i := 0
	if a := testing.AllocsPerRun(50, func() { MeasureRepetition(&s, docs[i%2]); i++ }); a != 0 {
		t.Fatalf("MeasureRepetition allocates %.1f times per document", a)
	}
}
