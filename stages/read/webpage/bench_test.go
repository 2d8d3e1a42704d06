package webpage

import (
	"testing"
)

// BenchmarkFromWARCResponse extracts the 15 HTML pages of the wget crawl
// (HTTP parsing, charset decoding, tokenizing, classification); bytes/s
// is HTML bytes per second on one core (issue 11 asks for >= 30 MB/s).
func BenchmarkFromWARCResponse(b *testing.B) {
	var blocks [][]byte
	total := 0
	for _, rec := range readWARC(b, crawlWARC) {
		if rec.typ == "response" && len(mainOf) > 0 {
			if _, ok := mainOf[crawlPath(rec.uri)]; ok {
				blocks = append(blocks, rec.block)
				total += len(rec.block)
			}
		}
	}
	b.SetBytes(int64(total))
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuTime()
	for i := 0; i < b.N; i++ {
		for _, blk := range blocks {
			if _, rule, err := FromWARCResponse(blk, "u", "d", Options{}); err != nil || rule != "" {
				b.Fatal(rule, err)
			}
		}
	}
	// On a shared machine wall time includes waiting for a core; the
	// process's CPU time (all threads, the garbage collector included)
	// gives the speed per core of CPU actually used.
	if cpu := cpuTime() - cpu0; cpu > 0 {
		b.ReportMetric(float64(total)*float64(b.N)/1e6/cpu.Seconds(), "MB/cpu-s")
	}
}
