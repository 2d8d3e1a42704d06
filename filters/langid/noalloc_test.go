//go:build !race

// The race detector's instrumentation allocates, so allocation counts are
// checked only in ordinary builds.

package langid

import (
	"strings"
	"testing"
)

// TestLangNoAllocs: a document the packed tables decide costs no allocation.
func TestLangNoAllocs(t *testing.T) {
	d := defaultDetector(t)
	text := strings.Join(udhrParagraphs(t, "de")[:12], "\n")
	if r := d.Detect(text); r.Lang != "de" || r.LinguaWindows != 0 {
		t.Fatalf("%+v", r)
	}
	if a := testing.AllocsPerRun(20, func() { d.Detect(text) }); a != 0 {
		t.Errorf("%.1f allocations per Detect", a)
	}
}
