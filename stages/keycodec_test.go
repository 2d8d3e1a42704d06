package stages

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"reflect"
	"testing"

	"winnow/dedup"
)

// buildGlobal builds a registered global stage (testing.TB, so fuzz
// targets can build one too).
func buildGlobal(tb testing.TB, kind string, params map[string]any, env Env) GlobalStage {
	tb.Helper()
	k, ok := LookupKind(kind)
	if !ok || k.NewGlobal == nil {
		tb.Fatalf("kind %s not registered as a global stage", kind)
	}
	if env.TempDir == "" {
		env.TempDir = tb.TempDir()
	}
	g, err := k.NewGlobal(ParamsFromMap(params), env)
	if err != nil {
		tb.Fatal(err)
	}
	return g
}

// codecCase is one global stage configuration whose scan keys are stored.
type codecCase struct {
	name string
	make func(tb testing.TB) GlobalStage
	docs func(tb testing.TB) []*Doc
}

// decontamEvalParams checks against both real eval sets: two items
// quoting gzip(1) and ls(1) (testdata/realdocs/evals) and the npm
// command questions written by DuckDB (testdata/evalsets).
func decontamEvalParams() []any {
	return []any{
		map[string]any{"name": "manual-qa", "paths": []any{"testdata/realdocs/evals/manual-qa.jsonl"}, "fields": []any{"question", "answer"}},
		map[string]any{"name": "npm-mc", "paths": []any{"testdata/evalsets/npm-mc.jsonl"}, "fields": []any{"question"}},
	}
}

// contamDocs returns real documents and, after them, mail messages with
// real eval questions pasted in: every one has the first npm question,
// every third one another, and two copies of the gzip page.
func contamDocs(tb testing.TB) []string {
	rt := loadRealTexts(tb)
	qs := npmQuestions(tb)
	texts := rt.all()
	for j := 0; j < 160; j++ {
		s := rt.mail[j%len(rt.mail)] + "\n\n" + qs[0]
		if j%3 == 0 {
			s += "\n\nAs the manual says: " + qs[1+(j/3)%(len(qs)-1)]
		}
		texts = append(texts, s)
		if j == 60 || j == 150 {
			texts = append(texts, rt.man[4]+"\n\n"+rt.man[len(rt.man)-1])
		}
	}
	return texts
}

func codecCases() []codecCase {
	realDocs := func(tb testing.TB) []*Doc { return makeDocs(withCopies(loadRealTexts(tb).all())) }
	global := func(kind string, params map[string]any) func(testing.TB) GlobalStage {
		return func(tb testing.TB) GlobalStage { return buildGlobal(tb, kind, params, Env{Seed: 7}) }
	}
	domain := func(method string) func(testing.TB) GlobalStage {
		return func(tb testing.TB) GlobalStage {
			return buildGlobal(tb, "domain", map[string]any{"examples": []any{"python.jsonl.zst"}, "background": []any{"prose.jsonl.zst"},
				"keep_fraction": 0.5, "method": method, "sources": []any{"web"}}, Env{SpecDir: "../testdata/domaindocs", Seed: 3})
		}
	}
	// Manual pages (background-like) and Python documentation chunks
	// (like the examples) from testdata/domaindocs; every third document
	// comes from a source outside `sources` (a nil key).
	domainDocs := func(tb testing.TB) []*Doc {
		man := zstdJSONLTexts(tb, "../testdata/domaindocs/manpages.jsonl.zst", "text")[:80]
		py := zstdJSONLTexts(tb, "../testdata/domaindocs/python.jsonl.zst", "text")[:80]
		var docs []*Doc
		for i := range man {
			for j, s := range []string{man[i], py[i]} {
				src := "web"
				if (2*i+j)%3 == 2 {
					src = "mirror"
				}
				docs = append(docs, &Doc{ID: fmt.Sprintf("d/%d", 2*i+j), Text: s, Source: src, Order: OrderKey(2*i + j + 1)})
			}
		}
		return docs
	}
	return []codecCase{
		{"exact_dedup", global("exact_dedup", map[string]any{"keep": "longest"}), realDocs},
		{"exact_dedup paragraph", global("exact_dedup", map[string]any{"scope": "paragraph", "max_repeats": 2}), realDocs},
		{"near_dedup", global("near_dedup", map[string]any{"keep": "longest", "threshold": 0.7}), realDocs},
		{"near_dedup verify exact", global("near_dedup", map[string]any{"verify": "exact", "threshold": 0.7}), realDocs},
		{"decontaminate max_doc_frequency", func(tb testing.TB) GlobalStage {
			p := map[string]any{"evals": decontamEvalParams(), "max_doc_frequency": 2, "action": "cut"}
			g, err := newDecontaminateKind(ParamsFromMap(p), Env{SpecDir: ".."})
			if err != nil {
				tb.Fatal(err)
			}
			return g
		}, func(tb testing.TB) []*Doc { return makeDocs(contamDocs(tb)) }},
		{"domain keep_fraction classifier", domain("classifier"), domainDocs},
		{"domain keep_fraction importance", domain("importance"), domainDocs},
	}
}

