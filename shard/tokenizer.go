// Package shard counts tokens, mixes sources to target shares and writes
// the run's output shards (zstd JSONL, optionally flat token-id files).
// It never parses a spec: package stages reads the output section and
// hands the values to Options.
package shard

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"winnow/stages/suggest"

	"github.com/tiktoken-go/tokenizer"
)

// Tokenizer counts and encodes text with a byte-level BPE vocabulary: one
// of the tiktoken encodings embedded in github.com/tiktoken-go/tokenizer
// (no download at run time) or a tokenizer.json file. It is safe for
// concurrent use; results never depend on the cache or on other calls.
type Tokenizer struct {
	name      string
	split     splitter
	enc       *bpe
	cache     *pieceCache
	vocabSize int
	// tokenizer.json extras (zero for tiktoken encodings).
	added       *addedTokens
	normalize   func(string) string
	prefixSpace bool
}

// Name returns the encoding name ("cl100k_base") or the file path.
func (t *Tokenizer) Name() string { return t.name }

// VocabSize returns one more than the largest token id the tokenizer can
// emit for text: token-id files use uint16 when it is at most 65536.
func (t *Tokenizer) VocabSize() int { return t.vocabSize }

// Count returns the number of tokens of text. It allocates nothing for
// pieces found in the cache.
func (t *Tokenizer) Count(text string) int {
	n := 0
	t.each(text, func(seg string, special int) {
		if special >= 0 {
			n++
			return
		}
		n += t.countSegment(seg)
	})
	return n
}

// Encode appends the token ids of text to dst.
func (t *Tokenizer) Encode(text string, dst []uint32) []uint32 {
	t.each(text, func(seg string, special int) {
		if special >= 0 {
			dst = append(dst, uint32(special))
			return
		}
		dst = t.encodeSegment(seg, dst)
	})
	return dst
}

// each cuts text into ordinary segments (special = -1) and added tokens
// of a tokenizer.json (special = the token id), after replacing invalid
// UTF-8.
func (t *Tokenizer) each(text string, f func(seg string, special int)) {
	text = sanitizeUTF8(text)
	if t.added == nil {
		f(t.prepare(text), -1)
		return
	}
	t.added.split(text, func(seg string, id int) {
		if id >= 0 {
			f("", id)
			return
		}
		f(t.prepare(seg), -1)
	})
}

// prepare applies a tokenizer.json's normalizer and prefix space.
func (t *Tokenizer) prepare(seg string) string {
	if t.normalize != nil {
		seg = t.normalize(seg)
	}
	if t.prefixSpace && seg != "" && seg[0] != ' ' {
		seg = " " + seg
	}
	return seg
}

func (t *Tokenizer) countSegment(s string) int {
	n := 0
	var buf [64]uint32
	for i := 0; i < len(s); {
		st, e := t.split.next(s, i)
		if st == e {
			break
		}
		i = e
		piece := s[st:e]
		if len(piece) == 1 {
			n++
			continue
		}
		if len(piece) <= cacheMaxPiece {
			if ids := t.cache.get(piece); ids != nil {
				n += len(ids)
				continue
			}
			ids := t.enc.encode(piece, buf[:0])
			t.cache.put(piece, ids)
			n += len(ids)
			continue
		}
		n += len(t.enc.encode(piece, buf[:0]))
	}
	return n
}

func (t *Tokenizer) encodeSegment(s string, dst []uint32) []uint32 {
	for i := 0; i < len(s); {
		st, e := t.split.next(s, i)
		if st == e {
			break
		}
		i = e
		piece := s[st:e]
		if len(piece) > 1 && len(piece) <= cacheMaxPiece {
			if ids := t.cache.get(piece); ids != nil {
				dst = append(dst, ids...)
				continue
			}
			k := len(dst)
			dst = t.enc.encode(piece, dst)
			t.cache.put(piece, dst[k:])
			continue
		}
		dst = t.enc.encode(piece, dst)
	}
	return dst
}

// countNoCache counts without the piece cache (tests compare both paths).
func (t *Tokenizer) countNoCache(text string) int {
	n := 0
	t.each(text, func(seg string, special int) {
		if special >= 0 {
			n++
			return
		}
		for i := 0; i < len(seg); {
			st, e := t.split.next(seg, i)
			if st == e {
				break
			}
			i = e
			n += len(t.enc.encode(seg[st:e], nil))
		}
	})
	return n
}

// encodingPatterns gives the split pattern of each embedded encoding.
var encodingPatterns = map[string]splitter{
	"cl100k_base": {pat: patCL100k, digits: 3, reference: true},
	"o200k_base":  {pat: patO200k, digits: 3, reference: true},
	"r50k_base":   {pat: patGPT2, reference: true},
	"p50k_base":   {pat: patGPT2, reference: true},
	"p50k_edit":   {pat: patGPT2, reference: true},
}

// encodingAliases maps other accepted names to an embedded encoding.
var encodingAliases = map[string]string{"gpt2": "r50k_base"}

// Encodings lists the names of the embedded encodings.
func Encodings() []string {
	return sortedKeys(encodingPatterns)
}

var (
	loadedMu sync.Mutex
	loaded   = map[string]*loadResult{}
)

type loadResult struct {
	once sync.Once
	tok  *Tokenizer
	err  error
}

