package domain

import (
	"math/bits"
	"unicode"
	"unicode/utf8"
)

// Words are maximal runs of Unicode letters and digits, lower-cased; every
// other character separates words. Each word is hashed to 64 bits (FNV-1a
// over its lower-cased UTF-8 bytes, then the splitmix64 finaliser), and a
// bigram's hash mixes the hashes of its two words. A 64-bit hash h goes to
// bucket (h × buckets) >> 64, the multiply-shift range reduction, which
// works for any bucket count (the importance method's default is the
// paper's 10,000).

const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
	// bigramSalt keeps a bigram's hash away from its words' hashes.
	bigramSalt = 0x9e3779b97f4a7c15
)

// mix64 is the splitmix64 finaliser: a bijection on 64 bits whose output
// bits each depend on every input bit.
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	x ^= x >> 31
	return x
}

// bucketOf maps a 64-bit hash to [0, buckets).
func bucketOf(h uint64, buckets uint64) uint32 {
	hi, _ := bits.Mul64(h, buckets)
	return uint32(hi)
}

// bigramHash is the hash of the word pair (a, b), order-sensitive.
func bigramHash(a, b uint64) uint64 {
	return mix64(a*bigramSalt ^ bits.RotateLeft64(b, 29) ^ bigramSalt)
}

// asciiClass tells for each ASCII byte whether it is part of a word and
// gives its lower-case form (0 for separators).
var asciiClass = func() (t [128]byte) {
	for c := 0; c < 128; c++ {
		switch {
		case c >= 'a' && c <= 'z', c >= '0' && c <= '9':
			t[c] = byte(c)
		case c >= 'A' && c <= 'Z':
			t[c] = byte(c + 'a' - 'A')
		}
	}
	return t
}()

// wordScanner yields the hash of each word of a text in order. It
// allocates nothing.
type wordScanner struct {
	text string
	i    int
}

// next returns the hash of the next word, or false at the end of the text.
func (s *wordScanner) next() (uint64, bool) {
	text := s.text
	h := uint64(fnvOffset)
	inWord := false
	i := s.i
	for i < len(text) {
		c := text[i]
		if c < utf8.RuneSelf {
			i++
			if l := asciiClass[c]; l != 0 {
				h = (h ^ uint64(l)) * fnvPrime
				inWord = true
			} else if inWord {
				s.i = i
				return mix64(h), true
			}
			continue
		}
		r, size := utf8.DecodeRuneInString(text[i:])
		if r != utf8.RuneError && (unicode.IsLetter(r) || unicode.IsDigit(r) || unicode.IsMark(r) && inWord) {
			i += size
			r = unicode.ToLower(r)
			var buf [utf8.UTFMax]byte
			k := utf8.EncodeRune(buf[:], r)
			for _, b := range buf[:k] {
				h = (h ^ uint64(b)) * fnvPrime
			}
			inWord = true
		} else {
			i += size
			if inWord {
				s.i = i
				return mix64(h), true
			}
		}
	}
	s.i = i
	if inWord {
		return mix64(h), true
	}
	return 0, false
}

// Features appends to dst the buckets of the unigrams and bigrams of the
// first maxWords words of text (all words when maxWords <= 0), in text
// order (a word's unigram, then its bigram with the word before it), and
// returns the extended slice. Buckets must be positive.
func Features(dst []uint32, text string, buckets int, maxWords int) []uint32 {
	s := wordScanner{text: text}
	m := uint64(buckets)
	var prev uint64
	for n := 0; maxWords <= 0 || n < maxWords; n++ {
		w, ok := s.next()
		if !ok {
			break
		}
		dst = append(dst, bucketOf(w, m))
		if n > 0 {
			dst = append(dst, bucketOf(bigramHash(prev, w), m))
		}
		prev = w
	}
	return dst
}
