package langid

import (
	"strings"
	"testing"
	"unicode"
)

// The marker words and the examples below are from memory (the standard
// spellings of Serbian, Croatian and Bosnian, Indonesian and Malay); the
// measured effect on real text is in TestLangEvalAccuracy / ACCURACY.md.
func TestClosePairDecisions(t *testing.T) {
	for _, c := range []struct{ text, top, want string }{
		// ekavian reflexes: Serbian
		{"Radionica Larkspur je uvek otvorena, a gde je reka, tu je i lepo mesto za brod.", "hr", "sr"},
		// ijekavian with Croatian word choice
		{"Tko želi popraviti brod, neka dođe ovaj tjedan; radionica je uvijek otvorena.", "bs", "hr"},
		// ijekavian with Serbian/Bosnian word choice: Bosnian
		{"Ko želi popraviti brod, neka dođe ove sedmice; radionica je uvijek otvorena, šta god treba.", "hr", "bs"},
		// "da li" with an ekavian form
		{"Da li je brod spreman? Radionica je uvek otvorena.", "bs", "sr"},
		// nothing to decide on: the first stage stands
		{"Brod je u radionici.", "hr", ""},
		{"Anda bisa menyimpan berkas ini karena jendela sudah terbuka.", "ms", "id"},
		{"Anda boleh menyimpan fail ini kerana tetingkap sudah dibuka.", "id", "ms"},
		{"Kapal ada di bengkel.", "id", ""},
	} {
		var got string
		switch c.top {
		case "bs", "hr", "sr":
			got = decideSerboCroatian(closeCounts(c.text, closePairMaxBytes), c.top)
		default:
			got = decideMalayic(closeCounts(c.text, closePairMaxBytes))
		}
		if got != c.want {
			t.Errorf("%q (first stage %s): got %q, want %q (counts %v)", c.text, c.top, got, c.want, closeCounts(c.text, closePairMaxBytes))
		}
	}
}

// TestClosePairDetect: through the detector, the second stage moves a
// text within its group only.
func TestClosePairDetect(t *testing.T) {
	d := defaultDetector(t)
	text := "Radionica Larkspur je uvek otvorena. Gde je reka, tu je lepo mesto za brod, a posle podne dolaze deca i vide kako se menja jedro."
	if r := d.Detect(text); r.Lang != "sr" {
		t.Errorf("ekavian text: %s, want sr", r.Lang)
	}
}

// FuzzCloseCounts: no panic on any bytes; every counted marker is a word
// of the text (a count never exceeds the number of words, "da li" counting
// as one more); the decision is always a member of its group or empty;
// and the counts do not depend on surrounding punctuation.
func FuzzCloseCounts(f *testing.F) {
	for _, s := range []string{"", "uvek gde reka", "Da li je tko tjedan", "karena bisa", "kerana boleh\xff\x00", "da li da li", "laki-laki- -"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c := closeCounts(s, closePairMaxBytes)
		words := len(strings.FieldsFunc(s, func(r rune) bool { return !unicode.IsLetter(r) }))
		total := 0
		for _, n := range c {
			if n < 0 {
				t.Fatalf("negative count %v", c)
			}
			total += n
		}
		if total > 2*words {
			t.Fatalf("%d markers in %d words", total, words)
		}
		if got := closeCounts(".,"+s+" !", closePairMaxBytes+3); got != c && len(s) <= closePairMaxBytes {
			t.Fatalf("punctuation changed the counts: %v vs %v", got, c)
		}
		for _, top := range []string{"bs", "hr", "sr"} {
			if p := decideSerboCroatian(c, top); p != "" && p != "bs" && p != "hr" && p != "sr" {
				t.Fatalf("decision %q", p)
			}
		}
		if p := decideMalayic(c); p != "" && p != "id" && p != "ms" {
			t.Fatalf("decision %q", p)
		}
	})
}
