package record

import (
	"errors"
	"fmt"
	"path/filepath"
	"sort"

	"winnow/stages/jsonl"

	"winnow/shard"
	"winnow/stages"
)

// OutputFile describes one written output shard in the manifest.
type OutputFile struct {
	Path   string           `json:"path"`
	Docs   int64            `json:"docs"`
	Tokens int64            `json:"tokens"`
	Bytes  int64            `json:"bytes"`
	XXH3   string           `json:"xxh3"`
	Source map[string]int64 `json:"source_tokens,omitempty"`
	// SourceDocs counts the shard's lines per source.
	SourceDocs map[string]int64 `json:"source_docs,omitempty"`
	// TokenFile is the shard's flat token-id file (output.token_files).
	TokenFile *shard.TokenFile `json:"token_file,omitempty"`
}

// OutputReport is what a sink tells the manifest when it closes.
type OutputReport struct {
	Files []OutputFile `json:"files"`
	// Mix describes per-source availability and use (tokens available,
	// used, epochs); nil when no mix was configured. It holds a
	// *shard.MixReport.
	Mix any `json:"mix,omitempty"`
	// Edits are ledger records the sink produced (e.g. split documents).
	Edits []LedgerRecord `json:"-"`
	// Docs counts the documents of which at least one piece was written,
	// Records the lines written (a split or repeated document is several)
	// and TextBytes the text bytes of those lines.
	Docs      int64 `json:"-"`
	Records   int64 `json:"-"`
	TextBytes int64 `json:"-"`
	// BudgetLeftOut counts the documents an output in input order left
	// out once budget_tokens was reached (not in the ledger).
	BudgetLeftOut int64 `json:"-"`
}

// Sink receives the documents that survived every stage, in input order,
// on one goroutine.
type Sink interface {
	Add(d *stages.Doc) error
	// Close finishes all shards and reports them.
	Close() (*OutputReport, error)
	// Abort removes unfinished files.
	Abort()
}

// OutputLedgerStage is the ledger stage name of the sink's edit records
// (documents split at paragraph boundaries).
const OutputLedgerStage = "output"

// outputConfig is the parsed "output" mapping (without "dir").
type outputConfig struct {
	tokenizer   string
	tok         *shard.Tokenizer
	lazy        bool // tok is loaded on first use (env.LazyModels)
	shardTokens int64
	shardBytes  int64
	splitTokens int64
	mix         map[string]float64
	shuffle     bool
	budget      int64
	maxEpochs   int64
	tokenFiles  bool
	metaKeys    []string // nil: all
}

// OutputStage returns the tokenize stage that output.tokenizer
// implies, or nil when the output section names no tokenizer. p is the
// spec's output mapping; every output key is read (so that a later
// OpenSink on the same mapping reports the same errors) and Done is
// called.
func OutputStage(p *stages.Params, env stages.Env) (stages.Stage, error) {
	if p == nil {
		return nil, nil
	}
	c, err := parseOutput(p, env)
	if err != nil {
		return nil, err
	}
	if c.lazy {
		name, dir := c.tokenizer, env.SpecDir
		return stages.NewLazyTokenizeStage(func() (*shard.Tokenizer, error) { return shard.Load(name, dir) }), nil
	}
	if c.tok == nil {
		return nil, nil
	}
	return stages.NewTokenizeStage(c.tok), nil
}

