// Command benchdedup drives package dedup over millions of generated small
// documents, the way the runner does (Scan on worker goroutines, Collect in
// input order, Reduce, Apply), and prints wall time per phase and the
// index's counters. Documents are regenerated from their index on demand,
// so the corpus itself never sits in memory and peak RSS measures the
// dedup state. scripts/bench_dedup.sh runs it under /usr/bin/time -v.
//
// The text is invented filler from a syllable word bank (no real text);
// about 8% of documents are exact copies (re-cased, re-spaced) and 8% near
// copies (one word replaced: word 5-gram Jaccard 0.83-0.92) of an earlier document.
package main

import (
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"runtime"
	"runtime/pprof"
	"strings"
	"sync"
	"time"

	"winnow/dedup"
)

var syllables = strings.Fields("ka lo mi ra ne tu si po va de lu ri ba mo te na gi hu ze fa co ly pe xo wi da ru se to be ki ma no re su va li go")

// bank is a word bank of 3-syllable invented words.
var bank = func() []string {
	n := len(syllables)
	out := make([]string, bankSize)
	for w := range out {
		out[w] = syllables[w%n] + syllables[(w/n)%n] + syllables[(w/n/n)%n]
	}
	return out
}()

func word(w int) string { return bank[w] }

const (
	bankSize  = 40 * 40 * 30
	chunkDocs = 8192 // documents scanned per batch
)

// doc returns the text of document i: an original, or a copy of an
// earlier original.
func doc(i int, seed uint64, sb *[]byte) string {
	rng := rand.New(rand.NewPCG(seed, uint64(i)))
	kind := rng.IntN(100)
	if i > 100 && kind < 16 {
		src := rng.IntN(i)
		for { // follow to an original
			r2 := rand.New(rand.NewPCG(seed, uint64(src)))
			if src <= 100 || r2.IntN(100) >= 16 {
				break
			}
			src = r2.IntN(src)
		}
		text := original(src, seed, sb)
		if kind < 8 {
			return strings.ToUpper(text[:1]) + strings.Replace(text[1:], " ", "  \n", 1)
		}
		w := strings.Fields(text)
		w[rng.IntN(len(w))] = word(rng.IntN(bankSize))
		return strings.Join(w, " ")
	}
	return original(i, seed, sb)
}

func original(i int, seed uint64, sb *[]byte) string {
	rng := rand.New(rand.NewPCG(seed^0xabc, uint64(i)))
	b := (*sb)[:0]
	n := 60 + rng.IntN(60)
	for j := 0; j < n; j++ {
		if j > 0 {
			b = append(b, ' ')
		}
		b = append(b, word(rng.IntN(bankSize))...)
		if j%11 == 10 {
			b = append(b, '.')
		}
	}
	*sb = b
	return string(b)
}

type index interface {
	scan(text string) any
	add(order uint64, id string, k any) error
	reduce() error
	lookup(order uint64) bool
	stats() dedup.IndexStats
	close() error
}

type exactIdx struct{ x *dedup.ExactIndex }

func (e exactIdx) scan(t string) any {
	h, ok := dedup.ExactHash(t, dedup.Normalization{})
	if !ok {
		return nil
	}
	return h
}
func (e exactIdx) add(o uint64, id string, k any) error { return e.x.Add(o, id, k.(dedup.Hash128)) }
func (e exactIdx) reduce() error                        { return e.x.Reduce() }
func (e exactIdx) lookup(o uint64) bool                 { _, ok := e.x.Lookup(o); return ok }
func (e exactIdx) stats() dedup.IndexStats              { return e.x.Stats() }
func (e exactIdx) close() error                         { return e.x.Close() }

// noIdx only generates the documents: the baseline cost of the harness.
type noIdx struct{}

func (noIdx) scan(t string) any                    { return nil }
func (noIdx) add(o uint64, id string, k any) error { return nil }
func (noIdx) reduce() error                        { return nil }
func (noIdx) lookup(o uint64) bool                 { return false }
func (noIdx) stats() dedup.IndexStats              { return dedup.IndexStats{} }
func (noIdx) close() error                         { return nil }

type nearIdx struct{ x *dedup.NearIndex }

func (n nearIdx) scan(t string) any                    { return n.x.Key(t) }
func (n nearIdx) add(o uint64, id string, k any) error { return n.x.Add(o, id, k.(*dedup.NearKey)) }
func (n nearIdx) reduce() error                        { return n.x.Reduce() }
func (n nearIdx) lookup(o uint64) bool                 { _, ok := n.x.Lookup(o); return ok }
func (n nearIdx) stats() dedup.IndexStats              { return n.x.Stats() }
func (n nearIdx) close() error                         { return n.x.Close() }