// keysEqual compares two scan keys; float keys by their bits (a NaN key
// equals itself).
func keysEqual(a, b any) bool {
	if fa, ok := a.(float64); ok {
		fb, ok := b.(float64)
		return ok && math.Float64bits(fa) == math.Float64bits(fb)
	}
	return reflect.DeepEqual(a, b)
}

// TestKeyCodecsRoundTrip: for every global stage, the keys Scan computes
// on real documents decode to keys deeply equal to them, every proper
// prefix of an encoding is an error, and a fresh stage fed the decoded
// keys decides every document exactly as one fed the originals (and some
// documents are removed or edited, so the comparison means something).
func TestKeyCodecsRoundTrip(t *testing.T) {
	for _, c := range codecCases() {
		t.Run(c.name, func(t *testing.T) {
			docs := c.docs(t)
			orig := c.make(t)
			defer orig.Close()
			codec, ok := orig.(KeyCodec)
			if !ok {
				t.Fatalf("%T does not implement KeyCodec", orig)
			}
			keys := make([]any, len(docs))
			decoded := make([]any, len(docs))
			nils, bytesTotal := 0, 0
			for i, d := range docs {
				keys[i] = orig.Scan(d)
				if keys[i] == nil {
					nils++
				}
				prefix := []byte("prefix")
				enc := codec.AppendKeys(append([]byte{}, prefix...), keys[i])
				if !bytes.HasPrefix(enc, prefix) {
					t.Fatalf("%s: AppendKeys lost the bytes before it", d.ID)
				}
				enc = enc[len(prefix):]
				bytesTotal += len(enc)
				if again := codec.AppendKeys(nil, keys[i]); !bytes.Equal(again, enc) {
					t.Fatalf("%s: encoding not deterministic", d.ID)
				}
				dec, err := codec.DecodeKeys(enc)
				if err != nil {
					t.Fatalf("%s: %v", d.ID, err)
				}
				if !keysEqual(dec, keys[i]) {
					t.Fatalf("%s: decoded %#v, scanned %#v", d.ID, dec, keys[i])
				}
				decoded[i] = dec
				for _, n := range prefixLengths(len(enc)) {
					if _, err := codec.DecodeKeys(enc[:n]); err == nil {
						t.Fatalf("%s: the first %d of %d bytes decoded without error", d.ID, n, len(enc))
					}
				}
				if _, err := codec.DecodeKeys(append(enc[:len(enc):len(enc)], 0)); err == nil {
					t.Fatalf("%s: a trailing byte decoded without error", d.ID)
				}
			}
			t.Logf("%d docs (%d nil keys), %.1f bytes/doc encoded", len(docs), nils, float64(bytesTotal)/float64(len(docs)))
			fresh := c.make(t)
			defer fresh.Close()
			for i, d := range docs {
				if err := orig.Collect(d.Order, d.ID, keys[i]); err != nil {
					t.Fatal(err)
				}
				if err := fresh.Collect(d.Order, d.ID, decoded[i]); err != nil {
					t.Fatal(err)
				}
			}
			if err := orig.Reduce(); err != nil {
				t.Fatal(err)
			}
			if err := fresh.Reduce(); err != nil {
				t.Fatal(err)
			}
			changed := 0
			for _, d := range docs {
				a, b := renderDecision(orig.Apply(d)), renderDecision(fresh.Apply(d))
				if a != b {
					t.Errorf("%s: %s with the scanned keys, %s with the decoded ones", d.ID, a, b)
				}
				if a != "keep" {
					changed++
				}
			}
			if changed == 0 {
				t.Errorf("no document removed or edited among %d: the comparison shows nothing", len(docs))
			}
			t.Logf("%d of %d documents removed or edited", changed, len(docs))
		})
	}
}