// parseOutput reads every key of the output mapping, so that Done reports
// only true unknowns, and loads the tokenizer. Keys:
//
//	tokenizer      encoding name (cl100k_base, o200k_base, r50k_base,
//	               p50k_base, p50k_edit, gpt2, or a model name) or the path
//	               of a byte-level BPE tokenizer.json (relative to the spec)
//	shard_tokens   tokens per shard, ±1% (default 1,000,000)
//	shard_bytes    uncompressed bytes per shard without a tokenizer
//	               (default 256 MiB)
//	split_tokens   documents longer than this are split at paragraph
//	               boundaries before mixing (default shard_tokens/100 with
//	               a mix, shard_tokens without)
//	mix            {source: share} target token shares (normalized)
//	shuffle        without a mix: order documents by a keyed hash of their
//	               ids (the seed) instead of input order (default false)
//	budget_tokens  total output tokens (default: as many as the mix allows)
//	max_epochs     up-sampling limit by whole-document repetition (default 1)
//	token_files    also write flat token-id files per shard (default false)
//	meta_keys      meta keys written into shard lines (default: all)
func parseOutput(p *stages.Params, env stages.Env) (*outputConfig, error) {
	c := &outputConfig{}
	c.tokenizer = p.String("tokenizer", "")
	c.shardTokens = p.Int("shard_tokens", shard.DefaultShardTokens, 100, 1<<40)
	c.shardBytes = p.Int("shard_bytes", shard.DefaultShardBytes, 1<<10, 1<<40)
	c.splitTokens = p.Int("split_tokens", 0, 0, 1<<40)
	c.mix = p.FloatMap("mix")
	c.shuffle = p.Bool("shuffle", false)
	c.budget = p.Int("budget_tokens", 0, 0, 1<<50)
	c.maxEpochs = p.Int("max_epochs", 1, 1, 1000)
	c.tokenFiles = p.Bool("token_files", false)
	if p.Has("meta_keys") {
		c.metaKeys = p.Strings("meta_keys", nil)
		if c.metaKeys == nil {
			c.metaKeys = []string{}
		}
	}
	if c.tokenizer != "" {
		if env.LazyModels && shard.IsEncoding(c.tokenizer) {
			// A split task loads an embedded encoding when it first
			// counts (most phases never do).
			c.lazy = true
		} else {
			tok, err := shard.Load(c.tokenizer, env.SpecDir)
			if err != nil {
				p.Fail("tokenizer", err)
			}
			c.tok = tok
		}
		if p.Has("shard_bytes") {
			p.Errorf("shard_bytes", "applies only without output.tokenizer (shards are cut by shard_tokens)")
		}
	} else {
		for _, k := range []string{"shard_tokens", "mix", "shuffle", "budget_tokens", "token_files", "split_tokens", "max_epochs"} {
			if p.Has(k) {
				p.Errorf(k, "needs output.tokenizer")
			}
		}
	}
	if c.mix != nil {
		var sum float64
		for _, k := range sortedStrings(c.mix) {
			if v := c.mix[k]; v < 0 {
				p.Errorf("mix", "share of %q is %v: shares must not be negative", k, v)
			}
			sum += c.mix[k]
		}
		if sum <= 0 {
			p.Errorf("mix", "shares sum to %v: want a positive total", sum)
		}
	}
	if c.shuffle && c.mix != nil {
		p.Errorf("shuffle", "has no effect with mix (a mix already interleaves sources by a keyed hash): remove one")
	}
	if c.splitTokens > c.shardTokens {
		p.Errorf("split_tokens", "%d is larger than shard_tokens %d", c.splitTokens, c.shardTokens)
	}
	if err := p.Done(); err != nil {
		return nil, err
	}
	return c, nil
}

