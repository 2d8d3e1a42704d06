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

// paragraphSplitResults counts the paragraphs of synthetic documents
// sharing footers (every document ends with one of five) in one
// ReduceSplit over every partition.
func paragraphSplitResults(tb testing.TB) [][]byte {
	tb.Helper()
	p := NewParagraphIndex(ParagraphOptions{MaxRepeats: 2, TempDir: tb.TempDir()})
	defer p.Close()
	all := make([]int, ParagraphPartitions)
	for i := range all {
		all[i] = i
	}
	if err := p.RestrictPartitions(all); err != nil {
		tb.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	for i := 0; i < 300; i++ {
		text := randomText(rng, 30) + "\n\n" + fmt.Sprintf("Larkspur Marine Works, berth %d", i%(5+i%40))
		if err := p.Add(ParagraphHashes(text, Normalization{}, nil)); err != nil {
			tb.Fatal(err)
		}
	}
	out, err := p.ReduceSplit()
	if err != nil {
		tb.Fatal(err)
	}
	return out
}

// TestParagraphPartRoundTrip: every partition result decodes, re-encodes
// to the same bytes, rejects every proper prefix and another partition.
func TestParagraphPartRoundTrip(t *testing.T) {
	n := 0
	for q, b := range paragraphSplitResults(t) {
		hs, err := decodeParagraphPart(b, q)
		if err != nil {
			t.Fatal(err)
		}
		n += len(hs)
		if string(appendParagraphPart(nil, hs)) != string(b) {
			t.Fatalf("partition %d: re-encoding differs", q)
		}
		for k := 0; k < len(b); k++ {
			if _, err := decodeParagraphPart(b[:k], q); err == nil {
				t.Fatalf("partition %d: the first %d of %d bytes decoded", q, k, len(b))
			}
		}
		if len(hs) > 0 {
			if _, err := decodeParagraphPart(b, (q+1)%ParagraphPartitions); err == nil {
				t.Fatalf("partition %d's result accepted as partition %d's", q, q+1)
			}
		}
	}
	if n == 0 {
		t.Fatal("no frequent paragraph")
	}
}

// FuzzParagraphPart: decoding arbitrary bytes never panics, and whatever
// decodes encodes to the same bytes (the encoding has no slack).
func FuzzParagraphPart(f *testing.F) {
	for q, b := range paragraphSplitResults(f) {
		f.Add(b, uint8(q))
	}
	f.Fuzz(func(t *testing.T, b []byte, qb uint8) {
		q := int(qb) % ParagraphPartitions
		hs, err := decodeParagraphPart(b, q)
		if err != nil {
			return
		}
		again, err := decodeParagraphPart(appendParagraphPart(nil, hs), q)
		if err != nil || !reflect.DeepEqual(again, hs) {
			t.Fatalf("decode(encode(%v)) = %v, %v", hs, again, err)
		}
	})
}
