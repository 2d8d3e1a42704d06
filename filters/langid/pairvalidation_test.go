//go:build pairvalidation

package langid

import (
	"bufio"
	"flag"
	"os"
	"strings"
	"testing"
)

var pairValidation = flag.String("pairdata.validation", "", "validation.tsv written by pairdata/build.py --validate")

// TestPairValidation measures, on the validation texts build.py --validate
// writes (catalogues of packages left out of the counts), the Indonesian
// Malay, Bosnian, Croatian and Serbian accuracy of the detector with the
// word models and with the marker words alone; the models must do no worse
// for any of them.
// It is built only with the pairvalidation tag: its input is not kept in
// the repository (3 MB of text rebuilt from .deb files, with counts built
// without those packages in place of words.tsv.gz; pairdata/README.md):
//
//	go test -tags pairvalidation ./filters/langid -run TestPairValidation -pairdata.validation FILE
func TestPairValidation(t *testing.T) {
	if *pairValidation == "" {
		t.Fatal("-pairdata.validation FILE is required (pairdata/build.py --validate writes it)")
	}
	f, err := os.Open(*pairValidation)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var texts []labelled
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		p := strings.SplitN(sc.Text(), "\t", 3)
		if len(p) != 3 {
			t.Fatalf("malformed line %q", sc.Text())
		}
		texts = append(texts, labelled{p[0], p[2]})
	}
	checkClose(t, measureClose(defaultDetector(t), texts), map[string]float64{"bs": 0, "hr": 0, "id": 0, "ms": 0, "sr": 0})
}
