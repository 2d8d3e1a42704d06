package dedup

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// pairWithJaccard returns two sets of random 64-bit shingle hashes whose
// Jaccard similarity is exactly inter/union.
func pairWithJaccard(rng *rand.Rand, union, inter int) (a, b []uint64) {
	for i := 0; i < inter; i++ {
		h := rng.Uint64()
		a, b = append(a, h), append(b, h)
	}
	for i := 0; i < union-inter; i++ {
		if i%2 == 0 {
			a = append(a, rng.Uint64())
		} else {
			b = append(b, rng.Uint64())
		}
	}
	return a, b
}

// Broder 1997 ("On the resemblance and containment of documents"): the
// fraction of equal minhash values is an unbiased estimate of the Jaccard
// similarity, with standard error sqrt(J(1-J)/k) for k permutations.
// Over M generated pairs per J the mean estimate must lie within 3
// standard errors of the mean (sqrt(J(1-J)/k)/sqrt(M)) and the spread of
// single estimates must match sqrt(J(1-J)/k) (independent permutations).
func TestMinHashEstimateBroder(t *testing.T) {
	const k, pairs, union = 128, 300, 400
	m, err := NewMinHasher(k, 5, 42)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for _, J := range []float64{0.2, 0.5, 0.8} {
		inter := int(math.Round(J * union))
		var sum, sumSq float64
		for p := 0; p < pairs; p++ {
			a, b := pairWithJaccard(rng, union, inter)
			if got := ExactJaccard(SortedSet(append([]uint64(nil), a...)), SortedSet(append([]uint64(nil), b...))); math.Abs(got-J) > 1e-9 {
				t.Fatalf("generated pair has Jaccard %v, want %v", got, J)
			}
			est := EstimateJaccard(m.SignatureOfHashes(a, nil), m.SignatureOfHashes(b, nil))
			sum += est
			sumSq += est * est
		}
		mean := sum / pairs
		sd := math.Sqrt(sumSq/pairs - mean*mean)
		se := math.Sqrt(J * (1 - J) / k)
		if d := math.Abs(mean - J); d > 3*se/math.Sqrt(pairs) {
			t.Errorf("J=%.1f: mean estimate %.4f differs by %.4f > 3 SE of the mean (%.4f)", J, mean, d, 3*se/math.Sqrt(pairs))
		}
		if sd < 0.75*se || sd > 1.25*se {
			t.Errorf("J=%.1f: spread of single estimates %.4f, want ≈ sqrt(J(1-J)/k) = %.4f", J, sd, se)
		}
	}
}

// On text: the signature estimate of two edited documents lies within 4
// standard errors (Broder 1997) of the exact Jaccard of their shingle sets.
func TestMinHashTextAgreesWithExactJaccard(t *testing.T) {
	m, _ := NewMinHasher(128, 5, 1)
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 30; trial++ {
		words := strings.Fields(randomText(rng, 300))
		edited := append([]string(nil), words...)
		for e := 0; e < 1+trial; e++ {
			edited[rng.IntN(len(edited))] = "zzedit" + fmt.Sprint(e)
		}
		a, b := strings.Join(words, " "), strings.Join(edited, " ")
		ex := ExactJaccard(SortedSet(m.ShingleHashes(a, nil)), SortedSet(m.ShingleHashes(b, nil)))
		sa, _ := m.Signature(a, nil)
		sb, _ := m.Signature(b, nil)
		est := EstimateJaccard(sa, sb)
		se := math.Sqrt(ex*(1-ex)/128) + 1.0/128
		if math.Abs(est-ex) > 4*se {
			t.Errorf("trial %d: estimate %.3f, exact %.3f (4 SE = %.3f)", trial, est, ex, 4*se)
		}
	}
}

func TestShinglesShortAndEmpty(t *testing.T) {
	m, _ := NewMinHasher(16, 5, 1)
	if hs := m.ShingleHashes("Three small words", nil); len(hs) != 1 {
		t.Fatalf("short doc: %d shingles, want 1 of all words", len(hs))
	}
	if hs := m.ShingleHashes("one two three four five six", nil); len(hs) != 2 {
		t.Fatalf("6 words: %d shingles, want 2", len(hs))
	}
	if _, ok := m.Signature("  ... !!! ", nil); ok {
		t.Fatal("text without words must have no signature")
	}
	// Case, punctuation and spacing do not change shingles.
	a, _ := m.Signature("The hull, the KEEL; and\tthe   rudder.", nil)
	b, _ := m.Signature("the hull the keel and the rudder", nil)
	if EstimateJaccard(a, b) != 1 {
		t.Fatal("case/punctuation/spacing changed the signature")
	}
	// The seed changes the permutations.
	m2, _ := NewMinHasher(16, 5, 2)
	c, _ := m2.Signature("the hull the keel and the rudder", nil)
	if EstimateJaccard(b, c) == 1 {
		t.Fatal("different seeds gave identical signatures")
	}
}

