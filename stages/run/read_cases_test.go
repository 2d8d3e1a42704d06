package run

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// Through a whole run: zero padding after a zstd stream is a warning in the
// manifest, not a broken input; a \u0000 in a text is an edit (nul_byte)
// and the document reaches the shards with U+FFFD.
func TestRunPaddingAndNUL(t *testing.T) {
	dir := writeCorpus(t, 200)
	p := filepath.Join(dir, "raw", "part-0.jsonl.zst")
	b, _ := os.ReadFile(p)
	os.WriteFile(p, append(b, make([]byte, 4096)...), 0o644)
	extra := readZstd(t, filepath.Join(dir, "raw", "part-1.jsonl.zst"))
	extra += `{"id":"nul-doc","text":"Check the keel bolts\u0000 and the rudder bearing after launch."}` + "\n"
	var z bytes.Buffer
	w, _ := zstd.NewWriter(&z)
	w.Write([]byte(extra))
	w.Close()
	writeFile(t, dir, "raw/part-1.jsonl.zst", z.String())
	s := writeSpec(t, dir, basicSpec)
	res, err := RunSpec(context.Background(), s, RunOptions{Out: filepath.Join(dir, "out")})
	if err != nil {
		t.Fatal(err)
	}
	if res.Runner.FatalInputs != 0 {
		t.Errorf("fatal inputs %d: %+v", res.Runner.FatalInputs, res.Manifest.Errors)
	}
	in := res.Manifest.Inputs[0]
	if !in.Complete || len(in.Warnings) != 1 || !strings.Contains(in.Warnings[0], "4096 zero bytes") {
		t.Errorf("padded input %+v", in)
	}
	led := readZstd(t, filepath.Join(dir, "out", "ledger", "read.jsonl.zst"))
	if !strings.Contains(led, `"doc":"nul-doc"`) || !strings.Contains(led, `"rule":"nul_byte"`) || !strings.Contains(led, `"action":"edit"`) {
		t.Errorf("read ledger: %s", led)
	}
	var shards strings.Builder
	filepath.Walk(filepath.Join(dir, "out"), func(p string, info os.FileInfo, err error) error {
		if err == nil && strings.HasSuffix(p, ".zst") && !strings.Contains(p, "ledger") && !strings.Contains(p, "metrics") {
			shards.WriteString(readZstd(t, p))
		}
		return nil
	})
	if !strings.Contains(shards.String(), `"id":"nul-doc","text":"Check the keel bolts\ufffd and`) && !strings.Contains(shards.String(), "Check the keel bolts\uFFFD and") {
		t.Errorf("nul-doc not in the shards with U+FFFD")
	}
}
