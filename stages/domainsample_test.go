package stages

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/zeebo/xxh3"

	"winnow/stages/read"
)

// writeSampleInputs writes two sources of invented boatyard log lines as
// JSON Lines and returns them as resolved run inputs, plus an examples
// file that is also an input.
func writeSampleInputs(t *testing.T) (inputs []read.InputFile, exampleFile string, byID map[string]string) {
	t.Helper()
	dir := t.TempDir()
	byID = map[string]string{}
	write := func(name, source string, n int) read.InputFile {
		var b strings.Builder
		for i := 0; i < n; i++ {
			id := fmt.Sprintf("%s-%d", name, i)
			text := fmt.Sprintf("Larkspur Marine Works %s log entry %d: slipway %d checked.", name, i, i%7)
			byID[id] = text
			fmt.Fprintf(&b, `{"id":%q,"text":%q}`+"\n", id, text)
		}
		p := filepath.Join(dir, name+".jsonl")
		if err := os.WriteFile(p, []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
		return read.InputFile{Path: p, Display: name + ".jsonl", Options: &read.ReadOptions{Source: source, TextField: "text", IDField: "id"}}
	}
	inputs = []read.InputFile{write("yard", "web", 300), write("dock", "forum", 200), write("manual", "manuals", 50)}
	for i := range inputs {
		inputs[i].Index = i
	}
	return inputs, inputs[2].Path, byID
}

// TestSampleBackgroundLowestHashes: the sample is exactly the k ids with
// the lowest xxh3 under the seed among the non-example inputs (computed
// here by sorting every hash), in hash order; `sources` limits the files,
// the examples' texts and the documents earlier stages drop are left out,
// edits of earlier stages reach the sample, and another seed draws another
// sample.
func TestSampleBackgroundLowestHashes(t *testing.T) {
	inputs, exFile, byID := writeSampleInputs(t)
	const seed, k = 7, 60
	want := func(prefixes ...string) []string {
		type hid struct {
			h  uint64
			id string
		}
		var all []hid
		for id := range byID {
			for _, p := range prefixes {
				if strings.HasPrefix(id, p+"-") {
					all = append(all, hid{xxh3.HashStringSeed(id, seed), id})
				}
			}
		}
		sort.Slice(all, func(i, j int) bool { return all[i].h < all[j].h })
		var out []string
		for _, x := range all[:k] {
			out = append(out, byID[x.id])
		}
		return out
	}

	got, info, err := sampleBackground(inputs, []string{exFile}, nil, nil, seed, k, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got, want("yard", "dock")) || info.files != 2 || info.skipped != 1 || info.seen != 500 || info.drawn != k || info.kept != k {
		t.Fatalf("sample %d documents, info %+v", len(got), info)
	}
	if again, _, _ := sampleBackground(inputs, []string{exFile}, nil, nil, seed, k, nil); !slices.Equal(again, got) {
		t.Fatal("a second draw differs")
	}
	if other, _, _ := sampleBackground(inputs, []string{exFile}, nil, nil, seed+1, k, nil); slices.Equal(other, got) {
		t.Fatal("another seed drew the same sample")
	}

	// sources: only the forum input.
	forum, info, _ := sampleBackground(inputs, []string{exFile}, nil, map[string]bool{"forum": true}, seed, k, nil)
	if !slices.Equal(forum, want("dock")) || info.files != 1 || !strings.Contains(info.String(), "inputs of sources forum") {
		t.Fatalf("forum sample %d, info %s", len(forum), info)
	}

	// An example text among the drawn documents, one dropped and one
	// edited by an earlier stage.
	w := want("yard", "dock")
	upstream := func(d *Doc) bool {
		switch d.Text {
		case w[1]:
			return false
		case w[2]:
			d.Text = "edited"
		}
		return true
	}
	thin, info, _ := sampleBackground(inputs, []string{exFile}, []string{w[0]}, nil, seed, k, upstream)
	if info.example != 1 || info.upstream != 1 || info.kept != k-2 || len(thin) != k-2 || thin[0] != "edited" || !slices.Equal(thin[1:], w[3:]) {
		t.Fatalf("thinned sample %q..., info %+v", thin[:3], info)
	}
}

// TestDomainStageDefaultBackground: a domain stage with examples and no
// background trains on the sample of Env.Inputs; without inputs to sample
// it asks for background, naming the key (under checking, when Describe
// trains).
func TestDomainStageDefaultBackground(t *testing.T) {
	dir := t.TempDir()
	ex, bg := writeDomainSets(t, dir)
	inputs := []read.InputFile{{Path: filepath.Join(dir, bg), Display: bg, Options: &read.ReadOptions{Source: "web", TextField: "text"}},
		{Path: filepath.Join(dir, ex), Display: ex, Index: 1, Options: &read.ReadOptions{Source: "manuals", TextField: "text"}}}
	env := Env{SpecDir: dir, Seed: 3, Inputs: func() ([]read.InputFile, error) { return inputs, nil }}
	s, err := newDomainForTest(t, map[string]any{"examples": []any{ex}, "folds": 2}, env)
	if err != nil {
		t.Fatal(err)
	}
	if s.trainedOn != [2]int{len(domainRepair), len(domainOther)} || s.bgInfo.kept != len(domainOther) || s.bgInfo.skipped != 1 {
		t.Fatalf("trained on %v, sample %+v", s.trainedOn, s.bgInfo)
	}
	if s.Process(&Doc{Text: domainRepair[0]}).Metrics[0] <= s.Process(&Doc{Text: domainOther[0]}).Metrics[0] {
		t.Fatal("an example scores below a background document")
	}
	_, err = newDomainForTest(t, map[string]any{"examples": []any{ex}}, Env{SpecDir: dir})
	if err == nil || !strings.Contains(err.Error(), "background") {
		t.Fatalf("no inputs: %v", err)
	}
	// Checking (what-if rebuilds the stage this way) does not train:
	// the stage builds, and Describe says what is missing.
	c, err := newDomainForTest(t, map[string]any{"examples": []any{ex}}, Env{SpecDir: dir, Checking: true})
	if err != nil {
		t.Fatal(err)
	}
	if d := c.Describe(); !strings.Contains(d, "error:") || !strings.Contains(d, "no run inputs") {
		t.Fatalf("describe: %s", d)
	}
}
