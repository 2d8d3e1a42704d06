package run

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"

	"winnow/stages"
)

// keepCorpus writes pairs of copies where the later one is longer: exact
// copies differing only in punctuation (one hash with fold_punct) and near
// copies with a sentence added.
func keepCorpus(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	var b bytes.Buffer
	for i := 0; i < 6; i++ {
		rng := rand.New(rand.NewPCG(uint64(i), 5))
		words := strings.Fields("hull keel rudder bilge pump winch mast boom sheet halyard cleat transom stern deck hatch rigging varnish epoxy gelcoat resin primer antifouling propeller shaft seacock impeller battery bulkhead stringer shroud turnbuckle teak oak cedar plank frame garboard strake bronze zinc anode mooring anchor chain windlass dinghy outboard diesel filter")
		var sb strings.Builder
		fmt.Fprintf(&sb, "Work order %d:", i)
		for k := 0; k < 60; k++ {
			sb.WriteString(" " + words[rng.IntN(len(words))])
			if k%10 == 9 {
				sb.WriteString(",")
			}
		}
		text := sb.String() + "."
		fmt.Fprintf(&b, `{"id":"short-%d","text":%q}`+"\n", i, text)
		if i%2 == 0 {
			text = strings.ReplaceAll(text, ",", ";;")
		} else {
			text += " Check the seacocks."
		}
		fmt.Fprintf(&b, `{"id":"long-%d","text":%q}`+"\n", i, text)
	}
	var z bytes.Buffer
	w, _ := zstd.NewWriter(&z)
	w.Write(b.Bytes())
	w.Close()
	writeFile(t, dir, "raw/orders.jsonl.zst", z.String())
	return dir
}

const keepSpec = `name: keep
seed: 1
inputs:
  - source: yard
    paths: ["raw/*.zst"]
stages:
  - kind: length
  - kind: exact_dedup
    fold_punct: true
    keep: {metric: %s, prefer: max}
  - kind: near_dedup
    keep: {metric: length.chars, prefer: max}
output:
  dir: out
`

// A keep metric measured by an earlier stage reaches exact_dedup (same
// segment) and near_dedup (after exact_dedup's global pass, so the value
// travels through the document spill): the longer copy survives.
func TestRunKeepMetricAcrossSegments(t *testing.T) {
	dir := keepCorpus(t)
	s := writeSpec(t, dir, fmt.Sprintf(keepSpec, "length.chars"))
	out := filepath.Join(dir, "out")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: 2, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	shard := readZstd(t, filepath.Join(out, "shards", "keep-00000.jsonl.zst"))
	var ids []string
	for _, line := range strings.Split(strings.TrimSpace(shard), "\n") {
		var d struct{ ID string }
		json.Unmarshal([]byte(line), &d)
		ids = append(ids, d.ID)
	}
	if got := strings.Join(ids, " "); got != "long-0 long-1 long-2 long-3 long-4 long-5" {
		t.Errorf("kept %s", got)
	}
	for _, stage := range []string{"exact_dedup", "near_dedup"} {
		of := map[string]string{}
		for _, line := range strings.Split(strings.TrimSpace(readZstd(t, filepath.Join(out, "ledger", stage+".jsonl.zst"))), "\n") {
			var r map[string]any
			json.Unmarshal([]byte(line), &r)
			doc, _ := r["doc"].(string)
			of[doc], _ = r["of"].(string)
		}
		for i := 0; i < 6; i++ {
			if want := (i%2 == 0) == (stage == "exact_dedup"); want && of[fmt.Sprintf("short-%d", i)] != fmt.Sprintf("long-%d", i) {
				t.Errorf("%s: short-%d removed of %q, want long-%d (ledger %v)", stage, i, of[fmt.Sprintf("short-%d", i)], i, of)
			}
		}
	}
}

// A keep metric no earlier stage measures is a spec error at the keep key,
// with the nearest known name.
func TestKeepMetricUnknown(t *testing.T) {
	dir := keepCorpus(t)
	s := writeSpec(t, dir, fmt.Sprintf(keepSpec, "length.charz"))
	_, err := s.BuildStages(stages.Env{Checking: true})
	if err == nil || !strings.Contains(err.Error(), `metric "length.charz" is not measured by an earlier stage (did you mean "length.chars"?)`) || !strings.Contains(err.Error(), "spec.yaml:") {
		t.Fatalf("error %v", err)
	}
}
