package stages

import (
	"testing"
)

func TestLengthStage(t *testing.T) {
	st, err := newLength(ParamsFromMap(map[string]any{"min_chars": 5, "max_lines": 2}), Env{})
	if err != nil {
		t.Fatal(err)
	}
	for text, want := range map[string]string{"abcd": "min_chars", "abcde": "", "ab\ncd\nef": "max_lines", "ab\n\n\ncd": ""} {
		d := st.Process(&Doc{Text: text})
		if d.Rule != want {
			t.Errorf("%q: rule %q, want %q", text, d.Rule, want)
		}
	}
	if _, err := newLength(ParamsFromMap(map[string]any{"min_char": 5}), Env{}); err == nil {
		t.Error("unknown key accepted")
	}
}
