package webpage

import (
	"os"
	"strings"
	"testing"
)

// TestDumpBlocks prints the blocks and classes of the crawl page named by
// WEBPAGE_DUMP (a path suffix); it does nothing without the variable and is
// a tool for reading the classifier's decisions, not a check.
func TestDumpBlocks(t *testing.T) {
	want := os.Getenv("WEBPAGE_DUMP")
	if want == "" {
		t.Skip("set WEBPAGE_DUMP=path-suffix to print a page's blocks")
	}
	for _, rec := range readWARC(t, crawlWARC) {
		if rec.typ != "response" || !strings.HasSuffix(rec.uri, want) {
			continue
		}
		resp, _ := parseResponse(rec.block)
		body, _ := resp.decodedBody(DefaultMaxBytes)
		text, _ := decodeCharset(body, resp.header("content-type"), true)
		ex := getExtractor()
		ex.run(text, Options{}, "", "")
		names := []string{"bad", "short", "near", "GOOD"}
		for _, b := range ex.blocks {
			s := string(ex.buf[b.start:b.end])
			if len(s) > 90 {
				s = s[:90]
			}
			t.Logf("%-5s %-5s r%4d l%4d h%v p%v %q", names[b.cf], names[b.class], b.runes, b.linkRunes, b.heading, b.pre, s)
		}
	}
}
