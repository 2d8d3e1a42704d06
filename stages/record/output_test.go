package record

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/shard"
	"winnow/stages"
)

// Outside check: cl100k_base counts "hello world" as 2 tokens
// ([15339, 1917] in the reference library github.com/tiktoken-go/tokenizer).
func TestTokenizeStage(t *testing.T) {
	st, err := OutputStage(stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base", "shard_tokens": 5000}), stages.Env{})
	if err != nil || st == nil {
		t.Fatalf("stage %v, err %v", st, err)
	}
	dec := st.Process(&stages.Doc{Text: "hello world"})
	if dec.Action != stages.Keep || dec.Tokens != 2 || len(dec.Metrics) != 1 || dec.Metrics[0] != 2 {
		t.Fatalf("decision %+v", dec)
	}
	if st.Name() != "tokenize" || st.MetricNames()[0] != "tokens" {
		t.Errorf("name %s metrics %v", st.Name(), st.MetricNames())
	}
	none, err := OutputStage(stages.ParamsFromMap(map[string]any{"shard_bytes": 4096}), stages.Env{})
	if none != nil || err != nil {
		t.Errorf("no tokenizer: %v %v", none, err)
	}
	k, ok := stages.LookupKind("tokenize")
	if !ok {
		t.Fatal("tokenize kind not registered")
	}
	s2, err := k.New(stages.ParamsFromMap(map[string]any{"tokenizer": "o200k_base"}), stages.Env{})
	if err != nil || s2.Process(&stages.Doc{Text: "hello world"}).Tokens != 2 {
		t.Fatalf("registered kind: %v", err)
	}
}

func TestOutputParamErrors(t *testing.T) {
	cases := []struct {
		m    map[string]any
		want string
	}{
		{map[string]any{"mix": map[string]any{"a": 1}}, "needs output.tokenizer"},
		{map[string]any{"tokenizer": "cl100k_base", "shard_token": 10}, `did you mean "shard_tokens"`},
		{map[string]any{"tokenizer": "no_such_thing"}, "tokenizer"},
		{map[string]any{"tokenizer": "cl100k_base", "mix": map[string]any{"a": -1, "b": 1}}, "must not be negative"},
		{map[string]any{"tokenizer": "cl100k_base", "shard_tokens": 1000, "split_tokens": 2000}, "larger than shard_tokens"},
	}
	for _, c := range cases {
		_, err := OpenSink(stages.ParamsFromMap(c.m), stages.Env{Checking: true}, "x")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want %q", c.m, err, c.want)
		}
	}
	dir := t.TempDir()
	if _, err := OpenSink(stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base"}), stages.Env{Checking: true, RunDir: dir}, "x"); err != nil {
		t.Fatal(err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("check mode wrote %d entries", len(ents))
	}
}

// The sink turns the builder's report into manifest outputs, a mix
// section and ledger edits for split documents.
func TestShardSinkReport(t *testing.T) {
	run := t.TempDir()
	p := stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base", "shard_tokens": 400,
		"mix": map[string]any{"manuals": 0.5, "forum": 0.5}, "token_files": true})
	env := stages.Env{RunDir: run, TempDir: filepath.Join(run, "tmp"), Seed: 7}
	sink, err := OpenSink(p, env, "demo")
	if err != nil {
		t.Fatal(err)
	}
	st, _ := OutputStage(stages.ParamsFromMap(map[string]any{"tokenizer": "cl100k_base"}), env)
	para := "The Larkspur Marine Works crew hauled the ketch and checked the rudder bearings before the tide turned."
	for i := 0; i < 60; i++ {
		src := "forum"
		text := para
		if i%2 == 0 {
			src = "manuals"
			text = strings.Repeat(para+"\n\n", 1+i%3)
		}
		d := &stages.Doc{ID: fmt.Sprint(src, i), Text: text, Source: src, File: src + ".jsonl", Line: int64(i + 1), Meta: map[string]any{"lang": "en"}}
		d.Tokens = st.Process(d).Tokens
		if err := sink.Add(d); err != nil {
			t.Fatal(err)
		}
	}
	rep, err := sink.Close()
	if err != nil {
		t.Fatal(err)
	}
	mix, ok := rep.Mix.(*shard.MixReport)
	if !ok || len(mix.Sources) != 2 {
		t.Fatalf("mix %#v", rep.Mix)
	}
	var tokens int64
	for _, f := range rep.Files {
		tokens += f.Tokens
		if f.TokenFile == nil || f.XXH3 == "" || f.Source["forum"] == 0 {
			t.Errorf("file %+v", f)
		}
		if _, err := os.Stat(filepath.Join(run, f.Path)); err != nil {
			t.Error(err)
		}
	}
	if tokens != mix.TokensUsed {
		t.Errorf("files hold %d tokens, mix used %d", tokens, mix.TokensUsed)
	}
	if len(rep.Edits) == 0 {
		t.Fatal("no split recorded (manuals documents exceed split_tokens = 4)")
	}
	e := rep.Edits[0]
	if e.Stage != OutputLedgerStage || e.Action != "edit" || e.Changes["pieces"] < 2 || e.File == "" {
		t.Errorf("edit %+v", e)
	}
}
