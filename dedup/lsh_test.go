package dedup

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// Leskovec, Rajaraman, Ullman, "Mining of Massive Datasets", ch. 3
// (banding technique), worked example b = 20, r = 5: P(0.8) ≈ 0.9996 and
// P(0.3) ≈ 0.047.
func TestCandidateProbabilityMMDS(t *testing.T) {
	if p := CandidateProbability(0.8, 20, 5); math.Abs(p-0.9996) > 0.00005 {
		t.Errorf("P(0.8) = %.5f, want ≈ 0.9996", p)
	}
	if p := CandidateProbability(0.3, 20, 5); math.Abs(p-0.047) > 0.0006 {
		t.Errorf("P(0.3) = %.5f, want ≈ 0.047", p)
	}
}

// The measured candidate rate of generated pairs at a known Jaccard s
// matches P(s) = 1-(1-s^r)^b within binomial confidence (4 sigma), for the
// MMDS ch. 3 example b = 20, r = 5.
func TestBandingSCurveMeasured(t *testing.T) {
	const bands, rows, pairs, union = 20, 5, 1000, 200
	m, _ := NewMinHasher(bands*rows, 5, 9)
	bd, err := NewBanding(bands*rows, bands)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 8))
	for _, s := range []float64{0.3, 0.5, 0.7, 0.8} {
		inter := int(math.Round(s * union))
		hits := 0
		for p := 0; p < pairs; p++ {
			a, b := pairWithJaccard(rng, union, inter)
			ba := bd.Hashes(m.SignatureOfHashes(a, nil), nil)
			bb := bd.Hashes(m.SignatureOfHashes(b, nil), nil)
			for i := range ba {
				if ba[i] == bb[i] {
					hits++
					break
				}
			}
		}
		rate := float64(hits) / pairs
		want := CandidateProbability(s, bands, rows)
		tol := 4*math.Sqrt(want*(1-want)/pairs) + 1.0/pairs
		if math.Abs(rate-want) > tol {
			t.Errorf("s=%.1f: candidate rate %.4f, P(s) = %.4f (tolerance %.4f)", s, rate, want, tol)
		}
	}
}

func TestNewBandingMustDivide(t *testing.T) {
	if _, err := NewBanding(128, 15); err == nil || !strings.Contains(err.Error(), "16") {
		t.Fatalf("128/15: err %v, want a hint naming 16", err)
	}
	bd, err := NewBanding(128, 16)
	if err != nil || bd.Rows != 8 {
		t.Fatalf("128/16: %v %v", bd, err)
	}
	curve := bd.SCurve()
	for _, s := range []string{"s=0.5", "s=0.8", "s=1.0  P=1.0000"} {
		if !strings.Contains(curve, s) {
			t.Errorf("S-curve lacks %q:\n%s", s, curve)
		}
	}
}
