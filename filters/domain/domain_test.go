package domain

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

// TestImportanceWorkedExample checks the importance weight against a
// worked example computed by hand from the definitions of Xie et al. 2023
// ("Data Selection for Language Models via Importance Resampling", section
// 4, hashed n-gram features): a document's feature vector is its bucket
// counts, each set is modelled as a bag of buckets p(z) = Π_b γ[b]^z[b]
// with γ estimated from the set's counts, and the importance weight of a
// document is p_target(z) / p_raw(z). Smoothing here is add-one (α = 1).
//
// Tiny vocabulary, three buckets, one word per bucket: a→0, b→1, c→2
// (unigrams only).
//
//	target set: "a a b", "a c"          counts a=3 b=1 c=1, total 5
//	raw pool:   "a b b", "b c c", "c a" counts a=2 b=3 c=3, total 8
//	γ_target = ((3+1)/8, (1+1)/8, (1+1)/8) = (1/2, 1/4, 1/4)
//	γ_raw    = ((2+1)/11, (3+1)/11, (3+1)/11) = (3/11, 4/11, 4/11)
//
// Document "a b": w = (1/2)/(3/11) · (1/4)/(4/11) = 11/6 · 11/16 = 121/96,
// log w = ln(121/96) ≈ 0.23146, and its score is σ(log w / 2) =
// 1/(1 + sqrt(96/121)) = 11/(11 + sqrt 96) ≈ 0.52885.
// Document "c c c": w = (11/16)^3, score σ(ln(11/16)) = 11/27.
func TestImportanceWorkedExample(t *testing.T) {
	vocab := map[string]uint32{"a": 0, "b": 1, "c": 2}
	feats := func(docs ...string) [][]uint32 {
		var out [][]uint32
		for _, d := range docs {
			var f []uint32
			for _, w := range strings.Fields(d) {
				f = append(f, vocab[w])
			}
			out = append(out, f)
		}
		return out
	}
	m := fitImportance(feats("a a b", "a c"), feats("a b b", "b c c", "c a"), 3, 1)
	wantW := []float64{math.Log((1.0 / 2) / (3.0 / 11)), math.Log((1.0 / 4) / (4.0 / 11)), math.Log((1.0 / 4) / (4.0 / 11))}
	for b, w := range wantW {
		if math.Abs(float64(m.Weights[b])-w) > 1e-6 {
			t.Errorf("log γ ratio of bucket %d = %v, want %v", b, m.Weights[b], w)
		}
	}
	cases := []struct {
		doc       string
		logW      float64
		wantScore float64
	}{
		{"a b", math.Log(121.0 / 96), 11 / (11 + math.Sqrt(96))},
		{"c c c", 3 * math.Log(11.0/16), 11.0 / 27},
	}
	for _, c := range cases {
		f := feats(c.doc)[0]
		score, logit := m.evalFeatures(f)
		if got := logit * float64(len(f)); math.Abs(got-c.logW) > 1e-6 {
			t.Errorf("%q: log w = %v, want %v", c.doc, got, c.logW)
		}
		if math.Abs(score-c.wantScore) > 1e-6 {
			t.Errorf("%q: score %v, want %v", c.doc, score, c.wantScore)
		}
	}
}

// TestEvalMatchesFeatures: scoring a text directly equals scoring its
// feature list, and LogWeight is the sum of the features' weights.
func TestEvalMatchesFeatures(t *testing.T) {
	m, err := Train([]string{"sand the hull and apply epoxy to the keel", "replace the impeller of the raw water pump"},
		[]string{"the city council met on tuesday", "stock prices fell sharply in early trading"}, Options{Method: Importance, Buckets: 97})
	if err != nil {
		t.Fatal(err)
	}
	for _, text := range []string{"", "Hull", "the hull, the keel; and the PUMP!", "Épreuve d'état — naïve café 42", "a\u0301b c"} {
		f := Features(nil, text, m.Buckets(), 0)
		s1, l1 := m.evalFeatures(f)
		s2, l2, n := m.Eval(text)
		if n != len(f) || math.Abs(s1-s2) > 1e-12 || math.Abs(l1-l2) > 1e-12 {
			t.Errorf("%q: Eval (%v, %v, %d) != features (%v, %v, %d)", text, s2, l2, n, s1, l1, len(f))
		}
		var sum float64
		for _, b := range f {
			sum += float64(m.Weights[b])
		}
		if lw := m.LogWeight(text); math.Abs(lw-sum) > 1e-9 {
			t.Errorf("%q: LogWeight %v, sum of weights %v", text, lw, sum)
		}
	}
}

