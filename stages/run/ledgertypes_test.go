package run

import (
	"bufio"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/zstd"
)

// The ledger's "value" column has one JSON type per (stage, rule) — a
// number, or a string for langid's language rule (the language found) —
// so filtering a ledger by rule (DuckDB's read_json, pandas) gives one
// column type. Checked with
// encoding/json over every ledger file of the default spec run with
// decontaminate.action=cut (which edits and drops under one rule).
func TestLedgerValueOneTypePerRule(t *testing.T) {
	p := defaultSpecFixture(t, 900, 5)
	s := loadSpec(t, p)
	out := filepath.Join(filepath.Dir(p), "out")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Workers: 2, Force: true, Version: "test",
		Sets: []string{"decontaminate.action=cut"}}); err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob(filepath.Join(out, "ledger", "*.jsonl.zst"))
	if len(files) < 5 {
		t.Fatalf("ledger files %v", files)
	}
	kinds := map[string]map[string]int{} // stage/rule -> JSON kind -> records
	for _, f := range files {
		fh, err := os.Open(f)
		if err != nil {
			t.Fatal(err)
		}
		zr, err := zstd.NewReader(fh)
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(zr)
		sc.Buffer(nil, 1<<24)
		for sc.Scan() {
			var rec map[string]any
			if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
				t.Fatalf("%s: %v", f, err)
			}
			kind := "absent"
			switch rec["value"].(type) {
			case float64:
				kind = "number"
			case string:
				kind = "string"
			case bool:
				kind = "bool"
			case nil:
				if _, ok := rec["value"]; ok {
					kind = "null"
				}
			default:
				kind = "other"
			}
			key := rec["stage"].(string) + "/" + rec["rule"].(string)
			if kinds[key] == nil {
				kinds[key] = map[string]int{}
			}
			kinds[key][kind]++
		}
		zr.Close()
		fh.Close()
	}
	for key, k := range kinds {
		if len(k) != 1 {
			t.Errorf("%s: value of several types %v", key, k)
		}
	}
	if len(kinds) < 6 {
		t.Errorf("only %d rules seen: %v", len(kinds), kinds)
	}
	t.Logf("rules: %v", kinds)
}
