package langid

import (
	"strings"
	"unicode/utf8"
)

// Latin-script Serbian. lingua-go models Serbian in Cyrillic only, so a
// Serbian text in Latin letters reads as its nearest Latin-script
// neighbours, Croatian or Bosnian. Serbian's two alphabets map one to one
// (Vuk Karadžić's Cyrillic and Gaj's Latin alphabet: lj, nj and dž are the
// single letters љ, њ, џ), so when the Latin model names Croatian or
// Bosnian and Serbian is a candidate, the sample is also transliterated to
// Cyrillic and scored with lingua's Serbian model; the document is
// Serbian when that model explains it better, per trigram, than the
// Croatian or Bosnian one explains the Latin text by more than
// serbianMargin nats (TestLangSerbianLatin measures the margins on
// catalogue and UDHR texts).

// serbianLatin maps the lower-case letters of the Serbian Latin alphabet to
// Cyrillic (digraphs are handled in toSerbianCyrillic).
var serbianLatin = map[rune]rune{
	'a': 'а', 'b': 'б', 'c': 'ц', 'č': 'ч', 'ć': 'ћ', 'd': 'д', 'đ': 'ђ', 'e': 'е',
	'f': 'ф', 'g': 'г', 'h': 'х', 'i': 'и', 'j': 'ј', 'k': 'к', 'l': 'л', 'm': 'м',
	'n': 'н', 'o': 'о', 'p': 'п', 'r': 'р', 's': 'с', 'š': 'ш', 't': 'т', 'u': 'у',
	'v': 'в', 'z': 'з', 'ž': 'ж',
}

// toSerbianCyrillic transliterates Serbian Latin text to Cyrillic,
// lower-cased; other characters are kept.
func toSerbianCyrillic(s string) string {
	s = strings.ToLower(s)
	var b strings.Builder
	b.Grow(2 * len(s))
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		if i+n < len(s) {
			next, m := utf8.DecodeRuneInString(s[i+n:])
			switch {
			case r == 'l' && next == 'j':
				b.WriteRune('љ')
				i += n + m
				continue
			case r == 'n' && next == 'j':
				b.WriteRune('њ')
				i += n + m
				continue
			case r == 'd' && next == 'ž':
				b.WriteRune('џ')
				i += n + m
				continue
			}
		}
		if c, ok := serbianLatin[r]; ok {
			b.WriteRune(c)
		} else {
			b.WriteRune(r)
		}
		i += n
	}
	return b.String()
}

// serbianMargin: how much better (nats per trigram) lingua's Serbian model
// must explain the transliterated sample than the Croatian or Bosnian
// model the Latin one. Chosen from the margins TestLangSerbianLatin logs.
const serbianMargin = 0.02

// serbianGap returns the Serbian model's mean log-probability per trigram
// of the transliterated sample minus that of language j of the Latin
// group on the sample itself, and false when either scores nothing.
func (d *Detector) serbianGap(lat *ngramGroup, j int, sample string) (float64, bool) {
	cyr := d.byScript[scriptCyrillic].group
	if cyr == nil || d.srSlot < 0 {
		return 0, false
	}
	sc := d.pool.Get().(*scratch)
	defer d.pool.Put(sc)
	h1, _ := d.scoreSample(lat.model, sample, sc, 3)
	if h1 == 0 {
		return 0, false
	}
	latMean := sc.scores[j] / float64(h1)
	h2, _ := d.scoreSample(cyr.model, toSerbianCyrillic(sample), sc, 3)
	if h2 == 0 {
		return 0, false
	}
	return sc.scores[d.srSlot]/float64(h2) - latMean, true
}
