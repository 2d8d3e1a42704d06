package stages

import (
	"fmt"
	"sync"

	"winnow/shard"
)

// tokenizeStage counts each document's tokens; the runner sets Doc.Tokens
// from Decision.Tokens, and the count is stored as metric "tokens".
type tokenizeStage struct {
	name string
	tok  *shard.Tokenizer
	// load, when set, gives tok on first use (NewLazyTokenizeStage).
	load func() (*shard.Tokenizer, error)
	once sync.Once
	err  error
}

// tokenizer returns the stage's tokenizer, loading it on first use.
func (s *tokenizeStage) tokenizer() *shard.Tokenizer {
	if s.load != nil {
		s.once.Do(func() { s.tok, s.err = s.load() })
		if s.err != nil {
			// Only an embedded encoding is loaded late; it cannot fail
			// unless the binary is broken.
			panic(fmt.Sprintf("tokenizer: %v", s.err))
		}
	}
	return s.tok
}

func (s *tokenizeStage) Name() string          { return s.name }
func (s *tokenizeStage) Kind() string          { return "tokenize" }
func (s *tokenizeStage) MetricNames() []string { return []string{"tokens"} }

// Process counts d's tokens. It never drops or edits.
func (s *tokenizeStage) Process(d *Doc) Decision {
	n := s.tokenizer().Count(d.Text)
	return Decision{Tokens: n, Metrics: []float64{float64(n)}}
}

// Tokenizer returns the stage's tokenizer.
func (s *tokenizeStage) Tokenizer() *shard.Tokenizer { return s.tokenizer() }

// NewTokenizeStage returns the stage that counts tokens with tok (the one
// output.tokenizer implies: see record.OutputStage).
func NewTokenizeStage(tok *shard.Tokenizer) Stage {
	return &tokenizeStage{name: "tokenize", tok: tok}
}

// NewLazyTokenizeStage is NewTokenizeStage with a tokenizer that load
// gives when the first document is counted (split tasks of phases that
// never count skip the load).
func NewLazyTokenizeStage(load func() (*shard.Tokenizer, error)) Stage {
	return &tokenizeStage{name: "tokenize", load: load}
}

func init() {
	Register(Kind{
		Name: "tokenize",
		Doc:  "count tokens with a tiktoken encoding or a tokenizer.json (sets each document's token count)",
		New: func(p *Params, env Env) (Stage, error) {
			name := p.String("tokenizer", "cl100k_base")
			var tok *shard.Tokenizer
			if name != "" {
				t, err := shard.Load(name, env.SpecDir)
				if err != nil {
					p.Fail("tokenizer", err)
				}
				tok = t
			}
			if err := p.Done(); err != nil {
				return nil, err
			}
			if tok == nil {
				p.Errorf("tokenizer", "must not be empty")
				return nil, p.Done()
			}
			return &tokenizeStage{name: "tokenize", tok: tok}, nil
		},
	})
}
