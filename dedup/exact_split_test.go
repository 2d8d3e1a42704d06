package dedup

import (
	"fmt"
	"math/rand/v2"
	"reflect"
	"testing"
)

// exactSplitResults reduces synthetic documents with copies (every fourth
// text repeats an earlier one) in one ReduceSplit over every partition.
func exactSplitResults(tb testing.TB) [][]byte {
	tb.Helper()
	x, err := NewExactIndex(ExactOptions{TempDir: tb.TempDir()})
	if err != nil {
		tb.Fatal(err)
	}
	defer x.Close()
	all := make([]int, ExactPartitions)
	for i := range all {
		all[i] = i
	}
	if err := x.RestrictPartitions(all); err != nil {
		tb.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	var texts []string
	for i := 0; i < 400; i++ {
		s := randomText(rng, 20)
		if i%4 == 3 {
			s = texts[rng.IntN(len(texts))]
		}
		texts = append(texts, s)
		h, _ := ExactHash(s, Normalization{})
		if err := x.AddPriority(uint64(i+1), fmt.Sprintf("doc/%d", i), h, uint64(i%3)); err != nil {
			tb.Fatal(err)
		}
	}
	out, err := x.ReduceSplit()
	if err != nil {
		tb.Fatal(err)
	}
	return out
}

// TestExactPartRoundTrip: every partition result decodes, encodes back to
// the same bytes, and no proper prefix decodes; some partitions hold
// removals.
func TestExactPartRoundTrip(t *testing.T) {
	groups := 0
	for p, b := range exactSplitResults(t) {
		part, err := decodeExactPart(b, p)
		if err != nil {
			t.Fatal(err)
		}
		groups += len(part.groups)
		if again := appendExactPart(nil, &part); string(again) != string(b) {
			t.Fatalf("partition %d: re-encoding differs", p)
		}
		for n := 0; n < len(b); n++ {
			if _, err := decodeExactPart(b[:n], p); err == nil {
				t.Fatalf("partition %d: the first %d of %d bytes decoded", p, n, len(b))
			}
		}
		if len(part.kept) > 0 {
			if _, err := decodeExactPart(b, (p+1)%ExactPartitions); err == nil {
				t.Fatalf("partition %d's result accepted as partition %d's", p, p+1)
			}
		}
	}
	if groups == 0 {
		t.Fatal("no group of copies in any partition")
	}
}

// FuzzExactPart: decoding arbitrary bytes never panics, and whatever
// decodes encodes to bytes that decode to the same result.
func FuzzExactPart(f *testing.F) {
	for p, b := range exactSplitResults(f) {
		if p%8 == 0 || len(b) > 40 {
			f.Add(b, uint8(p))
		}
	}
	f.Add([]byte("WXP1\x00\x01\x05\x00\x00\x01\x07"), uint8(0))
	f.Fuzz(func(t *testing.T, b []byte, pb uint8) {
		p := int(pb) % ExactPartitions
		x, err := decodeExactPart(b, p)
		if err != nil {
			return
		}
		enc := appendExactPart(nil, &x)
		y, err := decodeExactPart(enc, p)
		if err != nil {
			t.Fatalf("re-encoded result does not decode: %v", err)
		}
		if !reflect.DeepEqual(x, y) {
			t.Fatalf("decode(encode(x)) = %+v, want %+v", y, x)
		}
	})
}