func TestSignatureZeroAllocs(t *testing.T) {
	m, _ := NewMinHasher(128, 5, 7)
	rng := rand.New(rand.NewPCG(1, 1))
	short, long := randomText(rng, 500), randomText(rng, 20000)
	sig := make([]uint32, 0, 128)
	m.Signature(long, sig) // warm the scratch pool
	allocs := func(text string) float64 {
		return testing.AllocsPerRun(50, func() { sig, _ = m.Signature(text, sig[:0]) })
	}
	a, b := allocs(short), allocs(long)
	if raceEnabled {
		// The race detector makes sync.Pool drop scratch buffers at
		// random, so a call may allocate its scratch slices again, which
		// regrow by doubling (about log2 of the words each). What must
		// still hold is that nothing is allocated per word: 20,000 words
		// stay far below one allocation per word.
		if a > 40 || b > 40 {
			t.Fatalf("Signature allocates %.1f times for 500 words, %.1f for 20,000", a, b)
		}
		return
	}
	if a > 0 || b > 0 {
		t.Fatalf("Signature allocates %.1f / %.1f times per call, want 0", a, b)
	}
}

func TestAppendWordsUnicode(t *testing.T) {
	// "ȺȺȺ" lower-cases to longer UTF-8 ("ⱥ" is 3 bytes, "Ⱥ" 2).
	buf, ends := AppendWords(nil, nil, "Größe—ÉTÉ  naïve café's 42 ȺȺȺȺȺȺ x")
	got := []string{}
	start := 0
	for _, e := range ends {
		got = append(got, string(buf[start:e]))
		start = int(e) + 1
	}
	want := []string{"größe", "été", "naïve", "café", "s", "42", "ⱥⱥⱥⱥⱥⱥ", "x"}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("words %q, want %q", got, want)
	}
}

func BenchmarkMinHashSignature(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	docs := make([]string, 64)
	total := 0
	for i := range docs {
		docs[i] = randomText(rng, 300+rng.IntN(700))
		total += len(docs[i])
	}
	m, err := NewMinHasher(128, 5, 7)
	if err != nil {
		b.Fatal(err)
	}
	words := 0
	for _, d := range docs {
		words += len(strings.Fields(d))
	}
	sig := make([]uint32, 0, 128)
	b.SetBytes(int64(total / len(docs)))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		sig, _ = m.Signature(docs[i%len(docs)], sig[:0])
	}
	// MB/s depends on word length; report it so results convert to other
	// text (English web text averages about 6 bytes per word, common
	// practice estimate).
	b.ReportMetric(float64(total)/float64(words), "bytes/word")
}

// The vector kernels give the same bits as the portable loop.
func TestMinimaKernelsAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	for _, k := range []int{1, 7, 8, 9, 31, 32, 40, 100, 128, 131, 256} {
		for _, n := range []int{1, 2, 5, 77} {
			a, b, xs := make([]uint64, k), make([]uint64, k), make([]uint64, n)
			for i := range a {
				a[i], b[i] = rng.Uint64(), rng.Uint64()
			}
			for i := range xs {
				xs[i] = uint64(rng.Uint32())
			}
			want, got := make([]uint32, k), make([]uint32, k)
			minimaScalar(a, b, xs, want)
			done := minimaSIMD(a, b, xs, got)
			minimaScalar(a[done:], b[done:], xs, got[done:])
			if hasAVX512 && k >= 8 && done == 0 {
				t.Fatalf("k=%d: vector kernel not used", k)
			}
			for i := range want {
				if got[i] != want[i] {
					t.Fatalf("k=%d n=%d perm %d: vector %x, scalar %x", k, n, i, got[i], want[i])
				}
			}
		}
	}
}

// BenchmarkMinHashSignaturePortable measures the portable kernel alone.
func BenchmarkMinHashSignaturePortable(b *testing.B) {
	if hasAVX512 {
		old := hasAVX512
		defer func() { hasAVX512 = old }()
		hasAVX512 = false
	}
	BenchmarkMinHashSignature(b)
}
