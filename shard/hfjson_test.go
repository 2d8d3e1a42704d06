package shard

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// writeTokenizerJSON converts an embedded tiktoken encoding into the
// tokenizer.json format (byte-level alphabet, merges in rank order), the
// conversion commonly used to load tiktoken vocabularies in other
// libraries: every split of a token into two tokens is a merge, ordered by
// the rank of the merged token.
func writeTokenizerJSON(t *testing.T, enc string, preTokenizer any) string {
	t.Helper()
	base := mustLoad(t, enc)
	toRune, _ := byteLevelAlphabet()
	spell := func(s string) string {
		var b strings.Builder
		for i := 0; i < len(s); i++ {
			b.WriteRune(toRune[s[i]])
		}
		return b.String()
	}
	tokens := make([]string, base.VocabSize())
	for s, id := range base.enc.whole {
		tokens[id] = s
	}
	vocab := make(map[string]int, len(tokens))
	var merges []string
	for id, s := range tokens {
		if s == "" {
			continue
		}
		vocab[spell(s)] = id
		type m struct{ a, b string }
		var local []m
		for k := 1; k < len(s); k++ {
			_, ok1 := base.enc.whole[s[:k]]
			_, ok2 := base.enc.whole[s[k:]]
			if ok1 && ok2 {
				local = append(local, m{s[:k], s[k:]})
			}
		}
		slices.SortFunc(local, func(x, y m) int {
			if c := int(base.enc.whole[x.a]) - int(base.enc.whole[y.a]); c != 0 {
				return c
			}
			return int(base.enc.whole[x.b]) - int(base.enc.whole[y.b])
		})
		for _, x := range local {
			merges = append(merges, spell(x.a)+" "+spell(x.b))
		}
	}
	doc := map[string]any{
		"version":        "1.0",
		"added_tokens":   []any{map[string]any{"id": len(tokens), "content": "<|endoftext|>", "special": true}},
		"normalizer":     nil,
		"pre_tokenizer":  preTokenizer,
		"post_processor": nil,
		"decoder":        map[string]any{"type": "ByteLevel"},
		"model":          map[string]any{"type": "BPE", "dropout": nil, "vocab": vocab, "merges": merges},
	}
	data, err := json.Marshal(doc)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), enc+"-tokenizer.json")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// sameSplit reports whether the reference-library split and the textbook
// regex split of s agree (they differ only on DEL and on whitespace runs
// holding line breaks apart, see pretokenize.go), after replacing invalid
// UTF-8.
func sameSplit(pat pattern, s string) bool {
	s = sanitizeUTF8(s)
	a := splitter{pat: pat, digits: 3, reference: true}
	b := splitter{pat: pat, digits: 3}
	for i, j := 0, 0; ; {
		s1, e1 := a.next(s, i)
		s2, e2 := b.next(s, j)
		if s1 != s2 || e1 != e2 {
			return false
		}
		if s1 == len(s) {
			return true
		}
		i, j = e1, e2
	}
}

// Outside check: a tokenizer.json built from r50k_base (the GPT-2
// vocabulary) and from cl100k_base gives the reference library's ids
// (github.com/tiktoken-go/tokenizer) on every test text whose split the
// two regex semantics agree on; the added token is matched literally.
func TestTokenizerJSONMatchesReference(t *testing.T) {
	texts := append(slices.Clone(edgeTexts), randomTexts(600, 5)...)
	for name, texts2 := range udhrTexts(t) {
		_ = name
		texts = append(texts, strings.Split(texts2, "\n\n")...)
	}
	cases := []struct {
		enc string
		pat pattern
		pre any
	}{
		{"r50k_base", patGPT2, map[string]any{"type": "ByteLevel", "add_prefix_space": false, "trim_offsets": true, "use_regex": true}},
		{"cl100k_base", patCL100k, map[string]any{"type": "Sequence", "pretokenizers": []any{
			map[string]any{"type": "Split", "pattern": map[string]any{"Regex": `(?i:'s|'t|'re|'ve|'m|'ll|'d)|[^\r\n\p{L}\p{N}]?\p{L}+|\p{N}{1,3}| ?[^\s\p{L}\p{N}]+[\r\n]*|\s*[\r\n]+|\s+(?!\S)|\s+`}, "behavior": "Isolated", "invert": false},
			map[string]any{"type": "ByteLevel", "add_prefix_space": false, "trim_offsets": true, "use_regex": false},
		}}},
	}
	for _, c := range cases {
		t.Run(c.enc, func(t *testing.T) {
			path := writeTokenizerJSON(t, c.enc, c.pre)
			tok, err := Load(path, "")
			if err != nil {
				t.Fatal(err)
			}
			ref := reference(t, c.enc)
			compared, bad := 0, 0
			for _, s := range texts {
				if strings.Contains(s, "<|endoftext|>") || !sameSplit(c.pat, s) {
					continue
				}
				compared++
				ids, _, _ := ref.Encode(s)
				want := make([]uint32, len(ids))
				for i, id := range ids {
					want[i] = uint32(id)
				}
				if got := tok.Encode(s, nil); !slices.Equal(got, want) {
					if bad++; bad <= 3 {
						t.Errorf("%q:\n got %v\nwant %v", clip(s), got, want)
					}
				}
			}
			if compared < len(texts)/2 {
				t.Errorf("only %d of %d texts compared", compared, len(texts))
			}
			// The added token is one token wherever it appears.
			base := mustLoad(t, c.enc)
			n := tok.Count("a<|endoftext|>b")
			if want := base.Count("a") + 1 + base.Count("b"); n != want {
				t.Errorf("added token: %d tokens, want %d", n, want)
			}
		})
	}
}

func TestTokenizerJSONErrors(t *testing.T) {
	cases := []struct{ json, want string }{
		{`{"model":{"type":"WordPiece","vocab":{"a":0}}}`, "only BPE"},
		{`{"pre_tokenizer":{"type":"Whitespace"},"model":{"type":"BPE","vocab":{"a":0},"merges":[]}}`, "Whitespace"},
		{`{"pre_tokenizer":{"type":"ByteLevel"},"model":{"type":"BPE","vocab":{"a":0},"merges":[]}}`, "no token for byte"},
		{`{"pre_tokenizer":{"type":"Sequence","pretokenizers":[{"type":"Split","pattern":{"Regex":"\\w+"}},{"type":"ByteLevel","use_regex":false}]},"model":{"type":"BPE","vocab":{"a":0},"merges":[]}}`, "not one of the supported patterns"},
		{`{"model":{"type":"BPE","dropout":0.1,"vocab":{"a":0}}}`, "dropout"},
		{`not json`, "not a tokenizer.json"},
	}
	for _, c := range cases {
		_, err := parseTokenizerJSON([]byte(c.json))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.json, err, c.want)
		}
	}
	// Unknown merge tokens name the merge.
	toRune, _ := byteLevelAlphabet()
	vocab := map[string]int{}
	for b := 0; b < 256; b++ {
		vocab[string(toRune[b])] = b
	}
	doc, _ := json.Marshal(map[string]any{"pre_tokenizer": map[string]any{"type": "ByteLevel"},
		"model": map[string]any{"type": "BPE", "vocab": vocab, "merges": []string{"a b"}}})
	if _, err := parseTokenizerJSON(doc); err == nil || !strings.Contains(err.Error(), "merges[0]") {
		t.Errorf("unknown merge: %v", err)
	}
}