func sortedStrings[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// OpenSink builds the sink for a run from the spec's "output" section
// (the "dir" key is read by the spec loader and marked known). name is the
// spec's name, used as the shard file prefix; shards go to
// env.RunDir/shards/. Under env.Checking it validates and returns a sink
// that writes nothing.
func OpenSink(p *stages.Params, env stages.Env, name string) (Sink, error) {
	opt, err := OutputOptions(p, env, name)
	if err != nil {
		return nil, err
	}
	if env.Checking {
		return discardSink{}, nil
	}
	b, err := shard.NewBuilder(opt)
	if err != nil {
		return nil, fmt.Errorf("output: %w", err)
	}
	return &shardSink{b: b}, nil
}

// OutputOptions returns the shard options OpenSink builds its writer
// from: shards in env.RunDir/shards, temp files in env.TempDir (default
// env.RunDir/.work).
func OutputOptions(p *stages.Params, env stages.Env, name string) (shard.Options, error) {
	env.LazyModels = false // the writer needs its tokenizer
	c, err := parseOutput(p, env)
	if err != nil {
		return shard.Options{}, err
	}
	tmp := env.TempDir
	if tmp == "" {
		tmp = filepath.Join(env.RunDir, ".work")
	}
	return shard.Options{
		Dir:          filepath.Join(env.RunDir, "shards"),
		Name:         name,
		Tokenizer:    c.tok,
		ShardTokens:  c.shardTokens,
		ShardBytes:   c.shardBytes,
		SplitTokens:  c.splitTokens,
		Mix:          c.mix,
		Shuffle:      c.shuffle,
		BudgetTokens: c.budget,
		MaxEpochs:    int(c.maxEpochs),
		TokenFiles:   c.tokenFiles,
		MetaKeys:     c.metaKeys,
		Seed:         env.Seed,
		TempDir:      tmp,
		MemoryBudget: env.MemoryBudget,
	}, nil
}

// PlannedOutput reports whether a split run writes this output in ranges
// (phase shards): every output with a tokenizer (shards cut by tokens,
// in a mix, shuffled or in input order). Without one, shards are cut by
// bytes and the write phase writes them in input order.
func PlannedOutput(p *stages.Params) bool {
	return p != nil && p.Has("tokenizer") && p.String("tokenizer", "") != ""
}

// OpenPartSink opens a sink that takes one part of the documents of a
// planned output (PlannedOutput) and keeps them with SavePart: shards are
// written later in ranges.
func OpenPartSink(p *stages.Params, env stages.Env, name string) (PartSaver, error) {
	opt, err := OutputOptions(p, env, name)
	if err != nil {
		return nil, err
	}
	opt.Parts = true
	b, err := shard.NewBuilder(opt)
	if err != nil {
		return nil, fmt.Errorf("output: %w", err)
	}
	if !b.Planned() {
		b.Abort()
		return nil, errors.New("output: no tokenizer: shards are not written in ranges")
	}
	return &shardSink{b: b}, nil
}

// PartSaver is a sink that can keep its documents as one part of a
// planned output (shard.Builder.SavePart) instead of closing.
type PartSaver interface {
	Sink
	Planned() bool
	SavePart(dir string) error
}

func (s *shardSink) Planned() bool             { return s.b.Planned() }
func (s *shardSink) SavePart(dir string) error { return s.b.SavePart(dir) }

// discardSink is the sink of `winnow check`.
type discardSink struct{}

func (discardSink) Add(*stages.Doc) error         { return nil }
func (discardSink) Close() (*OutputReport, error) { return &OutputReport{Files: []OutputFile{}}, nil }
func (discardSink) Abort()                        {}

// shardSink adapts a shard.Builder to the runner.
type shardSink struct {
	b *shard.Builder
	d shard.Doc
}

// RuleMixLeftOut is the ledger rule of a document that passed every
// stage but that the output mix (or a shuffled output's budget_tokens)
// placed in no shard.
const RuleMixLeftOut = "mix_left_out"

// RuleMixLeftOutPieces is the ledger rule of a document split into pieces
// of which the mix wrote some and left the others out (an edit: value is
// the tokens left out, extra keys name the pieces and their text bytes).
const RuleMixLeftOutPieces = "mix_left_out_pieces"

// LeftOutRecorder is a sink that can report, while it closes, each
// document its mix leaves out, as a ledger record.
type LeftOutRecorder interface {
	OnLeftOut(fn func(*LedgerRecord) error)
}

// OnLeftOut makes Close call fn for each document the mix (or a shuffled
// output's budget) leaves out.
func (s *shardSink) OnLeftOut(fn func(*LedgerRecord) error) {
	s.b.SetLeftOut(func(l shard.LeftOut) error { return fn(LeftOutRecord(l)) })
}

// LeftOutRecord is the ledger record of a document the mix (or a
// shuffled output's budget) left out, wholly or in part.
func LeftOutRecord(l shard.LeftOut) *LedgerRecord {
	why := l.Reason
	if why == "" {
		why = "its source had more tokens than its mix share needed"
	}
	if len(l.Pieces) > 0 {
		return &LedgerRecord{Doc: l.Doc, Source: l.Source, File: l.File, Line: l.Line, Stage: OutputLedgerStage,
			Rule: RuleMixLeftOutPieces, Action: "edit", Value: l.Tokens, Changes: map[string]int{"pieces_left_out": len(l.Pieces)},
			Extra: map[string]any{"reason": why, "pieces": l.Pieces, "bytes": l.Bytes}}
	}
	return &LedgerRecord{Doc: l.Doc, Source: l.Source, File: l.File, Line: l.Line, Stage: OutputLedgerStage,
		Rule: RuleMixLeftOut, Action: "drop", Value: l.Tokens,
		Extra: map[string]any{"reason": why}}
}

// Add hands one surviving document to the builder.
func (s *shardSink) Add(d *stages.Doc) error {
	s.d = shard.Doc{ID: d.ID, Text: d.Text, Source: d.Source, File: d.File, Line: d.Line, Tokens: d.Tokens, Meta: d.Meta}
	return s.b.Add(&s.d)
}

// Close writes the shards and converts the report for the manifest and
// the ledger.
func (s *shardSink) Close() (*OutputReport, error) {
	rep, err := s.b.Close()
	if err != nil {
		return nil, err
	}
	return ReportOf(rep), nil
}

// ReportOf converts the report of the shard writer for the manifest and
// the ledger.
func ReportOf(rep *shard.Report) *OutputReport {
	out := &OutputReport{Files: make([]OutputFile, 0, len(rep.Files))}
	for _, f := range rep.Files {
		out.Files = append(out.Files, OutputFile{Path: f.Path, Docs: f.Docs, Tokens: f.Tokens, Bytes: f.Bytes, XXH3: f.XXH3,
			Source: f.SourceTokens, SourceDocs: f.SourceDocs, TokenFile: f.TokenFile})
	}
	if rep.Mix != nil {
		out.Mix = rep.Mix
	}
	out.Docs, out.Records, out.TextBytes, out.BudgetLeftOut = rep.DocsWritten, rep.Docs, rep.TextBytes, rep.BudgetLeftOut
	for _, sp := range rep.Splits {
		out.Edits = append(out.Edits, LedgerRecord{
			Doc: sp.Doc, Source: sp.Source, File: sp.File, Line: sp.Line, Stage: OutputLedgerStage,
			Rule: sp.Rule, Action: "edit", Changes: map[string]int{"pieces": len(sp.Pieces)},
			Extra: map[string]any{"reason": sp.Reason, "pieces": sp.Pieces, "tokens": sp.Tokens},
		})
	}
	return out
}

// Abort removes unfinished files.
func (s *shardSink) Abort() { s.b.Abort() }

// AppendDocJSON appends d as one shard line:
// {"id","text","source","tokens",<meta keys sorted>}.
func AppendDocJSON(b []byte, d *stages.Doc) []byte {
	return jsonl.AppendDocLine(b, d.ID, d.Text, d.Source, d.Tokens, d.Meta, nil)
}
