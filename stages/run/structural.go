package run

import (
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"

	"winnow/filters"
	"winnow/stages"
	"winnow/stages/read"
	"winnow/stages/spec"
)

// Sampling bounds of CheckStructure: the first documents of each source,
// enough to see what kind of text it holds, few enough that `check` stays
// instant.
const (
	structureSampleDocs  = 20
	structureSampleBytes = 4 << 20
	// TechnicalLineShare: a source whose sampled lines are at least this
	// share structural (filters.MeasureStructure) looks technical. Our
	// own rule of thumb: prose sits far below it (the UDHR texts in 27
	// languages at most 2%), rendered manual pages and reference manuals far
	// above (see TestStructureWarningsOnRealDocs).
	TechnicalLineShare = 0.25
)

// StructureWarning says that a stage whose rules remove structural text
// applies to a source that looks technical, and what the stage would do to
// the source's sampled documents.
type StructureWarning struct {
	Stage  string `json:"stage"`
	Source string `json:"source"`
	// Rules are the stage's enabled keys known to remove structural text.
	Rules []string `json:"rules"`
	// SampledDocs are the source's first documents looked at;
	// StructuralShare the share of their non-blank lines that look like
	// code, option lists, markup or preformatted blocks; BracesDocs how
	// many hold a curly brace.
	SampledDocs     int     `json:"sampled_docs"`
	StructuralShare float64 `json:"structural_share"`
	BracesDocs      int     `json:"braces_docs"`
	// WouldDrop counts the sampled documents the stage would drop, by
	// rule; CutShare is the share of their bytes the stage would remove
	// (dropped documents whole, cut lines).
	WouldDrop map[string]int `json:"would_drop"`
	CutShare  float64        `json:"cut_share"`
	// SuggestSources are the sources the stage applies to that do not
	// look technical (for `only: {sources: [...]}`); empty when none.
	SuggestSources []string `json:"suggest_sources"`
	Message        string   `json:"message"`
}

// sourceSample is what CheckStructure saw of one source.
type sourceSample struct {
	docs       []*stages.Doc
	bytes      int
	lines      int
	structural int
	braces     int
}

// CheckStructure samples the first documents of every source and warns,
// for every per-document stage that implements stages.StructureSensitive
// and applies to a source that looks technical, with what the stage would
// do to the sample. Inputs that cannot be read are left out (the run
// reports them); documents are read with the run's readers, so a source
// reads as the run would read it.
func CheckStructure(inputs []read.InputFile, steps []spec.Step) ([]StructureWarning, error) {
	samples := map[string]*sourceSample{}
	var order []string
	for _, in := range inputs {
		src := in.Options.Source
		s := samples[src]
		if s == nil {
			s = &sourceSample{}
			samples[src] = s
			order = append(order, src)
		}
		if len(s.docs) >= structureSampleDocs || s.bytes >= structureSampleBytes || in.Path == "-" {
			continue
		}
		sampleInput(in, s)
	}
	var techn, plain []string
	for _, src := range order {
		s := samples[src]
		for _, d := range s.docs {
			st := filters.MeasureStructure(d.Text)
			s.lines += st.Lines
			s.structural += st.Structural
			if st.Braces {
				s.braces++
			}
		}
		if s.lines > 0 && float64(s.structural)/float64(s.lines) >= TechnicalLineShare {
			techn = append(techn, src)
		} else {
			plain = append(plain, src)
		}
	}
	var out []StructureWarning
	for _, step := range steps {
		ss, ok := step.Stage.(stages.StructureSensitive)
		if !ok || step.Stage == nil {
			continue
		}
		keys := ss.StructuralKeys()
		if len(keys) == 0 {
			continue
		}
		applies := func(src string) bool {
			return step.Only == nil || len(step.Only.Sources) == 0 || slices.Contains(step.Only.Sources, src)
		}
		var suggest []string
		for _, src := range plain {
			if applies(src) {
				suggest = append(suggest, src)
			}
		}
		for _, src := range techn {
			if !applies(src) {
				continue
			}
			s := samples[src]
			w := StructureWarning{Stage: step.Name, Source: src, Rules: keys, SampledDocs: len(s.docs),
				StructuralShare: float64(s.structural) / float64(s.lines), BracesDocs: s.braces,
				WouldDrop: map[string]int{}, SuggestSources: append([]string{}, suggest...)}
			var in, cut int
			for _, d := range s.docs {
				in += len(d.Text)
				dec := step.Stage.Process(d)
				switch dec.Action {
				case stages.Drop:
					w.WouldDrop[dec.Rule]++
					cut += len(d.Text)
				case stages.Edit:
					cut += len(d.Text) - len(dec.Text)
				}
			}
			if in > 0 {
				w.CutShare = float64(cut) / float64(in)
			}
			w.Message = structureMessage(&w)
			out = append(out, w)
		}
	}
	return out, nil
}

func structureMessage(w *StructureWarning) string {
	var b strings.Builder
	fmt.Fprintf(&b, "stage %s applies to source %s, which looks technical (%.0f%% of the lines of its first %d documents are code, option lists, markup or preformatted blocks; %d hold a curly brace), and its rules %s remove such text",
		w.Stage, w.Source, 100*w.StructuralShare, w.SampledDocs, w.BracesDocs, strings.Join(w.Rules, ", "))
	drops := 0
	var parts []string
	for _, r := range sortedKeys(w.WouldDrop) {
		drops += w.WouldDrop[r]
		parts = append(parts, fmt.Sprintf("%s %d", r, w.WouldDrop[r]))
	}
	fmt.Fprintf(&b, ": on those documents it would drop %d", drops)
	if len(parts) > 0 {
		fmt.Fprintf(&b, " (%s)", strings.Join(parts, ", "))
	}
	fmt.Fprintf(&b, " and remove %.0f%% of the bytes", 100*w.CutShare)
	if len(w.SuggestSources) > 0 {
		fmt.Fprintf(&b, "; consider `only: {sources: [%s]}` on the stage", strings.Join(w.SuggestSources, ", "))
	} else {
		b.WriteString("; consider leaving the source out of the stage with `only: {sources: [...]}`, or turning those rules off")
	}
	return b.String()
}

func sortedKeys(m map[string]int) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}

// sampleInput reads documents of one input into s until the sample is
// full; a file that cannot be read adds what was read before the error.
func sampleInput(in read.InputFile, s *sourceSample) {
	if in.Options.Format == read.FormatParquet {
		return
	}
	f, err := read.OpenFile(in.Path)
	if err != nil {
		return
	}
	defer f.Close()
	dec, err := read.Decode(f)
	if err != nil {
		return
	}
	defer dec.Close()
	rr, _, err := read.NewRecordReader(dec, in.Display, in.Index, *in.Options)
	if err != nil {
		return
	}
	for len(s.docs) < structureSampleDocs && s.bytes < structureSampleBytes {
		rec, err := rr.Next()
		if rec.Doc != nil {
			d := stages.DocFromRead(rec.Doc)
			s.docs = append(s.docs, d)
			s.bytes += len(d.Text)
		}
		if errors.Is(err, io.EOF) || err != nil {
			return
		}
	}
}
