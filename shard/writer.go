package shard

// Output formats (copied into README "Output shards"):
//
// Shards: OUT/shards/<name>-00000.jsonl.zst, numbered from 00000 in output
// order. Each is one zstd frame stream of UTF-8 JSON lines, one document
// per line, keys in this order:
//
//	{"id":ID,"text":TEXT,"source":SOURCE,"tokens":N,<meta keys, sorted>}
//
// "tokens" is the count of the configured tokenizer (0 without one). Meta
// keys are the document's meta values (language, scores...) filtered by
// output.meta_keys (default: all); a meta key named like a fixed key is
// never written. A document longer than the split limit, or one cut at a
// shard boundary, appears as several lines whose ids are ID#1, ID#2...
// (split before mixing) or ID~1, ID~2 (cut at a shard boundary); its text
// pieces concatenate back to the original text, and the ledger holds one
// "edit" record per split document naming the pieces. A document repeated
// by up-sampling (max_epochs > 1) appears again with the same id.
//
// With a tokenizer each shard holds shard_tokens tokens within ±1% (the
// last may be smaller): a shard ends at the document boundary nearest to
// each multiple of shard_tokens when one lies within 0.5%, else inside the
// document that straddles it, at a paragraph (else line, else word)
// boundary. Without a mix, documents keep input order. With a mix,
// documents longer than split_tokens (default shard_tokens/100) are split
// first, sources are interleaved, and each shard's per-source token share
// is within ±2 percentage points of the target. Without a tokenizer shards
// are cut after the line that reaches shard_bytes uncompressed bytes.
//
// Token files (output.token_files: true), per shard:
//
//	OUT/shards/<name>-00000.tokens.bin   flat little-endian token ids of
//	    the shard's documents in line order, no separators; uint16 when
//	    the tokenizer's vocabulary has at most 65536 ids, else uint32.
//	OUT/shards/<name>-00000.tokens.json  index:
//	    {"format":"winnow-tokens-1","tokenizer":NAME,"dtype":"uint16"|"uint32",
//	     "vocab_size":V,"docs":D,"tokens":T,"bin":"<name>-00000.tokens.bin",
//	     "bin_xxh3":HEX,"ids":[ID...],"offsets":[0,...,T]}
//	    Document i's tokens are entries offsets[i] to offsets[i+1]
//	    (exclusive) of the .bin file, counted in tokens, not bytes;
//	    offsets has D+1 entries.
//
// The manifest lists every shard with its docs, tokens, compressed bytes,
// xxh3-64 of the compressed bytes, per-source tokens and its token file.

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"path/filepath"
	"sort"

	"winnow/stages/fsio"
)

// TokenFile describes a shard's token-id file in the manifest.
type TokenFile struct {
	Path  string `json:"path"`
	Index string `json:"index"`
	Dtype string `json:"dtype"`
	Bytes int64  `json:"bytes"`
	XXH3  string `json:"xxh3"`
}

// File describes one written shard.
type File struct {
	Path         string           `json:"path"`
	Docs         int64            `json:"docs"`
	Tokens       int64            `json:"tokens"`
	Bytes        int64            `json:"bytes"`
	XXH3         string           `json:"xxh3"`
	SourceTokens map[string]int64 `json:"source_tokens,omitempty"`
	SourceDocs   map[string]int64 `json:"source_docs,omitempty"`
	TokenFile    *TokenFile       `json:"token_file,omitempty"`
}

// shardWriter writes the numbered shards of a run one after the other.
type shardWriter struct {
	dir, name string
	runDir    string // paths in reports are relative to it
	tok       *Tokenizer
	tokens    bool // also write token files
	wide      bool // uint32 ids

	cur *fsio.ZstdWriter
	// textBytes sums the text bytes of every line written.
	textBytes int64
	bin       *fsio.AtomicFile
	file      File
	ids       []string
	offsets   []int64
	idBuf     []uint32
	binBuf    []byte
	files     []File
}

func newShardWriter(dir, name string, tok *Tokenizer, tokenFiles bool) *shardWriter {
	w := &shardWriter{dir: dir, name: name, runDir: filepath.Dir(dir), tok: tok, tokens: tokenFiles && tok != nil}
	if tok != nil && tok.VocabSize() > 1<<16 {
		w.wide = true
	}
	return w
}

func (w *shardWriter) base() string { return fmt.Sprintf("%s-%05d", w.name, len(w.files)) }

func (w *shardWriter) rel(path string) string {
	r, err := filepath.Rel(w.runDir, path)
	if err != nil {
		return filepath.ToSlash(path)
	}
	return filepath.ToSlash(r)
}

