package dedup

import (
	"reflect"
	"testing"
)

// nearSplitRun reduces texts with the partitions spread over groups
// separate indexes (partitions ≡ g mod groups) and loads the results into
// a fresh index; it returns the decisions and the partition results.
func nearSplitRun(tb testing.TB, texts []string, opt NearOptions, groups int, prio func(int) uint64) ([]result, [][]byte) {
	tb.Helper()
	opt.TempDir = tb.TempDir()
	keys := func(x *NearIndex, emit func(uint64, string, *NearKey) error) error {
		for i, s := range texts {
			k := x.Key(s)
			if k != nil && prio != nil {
				k.Priority = prio(i)
			}
			if err := emit(order(i), docID(i), k); err != nil {
				return err
			}
		}
		return nil
	}
	results := make([][]byte, KeyPartitions)
	for g := 0; g < groups; g++ {
		x, err := NewNearIndex(opt)
		if err != nil {
			tb.Fatal(err)
		}
		var ps []int
		for p := g; p < KeyPartitions; p += groups {
			ps = append(ps, p)
		}
		if err := x.RestrictPartitions(ps); err != nil {
			tb.Fatal(err)
		}
		if err := keys(x, x.Add); err != nil {
			tb.Fatal(err)
		}
		out, err := x.ReduceSplit()
		if err != nil {
			tb.Fatal(err)
		}
		for i, p := range ps {
			results[p] = out[i]
		}
		x.Close()
	}
	x, err := NewNearIndex(opt)
	if err != nil {
		tb.Fatal(err)
	}
	defer x.Close()
	if err := x.LoadSplit(results, nil); err != nil {
		tb.Fatal(err)
	}
	res := make([]result, len(texts))
	for i := range texts {
		m, ok := x.Lookup(order(i))
		res[i] = result{ok, m}
	}
	return res, results
}

// TestNearSplitChains: on families of documents edited step by step (near
// copies of near copies, where the greedy pass must not chain), with and
// without keep priorities, the split reduce decides exactly as Reduce,
// for 1, 3 and 7 groups of partitions.
func TestNearSplitChains(t *testing.T) {
	texts := chainCorpus(25, 6, 12, 5)
	opt := NearOptions{Threshold: 0.7, Seed: 11}
	for _, prio := range []func(int) uint64{nil, func(i int) uint64 { return uint64(len(texts[i]) % 5) }} {
		want, _ := runNearKeep(t, texts, opt, 1, docID, prio)
		removed := 0
		for _, r := range want {
			if r.removed {
				removed++
			}
		}
		if removed == 0 {
			t.Fatal("nothing removed")
		}
		for _, groups := range []int{1, 3, 7} {
			got, _ := nearSplitRun(t, texts, opt, groups, prio)
			for i := range texts {
				if got[i] != want[i] {
					t.Errorf("priorities %v, %d groups: doc %d: %+v, Reduce %+v", prio != nil, groups, i, got[i], want[i])
				}
			}
		}
		t.Logf("priorities %v: %d of %d removed", prio != nil, removed, len(texts))
	}
}

// TestNearPartRoundTrip: every partition result decodes and re-encodes to
// the same bytes, and no proper prefix decodes.
func TestNearPartRoundTrip(t *testing.T) {
	_, results := nearSplitRun(t, chainCorpus(10, 4, 12, 2), NearOptions{Threshold: 0.7}, 2, nil)
	pairs := 0
	for p, b := range results {
		part, err := decodeNearPart(b, p)
		if err != nil {
			t.Fatalf("partition %d: %v", p, err)
		}
		pairs += len(part.pairs)
		if again := appendNearPart(nil, &part); string(again) != string(b) {
			t.Fatalf("partition %d: re-encoding differs", p)
		}
		for n := 0; n < len(b); n++ {
			if _, err := decodeNearPart(b[:n], p); err == nil {
				t.Fatalf("partition %d: the first %d of %d bytes decoded", p, n, len(b))
			}
		}
		if _, err := decodeNearPart(b, (p+1)%KeyPartitions); err == nil {
			t.Fatalf("partition %d's result accepted as partition %d's", p, p+1)
		}
	}
	if pairs == 0 {
		t.Fatal("no verified pair in any partition")
	}
}

// FuzzNearPart: decoding arbitrary bytes never panics, and whatever
// decodes encodes to bytes that decode to the same result.
func FuzzNearPart(f *testing.F) {
	_, results := nearSplitRun(f, chainCorpus(6, 4, 12, 3), NearOptions{Threshold: 0.7}, 1, nil)
	for p, b := range results {
		if len(b) > 20 {
			f.Add(b, uint8(p))
		}
	}
	f.Add(appendNearPart(nil, &nearPart{part: 2, n: 5, docs: []nearDoc{{idx: 0, order: 1, id: "a"}, {idx: 3, order: 9, prio: 4}},
		pairs: []nearPair{{later: 1, earlier: 0, sim: 10000}}}), uint8(2))
	f.Fuzz(func(t *testing.T, b []byte, pb uint8) {
		p := int(pb) % KeyPartitions
		x, err := decodeNearPart(b, p)
		if err != nil {
			return
		}
		y, err := decodeNearPart(appendNearPart(nil, &x), p)
		if err != nil {
			t.Fatalf("re-encoded result does not decode: %v", err)
		}
		if !reflect.DeepEqual(x, y) {
			t.Fatalf("decode(encode(x)) = %+v, want %+v", y, x)
		}
	})
}
