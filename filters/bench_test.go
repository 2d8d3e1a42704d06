package filters

import (
	"math/rand/v2"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// Invented boatyard-maintenance sentences (the Larkspur Marine Works demo
// scenario) for synthetic benchmarks only.
var boatyardSentences = []string{
	"Sand the hull down to bare gelcoat before you apply the first coat of epoxy barrier.",
	"The yard crew at Larkspur checks every seacock for corrosion when a boat is hauled out in autumn.",
	"Replace the raw-water impeller each season, and keep a spare in the engine locker.",
	"A weeping stern gland usually needs new packing rather than a whole new shaft seal.",
	"Mix the antifouling paint thoroughly, because the copper settles to the bottom of the tin.",
	"Our riggers measure each shroud with a tension gauge after the mast is stepped again.",
	"If the bilge pump cycles too often, look for a leak at the keel bolts or the rudder tube.",
	"Wash the teak decks with fresh water and a soft brush; never use a pressure washer on old timber.",
	"The travel lift can raise boats of up to twenty tonnes onto the hard standing near the slipway.",
	"Winterize the freshwater system by draining the tanks and running antifreeze through the lines.",
	"Check the zinc anodes on the propeller shaft and replace any that have lost half their mass.",
	"Keep a log of every engine service so the next owner knows the history of the boat.",
	"Varnish needs at least six thin coats on exposed brightwork to survive a summer in the sun.",
	"Inspect the fuel filter bowl for water after a week of heavy rain in the marina.",
	"When the osmosis blisters are small, the hull can dry over the winter under a cover.",
	"Do not tighten the hose clamps too hard, or the rubber will split at the first frost.",
	"The forum members recommend a moisture meter before buying any second-hand fibreglass yacht.",
	"Grease the winches twice a season and strip them down fully once every two years.",
	"Ask at the chandlery about the right sealant for fittings below the waterline.",
	"A well-ventilated cabin keeps mould away from the cushions during the damp months.",
}

// Word banks of generated boatyard sentences (invented, demo only), so a
// page is varied like real prose rather than a loop of a few sentences.
var (
	benchSubjects = []string{"the yard crew", "the rigger", "the owner", "a surveyor", "the new apprentice",
		"every skipper", "the engine shop", "the paint team", "a careful buyer", "the harbour master",
		"the night watchman", "a visiting shipwright"}
	benchVerbs = []string{"checks", "replaces", "cleans", "inspects", "greases", "sands", "paints",
		"tightens", "measures", "drains", "seals", "polishes", "photographs", "tests"}
	benchObjects = []string{"the raw-water impeller", "each seacock", "the stern gland", "the keel bolts",
		"the rudder bearings", "the fuel filter", "the standing rigging", "the zinc anodes",
		"the teak handrails", "the bilge pump", "the exhaust elbow", "the cockpit drains",
		"the gas locker", "the anchor windlass", "the through-hull fittings"}
	benchTimes = []string{"before the spring launch", "every autumn", "after a long passage",
		"when the boat is hauled out", "at the end of each season", "twice a year", "before any survey",
		"once the hull is dry", "after heavy weather", "while the mast is down"}
	benchReasons = []string{"because corrosion spreads quickly below the waterline",
		"so that small leaks never become large ones", "since salt water ruins untreated metal",
		"to keep the insurance valid", "because the manufacturer recommends it",
		"so the next owner inherits a sound boat", "which saves a costly lift later",
		"as the forum regulars keep reminding everyone"}
)

func benchSentence(r *rand.Rand) string {
	if r.IntN(5) == 0 {
		return boatyardSentences[r.IntN(len(boatyardSentences))]
	}
	subj := benchSubjects[r.IntN(len(benchSubjects))]
	s := strings.ToUpper(subj[:1]) + subj[1:] + " " + benchVerbs[r.IntN(len(benchVerbs))] + " " +
		benchObjects[r.IntN(len(benchObjects))] + " " + benchTimes[r.IntN(len(benchTimes))]
	switch r.IntN(3) {
	case 0:
		s += ", " + benchReasons[r.IntN(len(benchReasons))]
	case 1:
		s += ", which takes about " + strconv.Itoa(1+r.IntN(12)) + " hours"
	}
	return s + "."
}

// boatyardText returns about size bytes of web-like English: paragraphs
// of three to seven sentences, a bulleted list now and then, and a
// repeated boilerplate footer line, like a dealer page.
func boatyardText(seed uint64, size int) string {
	r := rand.New(rand.NewPCG(seed, 7))
	var b strings.Builder
	for b.Len() < size {
		switch r.IntN(10) {
		case 0:
			for k := 0; k < 3; k++ {
				b.WriteString("- ")
				b.WriteString(benchSentence(r))
				b.WriteByte('\n')
			}
		case 1:
			b.WriteString("Larkspur Marine Works, open Monday to Saturday, call the yard office for bookings.\n")
		default:
			n := 3 + r.IntN(5)
			for k := 0; k < n; k++ {
				if k > 0 {
					b.WriteByte(' ')
				}
				b.WriteString(benchSentence(r))
			}
			b.WriteByte('\n')
		}
		b.WriteByte('\n')
	}
	return b.String()
}

// benchDocs is a batch of documents of a few KB each, the size of a
// typical web page's main text.
func benchDocs() []string {
	docs := make([]string, 64)
	for i := range docs {
		docs[i] = boatyardText(uint64(i), 2000+int(uint64(i)*977%6000))
	}
	return docs
}

func totalBytes(docs []string) int64 {
	n := 0
	for _, d := range docs {
		n += len(d)
	}
	return int64(n)
}

func benchEach(b *testing.B, f func(s *Scratch, text string)) {
	var s Scratch
	benchLoop(b, benchDocs(), func(_ int, d string) { f(&s, d) })
}

// benchLoop runs f on every document of docs (with its index) per
// iteration and reports MB/s, allocations and CPU MB/s.
func benchLoop(b *testing.B, docs []string, f func(i int, d string)) {
	b.SetBytes(totalBytes(docs))
	b.ReportAllocs()
	cpu0 := processCPU()
	n := 0
	for b.Loop() {
		for i, d := range docs {
			f(i, d)
		}
		n++
	}
	reportCPUThroughput(b, cpu0, n, totalBytes(docs))
}

// processCPU returns the CPU time this process has used (user + system).
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// reportCPUThroughput adds a "cpuMB/s" metric: bytes processed per second
// of CPU time the process used. On a machine shared with other jobs the
// wall-clock MB/s of b.SetBytes drops whenever the benchmark is not
// scheduled; CPU time does not, so this is the per-core figure.
func reportCPUThroughput(b *testing.B, cpu0 time.Duration, iters int, bytes int64) {
	cpu := processCPU() - cpu0
	if cpu > 0 && iters > 0 {
		b.ReportMetric(float64(bytes)*float64(iters)/cpu.Seconds()/1e6, "cpuMB/s")
	}
}

func BenchmarkSplit(b *testing.B) {
	benchEach(b, func(s *Scratch, text string) { s.Split(text) })
}

func BenchmarkQuality(b *testing.B) {
	sw, _ := StopwordsFor("en")
	benchEach(b, func(s *Scratch, text string) { MeasureQuality(s, text, sw) })
}

func BenchmarkRepetition(b *testing.B) {
	benchEach(b, func(s *Scratch, text string) { MeasureRepetition(s, text) })
}

// BenchmarkQualityRepetition measures both metric sets as the two stages
// do, each splitting the text itself.
func BenchmarkQualityRepetition(b *testing.B) {
	sw, _ := StopwordsFor("en")
	benchEach(b, func(s *Scratch, text string) {
		MeasureQuality(s, text, sw)
		MeasureRepetition(s, text)
	})
}

// BenchmarkMeasure measures both metric sets over one split.
func BenchmarkMeasure(b *testing.B) {
	sw, _ := StopwordsFor("en")
	benchEach(b, func(s *Scratch, text string) { Measure(s, text, sw) })
}

func BenchmarkCleanLines(b *testing.B) {
	opt := C4LineOptions()
	benchEach(b, func(_ *Scratch, text string) { CleanLines(text, opt) })
}

func BenchmarkRedact(b *testing.B) {
	opt := DefaultRedactOptions()
	benchEach(b, func(_ *Scratch, text string) { Redact(text, opt) })
}

// benchPart measures one step of Measure on documents already split and
// hashed, to show where the time of the combined metrics goes.
func benchPart(b *testing.B, f func(s *Scratch, d string)) {
	docs := benchDocs()
	ss := make([]Scratch, len(docs))
	en, _ := StopwordsFor("en")
	for i, d := range docs {
		Measure(&ss[i], d, en)
	}
	benchLoop(b, docs, func(i int, d string) { f(&ss[i], d) })
}

func BenchmarkPartWordHashes(b *testing.B) {
	benchPart(b, func(s *Scratch, d string) { s.hashed = false; s.WordHashes(d) })
}

func BenchmarkPartStopwords(b *testing.B) {
	en, _ := StopwordsFor("en")
	benchPart(b, func(s *Scratch, d string) { CountStopwords(s, d, en) })
}

func BenchmarkPartQualityOfSplit(b *testing.B) {
	en, _ := StopwordsFor("en")
	benchPart(b, func(s *Scratch, d string) { QualityOfSplit(s, d, en) })
}

func BenchmarkPartRepetitionOfSplit(b *testing.B) {
	benchPart(b, func(s *Scratch, d string) { RepetitionOfSplit(s, d) })
}