func (w *shardWriter) open() error {
	if w.cur != nil {
		return nil
	}
	z, err := fsio.CreateZstd(filepath.Join(w.dir, w.base()+".jsonl.zst"))
	if err != nil {
		return fmt.Errorf("output shard: %w", err)
	}
	w.cur = z
	w.file = File{SourceTokens: map[string]int64{}, SourceDocs: map[string]int64{}}
	if w.tokens {
		b, err := fsio.CreateAtomic(filepath.Join(w.dir, w.base()+".tokens.bin"))
		if err != nil {
			z.Abort()
			w.cur = nil
			return fmt.Errorf("output token file: %w", err)
		}
		w.bin = b
		w.ids, w.offsets = w.ids[:0], append(w.offsets[:0], 0)
	}
	return nil
}

// write adds one finished line (as jsonl.AppendDocLine builds it) with its id,
// source, token count and text (the text is needed for token files only).
func (w *shardWriter) write(line []byte, id, source, text string, tokens int) error {
	if err := w.open(); err != nil {
		return err
	}
	if _, err := w.cur.Write(line); err != nil {
		return fmt.Errorf("output shard %s: %w", w.cur.Path(), err)
	}
	w.file.Docs++
	w.textBytes += int64(len(text))
	w.file.Tokens += int64(tokens)
	w.file.SourceTokens[source] += int64(tokens)
	w.file.SourceDocs[source]++
	if w.bin != nil {
		w.idBuf = w.tok.Encode(text, w.idBuf[:0])
		w.binBuf = w.binBuf[:0]
		for _, id := range w.idBuf {
			if w.wide {
				w.binBuf = binary.LittleEndian.AppendUint32(w.binBuf, id)
			} else {
				w.binBuf = binary.LittleEndian.AppendUint16(w.binBuf, uint16(id))
			}
		}
		if _, err := w.bin.Write(w.binBuf); err != nil {
			return fmt.Errorf("output token file: %w", err)
		}
		w.ids = append(w.ids, id)
		w.offsets = append(w.offsets, w.offsets[len(w.offsets)-1]+int64(len(w.idBuf)))
	}
	return nil
}

// rawBytes returns the uncompressed bytes of the open shard.
func (w *shardWriter) rawBytes() int64 {
	if w.cur == nil {
		return 0
	}
	return w.cur.RawBytes()
}

// tokenIndex is the JSON index written beside a token file.
type tokenIndex struct {
	Format    string   `json:"format"`
	Tokenizer string   `json:"tokenizer"`
	Dtype     string   `json:"dtype"`
	VocabSize int      `json:"vocab_size"`
	Docs      int      `json:"docs"`
	Tokens    int64    `json:"tokens"`
	Bin       string   `json:"bin"`
	BinXXH3   string   `json:"bin_xxh3"`
	IDs       []string `json:"ids"`
	Offsets   []int64  `json:"offsets"`
}

// finish commits the open shard (and its token file) and records it.
func (w *shardWriter) finish() error {
	if w.cur == nil {
		return nil
	}
	base := w.base()
	if err := w.cur.Commit(); err != nil {
		path := w.cur.Path()
		w.cur = nil
		w.abort()
		return fmt.Errorf("output shard %s: %w", path, err)
	}
	w.file.Path = w.rel(w.cur.Path())
	w.file.Bytes = w.cur.Size()
	w.file.XXH3 = w.cur.Digest()
	w.cur = nil
	if w.bin != nil {
		dtype := "uint16"
		if w.wide {
			dtype = "uint32"
		}
		binPath := w.bin.Path()
		if err := w.bin.Commit(); err != nil {
			w.bin = nil
			return fmt.Errorf("output token file %s: %w", binPath, err)
		}
		idx := tokenIndex{Format: "winnow-tokens-1", Tokenizer: w.tok.Name(), Dtype: dtype, VocabSize: w.tok.VocabSize(),
			Docs: len(w.ids), Tokens: w.offsets[len(w.offsets)-1], Bin: filepath.Base(binPath), BinXXH3: w.bin.Digest(),
			IDs: w.ids, Offsets: w.offsets}
		data, err := json.Marshal(idx)
		if err != nil {
			return err
		}
		idxPath := filepath.Join(w.dir, base+".tokens.json")
		if err := fsio.WriteFileAtomic(idxPath, append(data, '\n')); err != nil {
			return fmt.Errorf("output token index: %w", err)
		}
		w.file.TokenFile = &TokenFile{Path: w.rel(binPath), Index: w.rel(idxPath), Dtype: dtype, Bytes: w.bin.Size(), XXH3: w.bin.Digest()}
		w.bin = nil
		w.ids = nil
		w.offsets = nil
	}
	w.files = append(w.files, w.file)
	return nil
}

// abort removes unfinished files.
func (w *shardWriter) abort() {
	if w.cur != nil {
		w.cur.Abort()
		w.cur = nil
	}
	if w.bin != nil {
		w.bin.Abort()
		w.bin = nil
	}
}

// sortedKeys returns m's keys in order.
func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
