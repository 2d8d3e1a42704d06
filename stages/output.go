package stages

import (
	"fmt"
	"path/filepath"
	"sort"

	"winnow/stages/fsio"
)

// OutputFile describes one written output shard in the manifest.
type OutputFile struct {
	Path   string           `json:"path"`
	Docs   int64            `json:"docs"`
	Tokens int64            `json:"tokens"`
	Bytes  int64            `json:"bytes"`
	XXH3   string           `json:"xxh3"`
	Source map[string]int64 `json:"source_tokens,omitempty"`
}

// OutputReport is what a sink tells the manifest when it closes.
type OutputReport struct {
	Files []OutputFile `json:"files"`
	// Mix describes per-source availability and use (tokens available,
	// used, epochs); nil when no mix was configured.
	Mix any `json:"mix,omitempty"`
	// Edits are ledger records the sink produced (e.g. split documents).
	Edits []LedgerRecord `json:"-"`
}

// Sink receives the documents that survived every stage, in input order,
// on one goroutine.
type Sink interface {
	Add(d *Doc) error
	// Close finishes all shards and reports them.
	Close() (*OutputReport, error)
	// Abort removes unfinished files.
	Abort()
}

// OpenSink builds the sink for a run from the spec's "output" section
// (the "dir" key is read by the spec loader and marked known). name is the
// spec's name, used as the shard file prefix; shards go to
// env.RunDir/shards/.
func OpenSink(p *Params, env Env, name string) (Sink, error) {
	shardBytes := p.Int("shard_bytes", 256<<20, 1<<10, 1<<40)
	if err := p.Done(); err != nil {
		return nil, err
	}
	return NewPlainSink(filepath.Join(env.RunDir, "shards"), name, shardBytes), nil
}

// PlainSink writes zstd JSONL shards of at most shardBytes uncompressed
// bytes each, named <name>-00000.jsonl.zst, one line per document:
// {"id","text","source","tokens",<meta keys sorted>}.
type PlainSink struct {
	dir        string
	name       string
	shardBytes int64
	cur        *fsio.ZstdWriter
	curDocs    int64
	curTokens  int64
	files      []OutputFile
	buf        jsonBuf
}

// NewPlainSink prepares shards under dir.
func NewPlainSink(dir, name string, shardBytes int64) *PlainSink {
	return &PlainSink{dir: dir, name: name, shardBytes: shardBytes}
}

// AppendDocJSON appends d as one shard line.
func AppendDocJSON(b []byte, d *Doc) []byte {
	var j jsonBuf
	j.b = b
	j.begin()
	j.str("id", d.ID)
	j.str("text", d.Text)
	j.str("source", d.Source)
	j.int("tokens", int64(d.Tokens))
	appendMetaFlat(&j, d.Meta)
	return j.end()
}

// appendMetaFlat writes meta keys as top-level keys in sorted order,
// skipping any that would shadow a fixed key.
func appendMetaFlat(j *jsonBuf, meta map[string]any) {
	if len(meta) == 0 {
		return
	}
	keys := make([]string, 0, len(meta))
	for k := range meta {
		switch k {
		case "id", "text", "source", "tokens":
			continue
		}
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		j.val(k, meta[k])
	}
}

// Add writes d to the current shard, starting a new one when full.
func (s *PlainSink) Add(d *Doc) error {
	if s.cur == nil {
		w, err := fsio.CreateZstd(filepath.Join(s.dir, fmt.Sprintf("%s-%05d.jsonl.zst", s.name, len(s.files))))
		if err != nil {
			return err
		}
		s.cur = w
	}
	s.buf.b = AppendDocJSON(s.buf.b[:0], d)
	if _, err := s.cur.Write(s.buf.b); err != nil {
		return err
	}
	s.curDocs++
	s.curTokens += int64(d.Tokens)
	if s.cur.RawBytes() >= s.shardBytes {
		return s.flush()
	}
	return nil
}

func (s *PlainSink) flush() error {
	if s.cur == nil {
		return nil
	}
	if err := s.cur.Commit(); err != nil {
		return err
	}
	rel, _ := filepath.Rel(filepath.Dir(s.dir), s.cur.Path())
	s.files = append(s.files, OutputFile{Path: filepath.ToSlash(rel), Docs: s.curDocs, Tokens: s.curTokens, Bytes: s.cur.Size(), XXH3: s.cur.Digest()})
	s.cur, s.curDocs, s.curTokens = nil, 0, 0
	return nil
}

// Close finishes the last shard.
func (s *PlainSink) Close() (*OutputReport, error) {
	if err := s.flush(); err != nil {
		return nil, err
	}
	return &OutputReport{Files: s.files}, nil
}

// Abort removes the unfinished shard.
func (s *PlainSink) Abort() {
	if s.cur != nil {
		s.cur.Abort()
	}
}
