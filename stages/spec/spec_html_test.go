package spec

import (
	"strings"
	"testing"
)

// html_field names the field that holds HTML; it replaces text_field, and
// naming both is an error at the key.
func TestHTMLFieldKey(t *testing.T) {
	s, err := ParseSpec("s.yaml", []byte("inputs:\n  - source: web\n    paths: [a.jsonl]\n    html_field: body\nstages: []\n"))
	if err != nil {
		t.Fatal(err)
	}
	if in := s.Inputs[0]; in.TextField != "body" || !in.HTML {
		t.Errorf("input %+v", in.ReadOptions)
	}
	_, err = ParseSpec("s.yaml", []byte("inputs:\n  - source: web\n    paths: [a.jsonl]\n    text_field: text\n    html_field: body\nstages: []\n"))
	if err == nil || !strings.Contains(err.Error(), "s.yaml:5:") || !strings.Contains(err.Error(), "not both") {
		t.Errorf("both keys: %v", err)
	}
	s, err = ParseSpec("s.yaml", []byte("inputs:\n  - source: web\n    paths: [pages/]\n    format: html\nstages: []\n"))
	if err != nil || s.Inputs[0].Format != "html" {
		t.Errorf("format html: %v", err)
	}
}
