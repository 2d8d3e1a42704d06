package stages

import "winnow/shard"

// tokenizeStage counts each document's tokens; the runner sets Doc.Tokens
// from Decision.Tokens, and the count is stored as metric "tokens".
type tokenizeStage struct {
	name string
	tok  *shard.Tokenizer
}

func (s *tokenizeStage) Name() string          { return s.name }
func (s *tokenizeStage) Kind() string          { return "tokenize" }
func (s *tokenizeStage) MetricNames() []string { return []string{"tokens"} }

// Process counts d's tokens. It never drops or edits.
func (s *tokenizeStage) Process(d *Doc) Decision {
	n := s.tok.Count(d.Text)
	return Decision{Tokens: n, Metrics: []float64{float64(n)}}
}

// Tokenizer returns the stage's tokenizer.
func (s *tokenizeStage) Tokenizer() *shard.Tokenizer { return s.tok }

// NewTokenizeStage returns the stage that counts tokens with tok (the one
// output.tokenizer implies: see record.OutputStage).
func NewTokenizeStage(tok *shard.Tokenizer) Stage {
	return &tokenizeStage{name: "tokenize", tok: tok}
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
