package langid

import (
	"fmt"
	"math"
	"slices"
	"sync"
	"unicode/utf8"
	_ "unsafe" // for go:linkname to lingua's embedded model data

	"github.com/pemistahl/lingua-go"
	"github.com/pemistahl/lingua-go/serialization"
	"google.golang.org/protobuf/proto"
)

// linguaModelData returns lingua's embedded model file for one language and
// n-gram length (1..5) as protobuf bytes, or nil when lingua has none (its
// Chinese, Japanese and Korean models stop at unigrams).
//
// lingua-go keeps its models unexported; this reads the very bytes lingua
// itself decodes, from the data it embeds in the binary, so the packed
// tables below hold exactly lingua's probabilities. The package is pinned
// at v1.4.0 in go.mod; TestLangAgreesWithLingua fails if an upgrade changes
// either this function or the scoring it mirrors.
//
//go:linkname linguaModelData github.com/pemistahl/lingua-go.loadProtobufData
func linguaModelData(language lingua.Language, ngramLength int) []byte

// An n-gram's key packs its runes, 21 bits each, right-aligned: a trigram
// a,b,c is a<<42|b<<21|c, its bigram prefix a,b is key>>21 and its first
// letter key>>42. Keys are exact: no two n-grams share one.

// packedTable maps an n-gram key to a row of per-language log-probabilities.
// It is an open-addressing hash table with linear probing at load <= 1/2
// whose slots hold only a row index and an 8-bit fingerprint of the key's
// hash (4 bytes, so the slots of the largest table stay small enough to be
// mostly cached); the key itself is the first word of its row, which the
// scoring reads anyway. Rows live in the model's shared row array.
type packedTable struct {
	shift uint
	mask  uint64
	slots []uint32 // row<<8 | fingerprint; 0 = empty (row 0 is never used)
	rows  []uint64 // the model's rows; row r's key at rows[r*words]
	words int
}

// maxRows bounds the rows of a model: a slot holds a row index in 24 bits.
const maxRows = 1 << 24

const hashMul = 0x9E3779B97F4A7C15 // Fibonacci hashing multiplier (2^64 / golden ratio)

func newPackedTable(n int, rows []uint64, words int) packedTable {
	size := 16
	for size < 2*n {
		size <<= 1
	}
	bits := uint(0)
	for 1<<bits < size {
		bits++
	}
	return packedTable{shift: 64 - bits, mask: uint64(size - 1), slots: make([]uint32, size), rows: rows, words: words}
}

// probe returns key's first slot and fingerprint: the hash's top bits
// index the table, the 8 bits below them are the fingerprint.
func (t *packedTable) probe(key uint64) (uint64, uint32) {
	h := key * hashMul
	return h >> t.shift, uint32(h>>(t.shift-8)) & 0xff
}

func (t *packedTable) insert(key uint64, row uint32) {
	i, fp := t.probe(key)
	for t.slots[i] != 0 {
		i = (i + 1) & t.mask
	}
	t.slots[i] = row<<8 | fp
	t.rows[int(row)*t.words] = key
}

// lookup returns the row index of key and whether it is present.
func (t *packedTable) lookup(key uint64) (uint32, bool) {
	i, fp := t.probe(key)
	for {
		s := t.slots[i]
		if s == 0 {
			return 0, false
		}
		if s&0xff == fp && t.rows[int(s>>8)*t.words] == key {
			return s >> 8, true
		}
		i = (i + 1) & t.mask
	}
}

// ngramModel holds lingua's 1-, 2- and 3-gram models of a set of languages
// as three packed tables. A row holds, for each language, the natural log
// of the probability lingua would use for that n-gram, with lingua's
// back-off already applied: a trigram missing from a language's model
// falls back to its first two letters, then its first letter, and adds
// nothing (0) when none is known — exactly lingua's
// computeSumOfNgramProbabilities. One lookup thus yields the scores of all
// languages at once.
//
// The log-probabilities are stored negated and quantised to 1/qScale nat
// in 16 bits (0 = adds nothing), four languages to a uint64, so a row of
// the 49 Latin-script languages takes two cache lines instead of four
// float32 ones, and a row is summed four languages at a time in integer
// lanes (see addRow). Rounding moves a log-probability by at most
// 1/(2·qScale) ≈ 0.00024 nat, a sample of 500 trigrams by a few
// thousandths of a nat in practice: far below the 2 nats under which a
// sample is handed to lingua anyway.
type ngramModel struct {
	langs         []lingua.Language
	words         int      // uint64 words per row: the key, then ceil(len(langs)/4), padded to fill cache lines
	rows          []uint64 // every table's rows, row r at rows[r*words:]
	tri, bi, uni  packedTable
	bytesResident int64
	clamped       int // log-probabilities below -maxQuantNats, stored as the lowest value
}

// qScale is the quantisation step of the packed log-probabilities: 1/2048
// nat. 16 bits then hold log-probabilities down to -32 nats (p ≈ 1.3e-14);
// lingua's smallest are far above that (TestLangQuantisation).
const qScale = 2048

// maxQuantNats is the largest negated log-probability a row holds.
const maxQuantNats = 65535.0 / qScale

// quantise returns the stored value of log-probability lp (<= 0): its
// negation in steps of 1/qScale, at least 1 for any p < 1 so that a known
// n-gram never reads as unknown, clamped to 16 bits.
func quantise(lp float64) (q uint16, clamped bool) {
	v := math.Round(-lp * qScale)
	switch {
	case v >= 65535:
		return 65535, v > 65535
	case v < 1 && lp < 0:
		return 1, false
	case v < 1:
		return 0, false
	}
	return uint16(v), false
}

