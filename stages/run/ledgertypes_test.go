package run

import (
	"context"
	"encoding/json"
	"path/filepath"
	"testing"
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
		for _, line := range zstdLines(t, f) {
			var rec map[string]any
			if err := json.Unmarshal(line, &rec); err != nil {
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