// Load returns the tokenizer named by spec: an embedded encoding name
// (cl100k_base, o200k_base, r50k_base, p50k_base, p50k_edit, gpt2), a model
// name the reference library maps to one (gpt-4o, gpt-4, ...), or the path
// of a tokenizer.json (relative paths are resolved against baseDir).
// Tokenizers are built once per process and shared.
func Load(spec, baseDir string) (*Tokenizer, error) {
	key, build := resolve(spec, baseDir)
	if build == nil {
		msg := fmt.Sprintf("tokenizer %q: not an encoding (%s), a model name or a tokenizer.json path", spec, strings.Join(Encodings(), ", "))
		for _, e := range Encodings() {
			if suggest.EditDistance(spec, e) <= 2 {
				msg += fmt.Sprintf(" (did you mean %q?)", e)
				break
			}
		}
		return nil, errors.New(msg)
	}
	loadedMu.Lock()
	r, ok := loaded[key]
	if !ok {
		r = &loadResult{}
		loaded[key] = r
	}
	loadedMu.Unlock()
	r.once.Do(func() { r.tok, r.err = build() })
	return r.tok, r.err
}

// IsEncoding reports whether spec names an encoding embedded in the
// binary (directly or by a model name), not a tokenizer.json file.
func IsEncoding(spec string) bool {
	key, build := resolve(spec, "")
	return build != nil && strings.HasPrefix(key, "enc:")
}

// resolve decides what spec names and returns a cache key and a builder.
func resolve(spec, baseDir string) (string, func() (*Tokenizer, error)) {
	if a, ok := encodingAliases[spec]; ok {
		spec = a
	}
	if _, ok := encodingPatterns[spec]; ok {
		return "enc:" + spec, func() (*Tokenizer, error) { return loadEncoding(spec) }
	}
	if strings.HasSuffix(spec, ".json") || strings.ContainsRune(spec, filepath.Separator) || strings.ContainsRune(spec, '/') {
		path := spec
		if !filepath.IsAbs(path) && baseDir != "" {
			path = filepath.Join(baseDir, path)
		}
		if abs, err := filepath.Abs(path); err == nil {
			path = abs
		}
		return "file:" + path, func() (*Tokenizer, error) {
			data, err := os.ReadFile(path)
			if err != nil {
				return nil, fmt.Errorf("tokenizer: %w", err)
			}
			t, err := parseTokenizerJSON(data)
			if err != nil {
				return nil, fmt.Errorf("tokenizer %s: %w", path, err)
			}
			t.name = spec
			return t, nil
		}
	}
	if c, err := tokenizer.ForModel(tokenizer.Model(spec)); err == nil {
		name := c.GetName()
		if _, ok := encodingPatterns[name]; ok {
			return "enc:" + name, func() (*Tokenizer, error) { return loadEncoding(name) }
		}
	}
	return "", nil
}

// loadEncoding builds our encoder from the reference library's vocabulary,
// read through its public Decode: the bytes of every token id.
func loadEncoding(name string) (*Tokenizer, error) {
	ref, err := tokenizer.Get(tokenizer.Encoding(name))
	if err != nil {
		return nil, fmt.Errorf("tokenizer %s: %w", name, err)
	}
	ref.SetErrorMode(tokenizer.ErrorModeNone)
	// gapLimit ends the scan of ids: the vocabularies are dense, so this
	// many unknown ids in a row means the end.
	const gapLimit = 4096
	var tokens []string
	one := make([]uint, 1)
	for id, gap := 0, 0; gap < gapLimit; id++ {
		one[0] = uint(id)
		s, err := ref.Decode(one)
		if err != nil || s == "" {
			gap++
			tokens = append(tokens, "")
			continue
		}
		gap = 0
		tokens = append(tokens, s)
	}
	for len(tokens) > 0 && tokens[len(tokens)-1] == "" {
		tokens = tokens[:len(tokens)-1]
	}
	enc, err := bpeFromRanks(tokens)
	if err != nil {
		return nil, fmt.Errorf("tokenizer %s: %w", name, err)
	}
	return &Tokenizer{name: name, split: encodingPatterns[name], enc: enc, cache: newPieceCache(), vocabSize: len(tokens)}, nil
}

// bpeFromRanks builds a tiktoken-style encoder: tokens[id] are the bytes
// of token id, and a pair merges into the token spelled by its
// concatenation, with that token's id as the rank.
func bpeFromRanks(tokens []string) (*bpe, error) {
	e := &bpe{whole: make(map[string]uint32, len(tokens)), wholeFirst: true}
	for id, s := range tokens {
		if s != "" {
			e.whole[s] = uint32(id)
		}
	}
	for b := 0; b < 256; b++ {
		id, ok := e.whole[string([]byte{byte(b)})]
		if !ok {
			return nil, fmt.Errorf("vocabulary has no token for byte 0x%02x", b)
		}
		e.byteTok[b] = id
	}
	e.pairs = make(map[uint64]uint64, len(tokens)*2)
	for id, s := range tokens {
		for k := 1; k < len(s); k++ {
			a, ok1 := e.whole[s[:k]]
			b, ok2 := e.whole[s[k:]]
			if ok1 && ok2 {
				e.pairs[uint64(a)<<32|uint64(b)] = uint64(id)<<32 | uint64(id)
			}
		}
	}
	return e, nil
}
