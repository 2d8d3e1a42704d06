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
// It is an open-addressing hash table with linear probing at load <= 1/2;
// the key and its row index share one slot so a probe touches one cache
// line, and the row (k float32s) is one or two more.
type packedTable struct {
	shift uint
	mask  uint64
	slots []tableSlot
	rows  []float32 // len = rowCount * k
}

type tableSlot struct {
	key uint64 // 0 = empty (no n-gram key is 0: letters are never U+0000)
	row uint32
}

const hashMul = 0x9E3779B97F4A7C15 // Fibonacci hashing multiplier (2^64 / golden ratio)

func newPackedTable(n int) packedTable {
	size := 16
	for size < 2*n {
		size <<= 1
	}
	bits := uint(0)
	for 1<<bits < size {
		bits++
	}
	return packedTable{shift: 64 - bits, mask: uint64(size - 1), slots: make([]tableSlot, size)}
}

func (t *packedTable) insert(key uint64, row uint32) {
	i := (key * hashMul) >> t.shift
	for t.slots[i].key != 0 {
		i = (i + 1) & t.mask
	}
	t.slots[i] = tableSlot{key: key, row: row}
}

// lookup returns the row index of key and whether it is present.
func (t *packedTable) lookup(key uint64) (uint32, bool) {
	i := (key * hashMul) >> t.shift
	for {
		s := &t.slots[i]
		if s.key == key {
			return s.row, true
		}
		if s.key == 0 {
			return 0, false
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
type ngramModel struct {
	langs         []lingua.Language
	tri, bi, uni  packedTable
	bytesResident int64
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
	tables := [3]*packedTable{&m.uni, &m.bi, &m.tri}
	for n := 1; n <= 3; n++ {
		var keys []uint64
		for j := range langs {
			for _, e := range probs[j][n-1] {
				keys = append(keys, e.key)
			}
		}
		slices.Sort(keys)
		keys = slices.Compact(keys)
		t := newPackedTable(len(keys))
		t.rows = make([]float32, len(keys)*k)
		for row, key := range keys {
			t.insert(key, uint32(row))
			var from []float32 // the back-off row
			switch n {
			case 3:
				if from = m.bi.rowOf(key>>21, k); from == nil {
					from = m.uni.rowOf(key>>42, k)
				}
			case 2:
				from = m.uni.rowOf(key>>21, k)
			}
			copy(t.rows[row*k:row*k+k], from)
		}
		for j := range langs {
			for _, e := range probs[j][n-1] {
				if e.p > 0 { // lingua backs off from a zero probability
					row, _ := t.lookup(e.key)
					t.rows[int(row)*k+j] = float32(math.Log(e.p))
				}
			}
		}
		*tables[n-1] = t
		m.bytesResident += int64(len(t.slots))*16 + int64(len(t.rows))*4
	}
	return m, nil
}

// rowOf returns the row of key (k columns), or nil when absent.
func (t *packedTable) rowOf(key uint64, k int) []float32 {
	r, ok := t.lookup(key)
	if !ok {
		return nil
	}
	return t.rows[int(r)*k : int(r)*k+k]
}

// row returns the per-language log-probabilities lingua adds for the
// trigram key, or nil when no language knows even its first letter.
func (m *ngramModel) row(key uint64) []float32 {
	k := len(m.langs)
	if r := m.tri.rowOf(key, k); r != nil {
		return r
	}
	if r := m.bi.rowOf(key>>21, k); r != nil {
		return r
	}
	return m.uni.rowOf(key>>42, k)
}
