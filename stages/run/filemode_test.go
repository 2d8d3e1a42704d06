package run

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Every file of a run directory (shards, ledger, metrics, manifest, the
// contamination report...) gets the mode os.Create gives under the
// process's umask (0644 under the usual 022), not the 0600 of a temp file:
// users share run directories.
func TestRunFilesHaveCreateMode(t *testing.T) {
	dir := writeCorpus(t, 50)
	s := writeSpec(t, dir, basicSpec)
	out := filepath.Join(dir, "out")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: 2}); err != nil {
		t.Fatal(err)
	}
	// The reference: a file the standard library creates here.
	ref, err := os.Create(filepath.Join(dir, "ref"))
	if err != nil {
		t.Fatal(err)
	}
	ref.Close()
	st, _ := os.Stat(ref.Name())
	want := st.Mode().Perm()
	n := 0
	filepath.Walk(out, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		n++
		if info.Mode().Perm() != want {
			t.Errorf("%s: mode %v, want %v", strings.TrimPrefix(p, out), info.Mode().Perm(), want)
		}
		return nil
	})
	if n < 5 {
		t.Errorf("only %d files checked", n)
	}
}