// prefixLengths returns the proper prefix lengths of an n-byte encoding
// to try: every one of the first and last 64, and 64 between.
func prefixLengths(n int) []int {
	var out []int
	for i := 0; i < n; i++ {
		if i < 64 || i >= n-64 || i%max(1, n/64) == 0 {
			out = append(out, i)
		}
	}
	return out
}

// TestKeyCodecErrors: wrong tags, a signature of the wrong length, an
// index key out of range and an unsorted set are errors naming the stage.
func TestKeyCodecErrors(t *testing.T) {
	exact := buildGlobal(t, "exact_dedup", nil, Env{}).(KeyCodec)
	para := buildGlobal(t, "exact_dedup", map[string]any{"scope": "paragraph"}, Env{}).(KeyCodec)
	near := buildGlobal(t, "near_dedup", map[string]any{"permutations": 8, "bands": 2}, Env{}).(KeyCodec)
	contam, err := newDecontaminateKind(ParamsFromMap(map[string]any{"evals": decontamEvalParams()}), Env{SpecDir: ".."})
	if err != nil {
		t.Fatal(err)
	}
	keyCount := contam.(*Decontaminate).Index().KeyCount()
	sig7 := append([]byte{keySome, 0, 7}, make([]byte, 28)...)
	for _, c := range []struct {
		name  string
		codec KeyCodec
		in    []byte
		want  string
	}{
		{"exact tag", exact, []byte{2}, "tag 2"},
		{"exact empty", exact, nil, "truncated"},
		{"paragraph count", para, []byte{200, 1, 1}, "exceeds"},
		{"paragraph overflow", para, append([]byte{2, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01}, 0), "overflows"},
		{"near signature", near, append(sig7, 0), "signature of 7 values, want 8"},
		{"near varint", near, []byte{keySome, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x7f}, "overflows"},
		{"decontaminate range", contam.(KeyCodec), appendSet32(nil, []uint32{uint32(keyCount)}), "not below"},
		{"decontaminate gap", contam.(KeyCodec), binary.AppendUvarint([]byte{2, 1}, uint64(keyCount)), "not below"},
	} {
		_, err := c.codec.DecodeKeys(c.in)
		if err == nil || !bytes.Contains([]byte(err.Error()), []byte(c.want)) || !bytes.Contains([]byte(err.Error()), []byte("decoding scan keys")) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
}

// fuzzCodec checks the decoder invariants on arbitrary input: no panic,
// and a value that decodes re-encodes to bytes that decode to an equal
// value and encode to the same bytes (idempotence).
func fuzzCodec(t *testing.T, codec KeyCodec, in []byte) {
	v, err := codec.DecodeKeys(in)
	if err != nil {
		if v != nil {
			t.Fatalf("error %v with a value %#v", err, v)
		}
		return
	}
	enc := codec.AppendKeys(nil, v)
	v2, err := codec.DecodeKeys(enc)
	if err != nil {
		t.Fatalf("re-encoded %x of %x does not decode: %v", enc, in, err)
	}
	if !keysEqual(v, v2) {
		t.Fatalf("%x decoded to %#v, re-encoded to %#v", in, v, v2)
	}
	if enc2 := codec.AppendKeys(nil, v2); !bytes.Equal(enc, enc2) {
		t.Fatalf("encodings differ: %x then %x", enc, enc2)
	}
}

// addKeySeeds adds the encodings of the keys of some real documents, and
// their halves, as seeds.
func addKeySeeds(f *testing.F, g GlobalStage, docs []*Doc) {
	codec := g.(KeyCodec)
	for i, d := range docs {
		if i%4 != 0 {
			continue
		}
		enc := codec.AppendKeys(nil, g.Scan(d))
		f.Add(enc)
		f.Add(enc[:len(enc)/2])
	}
	f.Add([]byte{})
	f.Add([]byte{0})
	f.Add([]byte{1, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff})
}

func fuzzDocs(f *testing.F) []*Doc {
	rt := loadRealTexts(f)
	return makeDocs(append(rt.man[:4], rt.mail[:12]...))
}

func FuzzExactKeys(f *testing.F) {
	docs := fuzzDocs(f)
	exact := buildGlobal(f, "exact_dedup", map[string]any{"keep": "longest"}, Env{})
	para := buildGlobal(f, "exact_dedup", map[string]any{"scope": "paragraph"}, Env{})
	addKeySeeds(f, exact, docs)
	addKeySeeds(f, para, docs)
	f.Fuzz(func(t *testing.T, in []byte) {
		fuzzCodec(t, exact.(KeyCodec), in)
		fuzzCodec(t, para.(KeyCodec), in)
	})
}

func FuzzNearKeys(f *testing.F) {
	docs := fuzzDocs(f)
	sig := buildGlobal(f, "near_dedup", map[string]any{"permutations": 16, "bands": 4, "keep": "longest"}, Env{})
	exact := buildGlobal(f, "near_dedup", map[string]any{"permutations": 16, "bands": 4, "verify": "exact"}, Env{})
	addKeySeeds(f, sig, docs)
	addKeySeeds(f, exact, docs)
	f.Fuzz(func(t *testing.T, in []byte) {
		for _, g := range []GlobalStage{sig, exact} {
			fuzzCodec(t, g.(KeyCodec), in)
			v, err := g.(KeyCodec).DecodeKeys(in)
			if k, ok := v.(*dedup.NearKey); err == nil && ok {
				// Band hashes are those of the signature, so Collect
				// accepts the key.
				if len(k.Sig) != 16 || len(k.Bands) != 4 {
					t.Fatalf("key of %d values, %d bands", len(k.Sig), len(k.Bands))
				}
			}
		}
	})
}

func FuzzDecontamKeys(f *testing.F) {
	g, err := newDecontaminateKind(ParamsFromMap(map[string]any{"evals": decontamEvalParams(), "max_doc_frequency": 3}), Env{SpecDir: ".."})
	if err != nil {
		f.Fatal(err)
	}
	addKeySeeds(f, g, makeDocs(contamDocs(f)[100:140]))
	d := g.(*Decontaminate)
	f.Fuzz(func(t *testing.T, in []byte) {
		fuzzCodec(t, d, in)
		if v, err := d.DecodeKeys(in); err == nil && v != nil {
			// Whatever decodes, Collect takes (every key in range).
			if err := d.Collect(1, "fuzz", v); err != nil {
				t.Fatal(err)
			}
		}
	})
}

func FuzzDomainKeys(f *testing.F) {
	dir := f.TempDir()
	ex, bg := writeDomainSets(f, dir)
	g := buildGlobal(f, "domain", map[string]any{"examples": []any{ex}, "background": []any{bg}, "keep_fraction": 0.5}, Env{SpecDir: dir})
	for _, s := range append(append([]string{}, domainRepair...), domainOther...) {
		f.Add(g.(KeyCodec).AppendKeys(nil, g.Scan(&Doc{ID: "x", Text: s})))
	}
	f.Add([]byte{keySome, 0, 0, 0, 0, 0, 0, 0xf8, 0x7f}) // NaN
	f.Add([]byte{keyNil, 1})
	f.Fuzz(func(t *testing.T, in []byte) { fuzzCodec(t, g.(KeyCodec), in) })
}
