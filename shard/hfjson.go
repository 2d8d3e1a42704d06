package shard

import (
	"encoding/json"
	"fmt"
	"sort"
	"strings"
	"unicode"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

// This file loads byte-level BPE tokenizers from the common tokenizer.json
// format: model.vocab (token -> id, tokens spelled in the byte-to-letter
// alphabet of byte-level BPE, where a space is "Ġ"), model.merges (one pair
// per line, in priority order, as "a b" or ["a","b"]), a ByteLevel
// pre-tokenizer (alone, or after a Split with one of the known patterns),
// an optional Unicode normalizer and added tokens matched literally.
//
// Not implemented (loading fails with a message naming the field):
// non-BPE models, BPE dropout, byte fallback, continuing-subword prefixes
// and end-of-word suffixes, split patterns other than the GPT-2, cl100k
// (three- or one-digit numbers) and o200k ones, and normalizers other than
// NFC/NFD/NFKC/NFKD/Lowercase. Added tokens are matched in the raw text
// (before normalization) whatever their "normalized" flag.

// Known split patterns of tokenizer.json files.
var knownSplitPatterns = map[string]splitter{
	`'s|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+`:                                          {pat: patGPT2},
	`(?i:'s|'t|'re|'ve|'m|'ll|'d)|[^\r\n\p{L}\p{N}]?\p{L}+|\p{N}{1,3}| ?[^\s\p{L}\p{N}]+[\r\n]*|\s*[\r\n]+|\s+(?!\S)|\s+`: {pat: patCL100k, digits: 3},
	`(?i:'s|'t|'re|'ve|'m|'ll|'d)|[^\r\n\p{L}\p{N}]?\p{L}+|\p{N}| ?[^\s\p{L}\p{N}]+[\r\n]*|\s*[\r\n]+|\s+(?!\S)|\s+`:      {pat: patCL100k, digits: 1},
	`[^\r\n\p{L}\p{N}]?[\p{Lu}\p{Lt}\p{Lm}\p{Lo}\p{M}]*[\p{Ll}\p{Lm}\p{Lo}\p{M}]+(?i:'s|'t|'re|'ve|'m|'ll|'d)?|[^\r\n\p{L}\p{N}]?[\p{Lu}\p{Lt}\p{Lm}\p{Lo}\p{M}]+[\p{Ll}\p{Lm}\p{Lo}\p{M}]*(?i:'s|'t|'re|'ve|'m|'ll|'d)?|\p{N}{1,3}| ?[^\s\p{L}\p{N}]+[\r\n/]*|\s*[\r\n]+|\s+(?!\S)|\s+`: {pat: patO200k, digits: 3},
}

// byteLevelAlphabet returns the byte-to-letter map of byte-level BPE:
// printable Latin-1 bytes stand for themselves, the others for U+0100
// onwards in byte order.
func byteLevelAlphabet() (toRune [256]rune, toByte map[rune]byte) {
	toByte = make(map[rune]byte, 256)
	n := 0
	for b := 0; b < 256; b++ {
		if (b >= '!' && b <= '~') || (b >= 0xA1 && b <= 0xAC) || (b >= 0xAE && b <= 0xFF) {
			toRune[b] = rune(b)
		} else {
			toRune[b] = rune(256 + n)
			n++
		}
		toByte[toRune[b]] = byte(b)
	}
	return toRune, toByte
}

type hfFile struct {
	AddedTokens []struct {
		ID         int    `json:"id"`
		Content    string `json:"content"`
		SingleWord bool   `json:"single_word"`
		LStrip     bool   `json:"lstrip"`
		RStrip     bool   `json:"rstrip"`
	} `json:"added_tokens"`
	Normalizer   json.RawMessage `json:"normalizer"`
	PreTokenizer json.RawMessage `json:"pre_tokenizer"`
	Model        struct {
		Type                    string            `json:"type"`
		Dropout                 *float64          `json:"dropout"`
		ByteFallback            bool              `json:"byte_fallback"`
		ContinuingSubwordPrefix *string           `json:"continuing_subword_prefix"`
		EndOfWordSuffix         *string           `json:"end_of_word_suffix"`
		IgnoreMerges            bool              `json:"ignore_merges"`
		Vocab                   map[string]int    `json:"vocab"`
		Merges                  []json.RawMessage `json:"merges"`
	} `json:"model"`
}

type hfComponent struct {
	Type           string          `json:"type"`
	AddPrefixSpace bool            `json:"add_prefix_space"`
	UseRegex       *bool           `json:"use_regex"`
	Pattern        json.RawMessage `json:"pattern"`
	Behavior       string          `json:"behavior"`
	Invert         bool            `json:"invert"`
	Pretokenizers  []hfComponent   `json:"pretokenizers"`
	Normalizers    []hfComponent   `json:"normalizers"`
}

// parseTokenizerJSON builds a Tokenizer from the bytes of a tokenizer.json.
func parseTokenizerJSON(data []byte) (*Tokenizer, error) {
	var f hfFile
	if err := json.Unmarshal(data, &f); err != nil {
		return nil, fmt.Errorf("not a tokenizer.json: %w", err)
	}
	m := &f.Model
	if m.Type != "BPE" && !(m.Type == "" && len(m.Merges) > 0) {
		return nil, fmt.Errorf("model.type %q: only BPE is supported", m.Type)
	}
	if m.Dropout != nil && *m.Dropout != 0 {
		return nil, fmt.Errorf("model.dropout %v: BPE dropout is not supported", *m.Dropout)
	}
	if m.ByteFallback {
		return nil, fmt.Errorf("model.byte_fallback: not supported (byte-level BPE needs none)")
	}
	if m.ContinuingSubwordPrefix != nil && *m.ContinuingSubwordPrefix != "" {
		return nil, fmt.Errorf("model.continuing_subword_prefix %q: not supported", *m.ContinuingSubwordPrefix)
	}
	if m.EndOfWordSuffix != nil && *m.EndOfWordSuffix != "" {
		return nil, fmt.Errorf("model.end_of_word_suffix %q: not supported", *m.EndOfWordSuffix)
	}
	if len(m.Vocab) == 0 {
		return nil, fmt.Errorf("model.vocab is empty")
	}
	t := &Tokenizer{cache: newPieceCache()}
	var err error
	if t.split, t.prefixSpace, err = hfPreTokenizer(f.PreTokenizer); err != nil {
		return nil, err
	}
	if t.normalize, err = hfNormalizer(f.Normalizer); err != nil {
		return nil, err
	}
	_, toByte := byteLevelAlphabet()
	e := &bpe{whole: make(map[string]uint32, len(m.Vocab)), wholeFirst: m.IgnoreMerges}
	spelled := make(map[string]uint32, len(m.Vocab))
	maxID := -1
	for tok, id := range m.Vocab {
		if id < 0 || id >= 1<<31 {
			return nil, fmt.Errorf("model.vocab[%q]: id %d out of range", tok, id)
		}
		spelled[tok] = uint32(id)
		raw, ok := fromByteLevel(tok, toByte)
		if !ok {
			continue // not producible by byte-level BPE (e.g. an added token's spelling)
		}
		e.whole[raw] = uint32(id)
		maxID = max(maxID, id)
	}
	for b := 0; b < 256; b++ {
		id, ok := e.whole[string([]byte{byte(b)})]
		if !ok {
			return nil, fmt.Errorf("model.vocab has no token for byte 0x%02x: not a byte-level vocabulary", b)
		}
		e.byteTok[b] = id
	}
	e.pairs = make(map[uint64]uint64, len(m.Merges))
	for rank, raw := range m.Merges {
		a, b, err := mergePair(raw)
		if err != nil {
			return nil, fmt.Errorf("model.merges[%d]: %w", rank, err)
		}
		ia, ok1 := spelled[a]
		ib, ok2 := spelled[b]
		im, ok3 := spelled[a+b]
		if !ok1 || !ok2 || !ok3 {
			return nil, fmt.Errorf("model.merges[%d] %q %q: token not in model.vocab", rank, a, b)
		}
		key := uint64(ia)<<32 | uint64(ib)
		if _, dup := e.pairs[key]; !dup {
			e.pairs[key] = uint64(rank)<<32 | uint64(im)
		}
	}
	t.enc = e
	if len(f.AddedTokens) > 0 {
		at := &addedTokens{}
		for _, a := range f.AddedTokens {
			if a.Content == "" {
				continue
			}
			at.toks = append(at.toks, addedToken{content: a.Content, id: a.ID, lstrip: a.LStrip, rstrip: a.RStrip, singleWord: a.SingleWord})
			at.first[a.Content[0]] = true
			maxID = max(maxID, a.ID)
		}
		// Longest first, so the longest token wins at a position.
		sort.SliceStable(at.toks, func(i, j int) bool { return len(at.toks[i].content) > len(at.toks[j].content) })
		if len(at.toks) > 0 {
			t.added = at
		}
	}
	t.vocabSize = maxID + 1
	return t, nil
}

func fromByteLevel(tok string, toByte map[rune]byte) (string, bool) {
	b := make([]byte, 0, len(tok))
	for _, r := range tok {
		c, ok := toByte[r]
		if !ok {
			return "", false
		}
		b = append(b, c)
	}
	return string(b), true
}

func mergePair(raw json.RawMessage) (string, string, error) {
	var s string
	if err := json.Unmarshal(raw, &s); err == nil {
		a, b, ok := strings.Cut(s, " ")
		if !ok || a == "" || b == "" || strings.Contains(b, " ") {
			return "", "", fmt.Errorf("%q is not two tokens separated by one space", s)
		}
		return a, b, nil
	}
	var pair []string
	if err := json.Unmarshal(raw, &pair); err != nil || len(pair) != 2 {
		return "", "", fmt.Errorf("want \"a b\" or [\"a\", \"b\"], got %s", raw)
	}
	return pair[0], pair[1], nil
}

// hfPreTokenizer accepts ByteLevel (its own GPT-2 split unless use_regex
// is false) or a Sequence of a Split with a known pattern and a ByteLevel
// without regex.
func hfPreTokenizer(raw json.RawMessage) (splitter, bool, error) {
	if len(raw) == 0 || string(raw) == "null" {
		return splitter{}, false, fmt.Errorf("pre_tokenizer is null: only byte-level pre-tokenizers are supported")
	}
	var c hfComponent
	if err := json.Unmarshal(raw, &c); err != nil {
		return splitter{}, false, fmt.Errorf("pre_tokenizer: %w", err)
	}
	list := []hfComponent{c}
	if c.Type == "Sequence" {
		list = c.Pretokenizers
	}
	var sp *splitter
	prefix, byteLevel := false, false
	for i, p := range list {
		switch p.Type {
		case "ByteLevel":
			byteLevel = true
			prefix = p.AddPrefixSpace
			if p.UseRegex == nil || *p.UseRegex {
				if sp != nil {
					return splitter{}, false, fmt.Errorf("pre_tokenizer[%d]: ByteLevel with use_regex after a Split is not supported", i)
				}
				sp = &splitter{pat: patGPT2}
			}
		case "Split":
			if sp != nil {
				return splitter{}, false, fmt.Errorf("pre_tokenizer[%d]: more than one split is not supported", i)
			}
			var pat struct {
				Regex  *string `json:"Regex"`
				String *string `json:"String"`
			}
			if err := json.Unmarshal(p.Pattern, &pat); err != nil || pat.Regex == nil {
				return splitter{}, false, fmt.Errorf("pre_tokenizer[%d]: Split without a Regex pattern is not supported", i)
			}
			known, ok := knownSplitPatterns[*pat.Regex]
			if !ok {
				return splitter{}, false, fmt.Errorf("pre_tokenizer[%d]: Split pattern %q is not one of the supported patterns (GPT-2, cl100k, o200k)", i, *pat.Regex)
			}
			if p.Invert || (p.Behavior != "" && p.Behavior != "Isolated") {
				return splitter{}, false, fmt.Errorf("pre_tokenizer[%d]: Split behavior %q invert=%v is not supported", i, p.Behavior, p.Invert)
			}
			sp = &known
		default:
			return splitter{}, false, fmt.Errorf("pre_tokenizer type %q is not supported", p.Type)
		}
	}
	if !byteLevel {
		return splitter{}, false, fmt.Errorf("pre_tokenizer has no ByteLevel step: only byte-level BPE is supported")
	}
	if sp == nil {
		return splitter{pat: patWhole}, prefix, nil
	}
	return *sp, prefix, nil
}

func hfNormalizer(raw json.RawMessage) (func(string) string, error) {
	if len(raw) == 0 || string(raw) == "null" {
		return nil, nil
	}
	var c hfComponent
	if err := json.Unmarshal(raw, &c); err != nil {
		return nil, fmt.Errorf("normalizer: %w", err)
	}
	list := []hfComponent{c}
	if c.Type == "Sequence" {
		list = c.Normalizers
	}
	var fs []func(string) string
	for _, n := range list {
		switch n.Type {
		case "NFC":
			fs = append(fs, norm.NFC.String)
		case "NFD":
			fs = append(fs, norm.NFD.String)
		case "NFKC":
			fs = append(fs, norm.NFKC.String)
		case "NFKD":
			fs = append(fs, norm.NFKD.String)
		case "Lowercase":
			fs = append(fs, strings.ToLower)
		default:
			return nil, fmt.Errorf("normalizer type %q is not supported", n.Type)
		}
	}
	if len(fs) == 0 {
		return nil, nil
	}
	return func(s string) string {
		for _, f := range fs {
			s = f(s)
		}
		return s
	}, nil
}

type addedToken struct {
	content                    string
	id                         int
	lstrip, rstrip, singleWord bool
}

// addedTokens finds a tokenizer.json's added tokens in text: at each
// position the longest token that matches wins; lstrip/rstrip extend the
// match over neighbouring whitespace and single_word requires that no
// word character touches it.
type addedTokens struct {
	toks  []addedToken
	first [256]bool
}

func isWordRune(r rune) bool { return r == '_' || unicode.IsLetter(r) || unicode.IsDigit(r) }

// split calls f with ordinary segments (id -1) and matched tokens.
func (a *addedTokens) split(s string, f func(seg string, id int)) {
	segStart := 0
	for i := 0; i < len(s); {
		if !a.first[s[i]] {
			i++
			continue
		}
		matched := false
		for _, t := range a.toks {
			if !strings.HasPrefix(s[i:], t.content) {
				continue
			}
			end := i + len(t.content)
			if t.singleWord {
				if r, _ := utf8.DecodeLastRuneInString(s[:i]); i > 0 && isWordRune(r) {
					continue
				}
				if r, _ := utf8.DecodeRuneInString(s[end:]); end < len(s) && isWordRune(r) {
					continue
				}
			}
			start := i
			if t.lstrip {
				for start > segStart {
					r, n := utf8.DecodeLastRuneInString(s[:start])
					if !unicode.IsSpace(r) {
						break
					}
					start -= n
				}
			}
			if t.rstrip {
				for end < len(s) {
					r, n := utf8.DecodeRuneInString(s[end:])
					if !unicode.IsSpace(r) {
						break
					}
					end += n
				}
			}
			if start > segStart {
				f(s[segStart:start], -1)
			}
			f("", t.id)
			segStart, i, matched = end, end, true
			break
		}
		if !matched {
			i++
		}
	}
	if segStart < len(s) {
		f(s[segStart:], -1)
	}
}