func TestFeaturesWords(t *testing.T) {
	// Words are runs of letters and digits, lower-cased: both texts have
	// the words "the", "hull", "42" and so the same features.
	a := Features(nil, "The HULL, 42!", 1<<20, 0)
	b := Features(nil, "the hull 42", 1<<20, 0)
	if len(a) != 5 || !equalU32(a, b) {
		t.Fatalf("features %v and %v, want equal, 3 unigrams + 2 bigrams", a, b)
	}
	// Word order matters for bigrams only.
	c := Features(nil, "hull the 42", 1<<20, 0)
	if equalU32(a, c) {
		t.Fatal("reordered words gave the same bigrams")
	}
	if got := Features(nil, "one two three four", 1<<20, 2); len(got) != 3 {
		t.Fatalf("maxWords 2: %d features, want 3", len(got))
	}
	// Non-ASCII letters are lower-cased too.
	if !equalU32(Features(nil, "ÉTAT Straße", 1000, 0), Features(nil, "état straße", 1000, 0)) {
		t.Fatal("non-ASCII words not lower-cased")
	}
}

func equalU32(a, b []uint32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestAUCHandExample: positives {0.9, 0.6, 0.4}, negatives {0.5, 0.4,
// 0.1}. Pairs won: 0.9 beats 3, 0.6 beats 3, 0.4 beats 1 and ties 1 →
// (3 + 3 + 1.5) / 9 = 7.5/9 (Mann-Whitney U over n1·n2, as in Hanley and
// McNeil 1982, "The meaning and use of the area under a ROC curve").
func TestAUCHandExample(t *testing.T) {
	if got, want := AUC([]float64{0.9, 0.6, 0.4}, []float64{0.5, 0.4, 0.1}), 7.5/9; math.Abs(got-want) > 1e-12 {
		t.Fatalf("AUC %v, want %v", got, want)
	}
	if !math.IsNaN(AUC(nil, []float64{1})) {
		t.Fatal("AUC without positives is not NaN")
	}
}

// TestGumbelTopKProportions checks the sampling against its distribution:
// drawing 2 of 3 items without replacement in proportion to weights w,
// item i is left out with probability Σ_{j≠k} w_j/W · w_k/(W − w_j) over
// the orders (j, k) of the other two (successive sampling; Kool et al.
// 2019, section 3). With w = (1, 2, 5), W = 8: P(1 out) = 2/8·5/6 +
// 5/8·2/3 = 5/24 + 10/24 = 15/24; P(2 out) = 1/8·5/7 + 5/8·1/3 = 5/56 +
// 5/24; P(3 out) = 1/8·2/7 + 2/8·1/6 = 1/28 + 1/24. Over 20,000 seeds
// each frequency is within 4 standard errors of its probability.
func TestGumbelTopKProportions(t *testing.T) {
	w := []float64{1, 2, 5}
	want := []float64{15.0 / 24, 5.0/56 + 5.0/24, 1.0/28 + 1.0/24}
	const trials = 20000
	out := make([]int, 3)
	keys := make([]float64, 3)
	names := []string{"doc-a", "doc-b", "doc-c"}
	for s := 0; s < trials; s++ {
		for i := range w {
			keys[i] = GumbelKey(math.Log(w[i]), uint64(s), names[i])
		}
		top := TopK(keys, 2)
		left := 3 - top[0] - top[1]
		out[left]++
	}
	for i, p := range want {
		got := float64(out[i]) / trials
		se := math.Sqrt(p * (1 - p) / trials)
		if math.Abs(got-p) > 4*se {
			t.Errorf("item %d left out %.4f of the time, want %.4f ± %.4f", i, got, p, 4*se)
		}
	}
	// Deterministic in seed and key.
	if GumbelKey(0.3, 7, "x") != GumbelKey(0.3, 7, "x") || GumbelKey(0.3, 7, "x") == GumbelKey(0.3, 8, "x") {
		t.Fatal("GumbelKey is not a function of (seed, key)")
	}
}

func TestTopKAndKeepCount(t *testing.T) {
	if got := TopK([]float64{1, 3, 3, 2}, 3); len(got) != 3 || got[0] != 1 || got[1] != 2 || got[2] != 3 {
		t.Fatalf("TopK = %v, want [1 2 3] (ties in index order)", got)
	}
	for _, c := range []struct {
		f    float64
		n, k int
	}{{0.2, 10, 2}, {0.2, 3, 1}, {0, 5, 0}, {1, 5, 5}, {0.01, 5, 1}, {0.5, 0, 0}} {
		if got := KeepCount(c.f, c.n); got != c.k {
			t.Errorf("KeepCount(%v, %d) = %d, want %d", c.f, c.n, got, c.k)
		}
	}
}

var (
	boatDocs = []string{
		"Sand the hull down to bare gelcoat before you apply the first coat of epoxy barrier.",
		"Replace the raw-water impeller each season, and keep a spare in the engine locker.",
		"Check the zinc anodes on the propeller shaft and replace any that have lost half their mass.",
		"Grease the winches twice a season and strip them down fully once every two years.",
		"Inspect the fuel filter bowl for water after a week of heavy rain in the marina.",
		"Winterize the freshwater system by draining the tanks and running antifreeze through the lines.",
	}
	otherDocs = []string{
		"The council approved the new budget for the library after a long debate on Tuesday.",
		"Our bakery sells sourdough loaves, rye rolls and cinnamon buns every morning from seven.",
		"The orchestra rehearsed the symphony twice before the concert in the town hall.",
		"Train tickets are cheaper when booked a month ahead on the regional line.",
		"The museum exhibition shows paintings of the valley from the last two centuries.",
		"Students must hand in the history essay before the end of the spring term.",
	}
)

// TestTrainDeterministicAndRoundTrip: the same data, options and seed give
// byte-identical models; a model survives serialisation with its hash and
// scores; another seed changes the classifier.
func TestTrainDeterministicAndRoundTrip(t *testing.T) {
	for _, method := range []Method{Classifier, Importance} {
		opt := Options{Method: method, Seed: 3, Buckets: 4096}
		m1, err := Train(boatDocs, otherDocs, opt)
		if err != nil {
			t.Fatal(err)
		}
		m2, _ := Train(boatDocs, otherDocs, opt)
		b1, _ := m1.MarshalBinary()
		b2, _ := m2.MarshalBinary()
		if !bytes.Equal(b1, b2) {
			t.Fatalf("%v: two trainings differ", method)
		}
		if len(b1) != headerSize+m1.SizeBytes() || m1.SizeBytes() != 4*4096 {
			t.Fatalf("%v: %d bytes serialised, size %d", method, len(b1), m1.SizeBytes())
		}
		var back Model
		if err := back.UnmarshalBinary(b1); err != nil {
			t.Fatal(err)
		}
		h1, _ := m1.Hash()
		h2, _ := back.Hash()
		if h1 != h2 || len(h1) != 16 {
			t.Fatalf("hash %q after round trip %q", h1, h2)
		}
		for _, d := range append(append([]string{}, boatDocs...), otherDocs...) {
			if m1.Score(d) != back.Score(d) {
				t.Fatalf("%v: score changed by round trip", method)
			}
		}
		// Training documents are told apart.
		for _, d := range boatDocs {
			if s := m1.Score(d); s <= 0.5 {
				t.Errorf("%v: example %q scores %v", method, d, s)
			}
		}
		for _, d := range otherDocs {
			if s := m1.Score(d); s >= 0.5 {
				t.Errorf("%v: background %q scores %v", method, d, s)
			}
		}
		if method == Classifier {
			m3, _ := Train(boatDocs, otherDocs, Options{Method: method, Seed: 4, Buckets: 4096})
			b3, _ := m3.MarshalBinary()
			if bytes.Equal(b1, b3) {
				t.Fatal("the seed does not change the SGD order")
			}
		}
	}
}

func TestUnmarshalRejects(t *testing.T) {
	m, _ := Train(boatDocs, otherDocs, Options{Buckets: 8})
	good, _ := m.MarshalBinary()
	bad := map[string][]byte{
		"empty":     nil,
		"magic":     append([]byte("xdm\x01"), good[4:]...),
		"version":   append([]byte("wdm\x02"), good[4:]...),
		"method":    append(append([]byte{}, good[:4]...), append([]byte{9}, good[5:]...)...),
		"truncated": good[:len(good)-1],
		"nan":       append(append([]byte{}, good[:len(good)-4]...), 0, 0, 0xc0, 0x7f),
	}
	for name, b := range bad {
		var back Model
		if err := back.UnmarshalBinary(b); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

func TestTrainErrors(t *testing.T) {
	if _, err := Train(nil, otherDocs, Options{}); err == nil {
		t.Error("no examples accepted")
	}
	if _, err := Train(boatDocs, otherDocs, Options{Buckets: -1}); err == nil {
		t.Error("negative buckets accepted")
	}
	if _, err := CrossValidate(boatDocs[:2], otherDocs, 3, Options{}); err == nil {
		t.Error("fewer examples than folds accepted")
	}
	if _, err := ParseMethod("fasttext"); err == nil {
		t.Error("unknown method accepted")
	}
}
