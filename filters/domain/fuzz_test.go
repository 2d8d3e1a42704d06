package domain

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

var fuzzSeeds = []string{
	"", " ", "\n\n\t", "Sand the hull before the epoxy.", "ÉTAT d'urgence — naïve café",
	"a\u0301b\u0301 c", "日本語のテキストです", "مرحبا بالعالم", "\x00\xff\xfe bad utf8 \xc3",
	"<p>Replace the <b>impeller</b></p>", "😀😀😀 🚤 boat", strings.Repeat("word ", 2000),
}

// FuzzScore: for any text and both methods, the score is finite and in
// [0, 1], scoring twice gives the same value, and Eval agrees with the
// feature list Features produces for the same text.
func FuzzScore(f *testing.F) {
	models := make([]*Model, 0, 2)
	for _, method := range []Method{Classifier, Importance} {
		m, err := Train(boatDocs, otherDocs, Options{Method: method, Buckets: 1021, Seed: 5})
		if err != nil {
			f.Fatal(err)
		}
		models = append(models, m)
	}
	for _, s := range fuzzSeeds {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, text string) {
		for _, m := range models {
			s, logit, n := m.Eval(text)
			if math.IsNaN(s) || s < 0 || s > 1 || math.IsNaN(logit) || math.IsInf(logit, 0) {
				t.Fatalf("%v: score %v logit %v", m.Method, s, logit)
			}
			if s2 := m.Score(text); s2 != s {
				t.Fatalf("%v: scores %v then %v", m.Method, s, s2)
			}
			feats := Features(nil, text, m.Buckets(), 0)
			if len(feats) != n || (n > 0 && n%2 == 0) {
				t.Fatalf("%v: %d features, Features gives %d (want 2·words − 1)", m.Method, n, len(feats))
			}
			fs, fl := m.evalFeatures(feats)
			if math.Abs(fs-s) > 1e-12 || math.Abs(fl-logit) > 1e-9 {
				t.Fatalf("%v: Eval (%v, %v) != features (%v, %v)", m.Method, s, logit, fs, fl)
			}
			for _, b := range feats {
				if int(b) >= m.Buckets() {
					t.Fatalf("bucket %d out of %d", b, m.Buckets())
				}
			}
		}
	})
}

// FuzzUnmarshal: any bytes either fail to decode or decode to a model
// that encodes back to the same bytes.
func FuzzUnmarshal(f *testing.F) {
	m, _ := Train(boatDocs, otherDocs, Options{Buckets: 4})
	good, _ := m.MarshalBinary()
	f.Add(good)
	f.Add([]byte("wdm\x01"))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		var back Model
		if err := back.UnmarshalBinary(data); err != nil {
			return
		}
		again, err := back.MarshalBinary()
		if err != nil || !bytes.Equal(again, data) {
			t.Fatalf("decoded model re-encodes differently (%v)", err)
		}
	})
}
