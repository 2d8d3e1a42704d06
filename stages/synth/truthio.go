package synth

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
)

// ReadTruth reads a truth.jsonl written by Generate, in corpus order.
func ReadTruth(path string) ([]TruthDoc, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 64<<10), 16<<20)
	var out []TruthDoc
	line := 0
	for sc.Scan() {
		line++
		var td TruthDoc
		if err := json.Unmarshal(sc.Bytes(), &td); err != nil {
			return out, fmt.Errorf("%s:%d: %w", path, line, err)
		}
		out = append(out, td)
	}
	if err := sc.Err(); err != nil {
		return out, fmt.Errorf("%s: %w", path, err)
	}
	return out, nil
}