func main() {
	docs := flag.Int("docs", 1_000_000, "documents to generate")
	stage := flag.String("stage", "near", "exact | near | none (generate only: the harness baseline)")
	memory := flag.Int64("memory", 128<<20, "memory budget of the index in bytes")
	workers := flag.Int("workers", runtime.NumCPU(), "scan goroutines")
	tmp := flag.String("tmp", os.TempDir(), "directory for spill files")
	seed := flag.Uint64("seed", 1, "corpus seed")
	prof := flag.String("cpuprofile", "", "write a CPU profile to this file")
	flag.Parse()
	if *prof != "" {
		f, err := os.Create(*prof)
		if err != nil {
			fmt.Fprintln(os.Stderr, "benchdedup:", err)
			os.Exit(1)
		}
		pprof.StartCPUProfile(f)
		defer pprof.StopCPUProfile()
	}
	if err := run(*docs, *stage, *memory, *workers, *tmp, *seed); err != nil {
		fmt.Fprintln(os.Stderr, "benchdedup:", err)
		pprof.StopCPUProfile()
		os.Exit(1)
	}
}

func run(n int, stage string, memory int64, workers int, tmp string, seed uint64) error {
	var idx index
	switch stage {
	case "exact":
		x, err := dedup.NewExactIndex(dedup.ExactOptions{TempDir: tmp, MemoryBudget: memory})
		if err != nil {
			return err
		}
		idx = exactIdx{x}
	case "near":
		x, err := dedup.NewNearIndex(dedup.NearOptions{Threshold: 0.8, Seed: seed, TempDir: tmp, MemoryBudget: memory})
		if err != nil {
			return err
		}
		idx = nearIdx{x}
	case "none":
		idx = noIdx{}
	default:
		return fmt.Errorf("unknown stage %q", stage)
	}
	defer idx.close()

	t0 := time.Now()
	var textBytes int64
	keys := make([]any, chunkDocs)
	sizes := make([]int64, chunkDocs)
	for base := 0; base < n; base += chunkDocs {
		m := min(chunkDocs, n-base)
		var wg sync.WaitGroup
		for w := 0; w < workers; w++ {
			wg.Add(1)
			go func(w int) {
				defer wg.Done()
				var sb []byte
				for j := w; j < m; j += workers {
					t := doc(base+j, seed, &sb)
					sizes[j] = int64(len(t))
					keys[j] = idx.scan(t)
				}
			}(w)
		}
		wg.Wait()
		for j := 0; j < m; j++ {
			textBytes += sizes[j]
			if err := idx.add(uint64(base+j), fmt.Sprintf("bench/%d", base+j), keys[j]); err != nil {
				return err
			}
			keys[j] = nil
		}
	}
	tScan := time.Since(t0)
	t1 := time.Now()
	if err := idx.reduce(); err != nil {
		return err
	}
	tReduce := time.Since(t1)
	t2 := time.Now()
	removed := 0
	for i := 0; i < n; i++ {
		if idx.lookup(uint64(i)) {
			removed++
		}
	}
	tApply := time.Since(t2)
	st := idx.stats()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	total := time.Since(t0)
	fmt.Printf("stage=%s docs=%d text_mb=%.0f workers=%d memory_budget_mb=%d\n", stage, n, float64(textBytes)/1e6, workers, memory>>20)
	fmt.Printf("  scan+collect %.2fs (%.1f MB/s)  reduce %.2fs  apply %.2fs  total %.2fs\n",
		tScan.Seconds(), float64(textBytes)/1e6/tScan.Seconds(), tReduce.Seconds(), tApply.Seconds(), total.Seconds())
	fmt.Printf("  removed %d (%.1f%%)  records %d  runs %d  spilled %.0f MB  peak sort buffer %.1f MB (%.1f bytes/doc)  candidates %d verified %d\n",
		removed, 100*float64(removed)/float64(n), st.Records, st.Runs, float64(st.SpilledBytes)/1e6,
		float64(st.ResidentBytes)/1e6, float64(st.ResidentBytes)/float64(n), st.Candidates, st.Verified)
	fmt.Printf("  go heap sys %.0f MB (%.1f bytes/doc)\n", float64(ms.HeapSys)/1e6, float64(ms.HeapSys)/float64(n))
	return nil
}
