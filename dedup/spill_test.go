package dedup

import (
	"math/rand/v2"
	"os"
	"slices"
	"testing"
)

func drain[T any](t *testing.T, s *Sorter[T]) []T {
	t.Helper()
	it, err := s.Iterate()
	if err != nil {
		t.Fatal(err)
	}
	defer it.Close()
	var out []T
	for {
		v, ok := it.Next()
		if !ok {
			break
		}
		out = append(out, v)
	}
	if err := it.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// A tiny budget forces hundreds of runs (and a multi-level merge past
// maxFanIn); the merged stream must equal an in-memory sort.
func TestSorterSpillMatchesMemory(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	vals := make([]uint64, 5000)
	for i := range vals {
		vals[i] = rng.Uint64() % 3000 // with repeats
	}
	dir := t.TempDir()
	small := NewSorter(Uint64Codec, dir, 100)
	big := NewSorter(Uint64Codec, dir, 1<<20)
	for _, v := range vals {
		if err := small.Add(v); err != nil {
			t.Fatal(err)
		}
		big.Add(v)
	}
	if small.Runs() <= maxFanIn {
		t.Fatalf("only %d runs; the test wants a multi-level merge", small.Runs())
	}
	if big.Runs() != 0 {
		t.Fatalf("big budget spilled %d runs", big.Runs())
	}
	want := slices.Clone(vals)
	slices.Sort(want)
	if got := drain(t, small); !slices.Equal(got, want) {
		t.Fatal("spilled sort differs from in-memory sort")
	}
	if got := drain(t, big); !slices.Equal(got, want) {
		t.Fatal("in-memory sort wrong")
	}
	small.Close()
	big.Close()
	if left, _ := os.ReadDir(dir); len(left) != 0 {
		t.Fatalf("Close left %d files", len(left))
	}
}

func TestSorterExactRecords(t *testing.T) {
	dir := t.TempDir()
	s := NewSorter(exactCodec, dir, 4*exactRecLen) // 4-record runs
	var want []exactRec
	rng := rand.New(rand.NewPCG(2, 2))
	for i := 0; i < 300; i++ {
		r := exactRec{rng.Uint64() % 5, rng.Uint64(), rng.Uint64() % 3, uint64(i)}
		want = append(want, r)
		s.Add(r)
	}
	slices.SortFunc(want, exactCodec.Compare)
	if got := drain(t, s); !slices.Equal(got, want) {
		t.Fatal("exact records sorted wrong through spill")
	}
	s.Close()
}