// ngramProb is one n-gram of a lingua model.
type ngramProb struct {
	key uint64
	p   float64
}

// decodeModel decodes one of lingua's model files.
func decodeModel(lang lingua.Language, n int) ([]ngramProb, error) {
	data := linguaModelData(lang, n)
	if data == nil {
		return nil, nil
	}
	var m serialization.SerializableLanguageModel
	if err := proto.Unmarshal(data, &m); err != nil {
		return nil, fmt.Errorf("langid: decode lingua %d-gram model of %v: %w", n, lang, err)
	}
	out := make([]ngramProb, 0, m.TotalNgrams)
	for _, set := range m.NgramSets {
		for _, g := range set.Ngrams {
			var key uint64
			k := 0
			for _, c := range g {
				key = key<<21 | uint64(c)
				k++
			}
			if k != n || !utf8.ValidString(g) {
				return nil, fmt.Errorf("langid: lingua %d-gram model of %v holds %q", n, lang, g)
			}
			out = append(out, ngramProb{key, set.Probability})
		}
	}
	return out, nil
}

// buildModel packs the 1-, 2- and 3-gram models of langs. Each table's
// rows start as the back-off rows (a bigram's row is its first letter's
// unigram row; a trigram's is its two-letter prefix's bigram row, else its
// first letter's), then each language's own n-grams overwrite its column.
func buildModel(langs []lingua.Language) (*ngramModel, error) {
	k := len(langs)
	probs := make([][3][]ngramProb, k) // [lang][n-1]
	errs := make([]error, k)
	var wg sync.WaitGroup
	for j, l := range langs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for n := 1; n <= 3; n++ {
				m, err := decodeModel(l, n)
				if err != nil {
					errs[j] = err
					return
				}
				probs[j][n-1] = m
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	m := &ngramModel{langs: langs}
	// Rows of more than one cache line are padded to whole lines (and,
	// the row array being page-aligned, start on a line), so a row
	// touches as few lines as it can.
	m.words = 1 + (k+3)/4
	if m.words > 8 {
		m.words = (m.words + 7) &^ 7
	}
	tables := [3]*packedTable{&m.uni, &m.bi, &m.tri}
	var keysBy [3][]uint64
	total := 0
	for n := 1; n <= 3; n++ {
		var keys []uint64
		for j := range langs {
			for _, e := range probs[j][n-1] {
				keys = append(keys, e.key)
			}
		}
		slices.Sort(keys)
		keysBy[n-1] = slices.Compact(keys)
		total += len(keysBy[n-1])
	}
	if total+1 > maxRows {
		return nil, fmt.Errorf("langid: %d n-grams exceed the packed tables' %d rows", total, maxRows-1)
	}
	m.rows = make([]uint64, (total+1)*m.words) // row 0: unused, all zero
	next := uint32(1)
	for n := 1; n <= 3; n++ {
		keys := keysBy[n-1]
		t := newPackedTable(len(keys), m.rows, m.words)
		for _, key := range keys {
			row := next
			next++
			t.insert(key, row)
			var from uint32 // the back-off row
			ok := false
			switch n {
			case 3:
				if from, ok = m.bi.lookup(key >> 21); !ok {
					from, ok = m.uni.lookup(key >> 42)
				}
			case 2:
				from, ok = m.uni.lookup(key >> 21)
			}
			if ok {
				copy(m.rowWords(row), m.rowWords(from))
			}
		}
		*tables[n-1] = t
		for j := range langs {
			for _, e := range probs[j][n-1] {
				if e.p > 0 { // lingua backs off from a zero probability
					row, _ := t.lookup(e.key)
					q, clamped := quantise(math.Log(e.p))
					if clamped {
						m.clamped++
					}
					w := &m.rowWords(row)[j/4]
					shift := 16 * uint(j%4)
					*w = *w&^(0xffff<<shift) | uint64(q)<<shift
				}
			}
		}
		m.bytesResident += int64(len(t.slots)) * 4
	}
	m.bytesResident += int64(len(m.rows)) * 8
	return m, nil
}

// rowWords returns row r's words of log-probabilities (after its key).
func (m *ngramModel) rowWords(r uint32) []uint64 {
	at := int(r)*m.words + 1
	return m.rows[at : at+(len(m.langs)+3)/4]
}

// logProb returns the log-probability column j of row r holds (0: adds
// nothing).
func (m *ngramModel) logProb(r uint32, j int) float64 {
	return -float64(m.rowWords(r)[j/4]>>(16*uint(j%4))&0xffff) / qScale
}

// triRow returns the row lingua's scoring adds for the trigram key, backing
// off to its bigram prefix and first letter, or 0 when no language knows
// even its first letter.
func (m *ngramModel) triRow(key uint64) uint32 {
	if r, ok := m.tri.lookup(key); ok {
		return r
	}
	if r, ok := m.bi.lookup(key >> 21); ok {
		return r
	}
	r, _ := m.uni.lookup(key >> 42)
	return r
}

// biRow is triRow for a bigram key (order-2 scoring).
func (m *ngramModel) biRow(key uint64) uint32 {
	if r, ok := m.bi.lookup(key); ok {
		return r
	}
	r, _ := m.uni.lookup(key >> 21)
	return r
}
