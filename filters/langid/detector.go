package langid

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"

	"github.com/pemistahl/lingua-go"
	"golang.org/x/text/unicode/norm"
)

// Tuning constants.
const (
	// DefaultWindows is how many samples of a long document are scored:
	// its start, middle and end.
	DefaultWindows = 3
	// DefaultWindowChars is the length of one sample in characters: long
	// enough that lingua's trigram model is ~100% accurate on it (UDHR
	// paragraphs of 100+ characters are), short enough to keep the cost
	// per document bounded whatever its length.
	DefaultWindowChars = 500
	// DefaultMaxWindows is how many samples a long document may get when
	// the first ones disagree (a page mixing languages).
	DefaultMaxWindows = 9
	// MaxWindows and MaxWindowChars bound the sampling knobs.
	MaxWindows     = 64
	MaxWindowChars = 20000
	// agreeShare: more samples are taken while the leading language holds
	// less than this share of the sampled text (two of three is not
	// enough, three of four is).
	agreeShare = 0.7

	// ambiguityNats: a sample whose two best languages are closer than
	// this in summed log-probability (a likelihood ratio below e^8 ≈ 3000)
	// is decided by lingua itself, with its rule filters, instead of by the
	// packed tables alone.
	ambiguityNats = 8.0
	// longAmbiguityNats: on a sample of shortSampleLetters or more,
	// lingua scores the very trigrams the packed tables do, so only its
	// rule filters can change the outcome; such a sample goes to lingua
	// only when its two best languages are closer than this (a likelihood
	// ratio below e^2 ≈ 7). With every language a candidate, calling
	// lingua at 8 nats there cost 80% of the time.
	longAmbiguityNats = 2.0
	// kanaMinShare: Han text is Japanese when at least this share of its
	// CJK letters are kana. Japanese prose runs at 30-60% kana (UDHR
	// paragraphs: see TestLangKanaShare), Chinese at ~0%.
	kanaMinShare = 0.10
	// cjkLetterWeight: a Han, kana or Hangul letter carries about as
	// much text as three Latin letters, so it counts three times when
	// the scripts of a page are weighed (its majority script decides) and
	// in ScriptShare. The UDHR holds 3.5 times as many letters in English
	// as in Chinese, 2.3 times as many as in Japanese and 2.6 times as
	// many as in Korean (TestLangCJKLetterWeight); 3 is also the UTF-8
	// length of these letters, so the weighing is by bytes of text.
	cjkLetterWeight = 3
	// shortSampleLetters: lingua scores a text of fewer letters than this
	// with its 1- to 5-gram models in high-accuracy mode (trigrams alone
	// otherwise), so close calls on such samples go to that mode.
	shortSampleLetters = 120
	// highAccuracyMinLetters: below this many letters even lingua's
	// high-accuracy mode is a guess (and the langid stage drops such text
	// as no_language by default), so its models are not loaded for it.
	highAccuracyMinLetters = 30
	// minBigramLetters: a sample without any trigram is scored on its
	// bigrams from this many word letters on (about three Devanagari
	// words; a stray letter or two names nothing).
	minBigramLetters = 10
	// linguaPrecision: lingua's confidence values are used to 1e-9.
	linguaPrecision = 1e9
	// snapBytes is how far a sample boundary moves to reach a space, so
	// samples do not start or end inside a word.
	snapBytes = 32
)

// Options configures a Detector.
type Options struct {
	// Candidates are the ISO 639-1 codes detected among; nil means
	// every language the models cover (AllLanguages). Duplicates are
	// ignored.
	Candidates []string
	// Windows is the number of samples scored in a long document
	// (default DefaultWindows).
	Windows int
	// MaxWindows is the number of samples a long document may get when
	// they disagree (default DefaultMaxWindows; at least Windows).
	MaxWindows int
	// WindowChars is the length of a sample in characters (default
	// DefaultWindowChars).
	WindowChars int
	// LowAccuracy never loads lingua's high-accuracy (4- and 5-gram)
	// models. By default a close call between two confusable languages
	// (Danish and Bokmål, Czech and Slovak...) on a sample of 30 to 119
	// letters is decided by lingua in high-accuracy mode; their models
	// (~20 MB per language) load on first need.
	LowAccuracy bool
}

// Result is the outcome of Detect.
type Result struct {
	// Lang is the detected candidate's ISO 639-1 code, or Undetermined.
	Lang string
	// Confidence in [0, 1]: the share of the document's letters in the
	// detected language's script (ScriptShare), times the mean over the samples of
	// lingua's confidence for that language, each sample weighted by its
	// number of scored trigrams (1 when the script alone decides). 0 when
	// Lang is Undetermined.
	Confidence float64
	// Letters counts letters, and combining marks that follow a letter,
	// outside markup.
	Letters int
	// LetterShare is Letters over all non-space characters (markup counts
	// as non-letters); 0 for a text without any.
	LetterShare float64
	// Script is the name of the script most letters are in ("Latin",
	// "Cyrillic", "Han" (kana included)...); "" when there is none.
	Script string
	// ScriptShare is the share of letters in Script, Han, kana and
	// Hangul letters weighing cjkLetterWeight (3) Latin ones.
	ScriptShare float64
	// Windows is how many samples the n-gram model scored (0 when the
	// script decided).
	Windows int
	// LinguaWindows is how many of them were too close to call from the
	// packed tables and were decided by calling lingua.
	LinguaWindows int
}

// Detector identifies the language of documents among a fixed candidate
// set. It is safe for concurrent use.
type Detector struct {
	codes       []string // candidates; an index into codes is a candidate id
	byScript    [numScripts]scriptRule
	zh, ja      int // candidate ids of Chinese and Japanese, -1 when absent
	sr          int // candidate id of Serbian, -1 when absent
	srSlot      int // Serbian's column in the Cyrillic model, -1 when absent
	windows     int
	maxWindows  int
	windowChars int
	lowAcc      bool
	maxK        int
	setBits     uint
	pool        sync.Pool
}

// scriptRule says how a script is decided: by one candidate (single >= 0),
// by an n-gram model over several (group != nil), or not at all.
type scriptRule struct {
	single int
	group  *ngramGroup
}

// ngramGroup scores the candidates sharing one script.
type ngramGroup struct {
	script script
	model  *ngramModel
	ids    []int                    // candidate id of model.langs[j]
	shared *groupShared             // lingua's detectors, for close calls
	slot   [lingua.Unknown + 1]int8 // lingua.Language -> j, -1 when absent
}

var (
	cacheMu   sync.Mutex
	detectors = map[string]*detectorEntry{}
	groups    = map[string]*groupEntry{}
)

type detectorEntry struct {
	once sync.Once
	d    *Detector
	err  error
}

type groupEntry struct {
	once sync.Once
	g    *groupShared
	err  error
}

// groupShared is the expensive part of an ngramGroup, shared by every
// Detector whose candidates include the same languages of a script.
type groupShared struct {
	model *ngramModel
	// linguas holds lingua detectors over subsets of model.langs, keyed by
	// the subset's bit set (bit 63: high-accuracy mode).
	mu      sync.Mutex
	linguas map[uint64]lingua.LanguageDetector
}

// highAccuracyBit marks a high-accuracy detector's key. Bits 0-48 are
// languages: lingua has 49 Latin-script languages, the largest group.
const highAccuracyBit = 1 << 63

// linguaDetector returns a lingua detector over the languages of mask
// (indexes into model.langs), in high-accuracy mode when mask has
// highAccuracyBit, built on first use. Building one is cheap: lingua keeps
// each language's models in a process-wide cache, loaded once (the
// trigram models at construction, see sharedGroup).
func (g *groupShared) linguaDetector(mask uint64) lingua.LanguageDetector {
	g.mu.Lock()
	defer g.mu.Unlock()
	if det, ok := g.linguas[mask]; ok {
		return det
	}
	var langs []lingua.Language
	for j, l := range g.model.langs {
		if mask&(1<<j) != 0 {
			langs = append(langs, l)
		}
	}
	b := lingua.NewLanguageDetectorBuilder().FromLanguages(langs...)
	if mask&highAccuracyBit == 0 {
		b = b.WithLowAccuracyMode()
	}
	det := b.Build()
	g.linguas[mask] = det
	return det
}

// New returns a Detector for opts. Detectors, their packed tables and
// lingua's detectors are built once per distinct configuration and shared
// (lingua's detectors are safe for concurrent use: their methods only read
// the loaded models; see TestLangConcurrentDetect). The first call for a
// candidate set loads lingua's 1-3-gram models of its languages, which
// takes about half a second.
func New(opts Options) (*Detector, error) {
	codes, err := normalizeCandidates(opts.Candidates)
	if err != nil {
		return nil, err
	}
	if opts.Windows == 0 {
		opts.Windows = DefaultWindows
	}
	if opts.WindowChars == 0 {
		opts.WindowChars = DefaultWindowChars
	}
	if opts.MaxWindows == 0 {
		opts.MaxWindows = max(DefaultMaxWindows, opts.Windows)
	}
	if opts.Windows < 1 || opts.Windows > MaxWindows {
		return nil, fmt.Errorf("langid: windows %d out of range [1, %d]", opts.Windows, MaxWindows)
	}
	if opts.MaxWindows < opts.Windows || opts.MaxWindows > MaxWindows {
		return nil, fmt.Errorf("langid: max windows %d out of range [%d, %d]", opts.MaxWindows, opts.Windows, MaxWindows)
	}
	if opts.WindowChars < 50 || opts.WindowChars > MaxWindowChars {
		return nil, fmt.Errorf("langid: window chars %d out of range [50, %d]", opts.WindowChars, MaxWindowChars)
	}
	key := fmt.Sprintf("%s|%d|%d|%d|%v", strings.Join(codes, ","), opts.Windows, opts.MaxWindows, opts.WindowChars, opts.LowAccuracy)
	cacheMu.Lock()
	e, ok := detectors[key]
	if !ok {
		e = &detectorEntry{}
		detectors[key] = e
	}
	cacheMu.Unlock()
	e.once.Do(func() { e.d, e.err = build(codes, opts) })
	return e.d, e.err
}

// normalizeCandidates validates, lower-cases, de-duplicates and sorts codes.
func normalizeCandidates(in []string) ([]string, error) {
	if in == nil {
		in = AllLanguages()
	}
	seen := map[string]bool{}
	var out []string
	for _, c := range in {
		l, err := ParseCode(c)
		if err != nil {
			return nil, err
		}
		code := codeOf(l)
		if !seen[code] {
			seen[code] = true
			out = append(out, code)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("langid: no candidate languages")
	}
	sort.Strings(out)
	return out, nil
}

func build(codes []string, opts Options) (*Detector, error) {
	d := &Detector{codes: codes, zh: -1, ja: -1, sr: -1, srSlot: -1, windows: opts.Windows, maxWindows: opts.MaxWindows, windowChars: opts.WindowChars, lowAcc: opts.LowAccuracy}
	perScript := map[script][]lingua.Language{}
	for i, c := range codes {
		l, _ := ParseCode(c)
		switch l {
		case lingua.Chinese:
			d.zh = i
		case lingua.Japanese:
			d.ja = i
		case lingua.Serbian:
			d.sr = i
		}
		s := scriptOfLanguage(l)
		perScript[s] = append(perScript[s], l)
	}
	for s := script(0); s < numScripts; s++ {
		d.byScript[s].single = -1
		langs := perScript[s]
		if s == scriptHan || len(langs) == 0 {
			continue
		}
		sort.Slice(langs, func(a, b int) bool { return langs[a] < langs[b] })
		if len(langs) == 1 {
			d.byScript[s].single = indexOf(codes, codeOf(langs[0]))
			continue
		}
		sh, err := sharedGroup(langs)
		if err != nil {
			return nil, err
		}
		g := &ngramGroup{script: s, model: sh.model, shared: sh}
		for i := range g.slot {
			g.slot[i] = -1
		}
		for j, l := range langs {
			g.ids = append(g.ids, indexOf(codes, codeOf(l)))
			g.slot[l] = int8(j)
		}
		d.byScript[s].group = g
		if s == scriptCyrillic && d.sr >= 0 {
			d.srSlot = int(g.slot[lingua.Serbian])
		}
		d.maxK = max(d.maxK, len(langs))
	}
	// The trigram set of a sample must hold one entry per rune at load
	// <= 1/2; a sample has at most 4 bytes per character.
	for 1<<d.setBits < 2*4*d.windowChars {
		d.setBits++
	}
	d.pool.New = func() any { return d.newScratch() }
	return d, nil
}

func indexOf(list []string, s string) int {
	for i, x := range list {
		if x == s {
			return i
		}
	}
	return -1
}

// sharedGroup returns the packed tables and lingua detector for langs,
// building them on first use.
func sharedGroup(langs []lingua.Language) (*groupShared, error) {
	parts := make([]string, len(langs))
	for i, l := range langs {
		parts[i] = codeOf(l)
	}
	key := strings.Join(parts, ",")
	cacheMu.Lock()
	e, ok := groups[key]
	if !ok {
		e = &groupEntry{}
		groups[key] = e
	}
	cacheMu.Unlock()
	e.once.Do(func() {
		m, err := buildModel(langs)
		if err != nil {
			e.err = err
			return
		}
		// Load lingua's trigram models of these languages now, not on
		// the first close call.
		lingua.NewLanguageDetectorBuilder().FromLanguages(langs...).
			WithLowAccuracyMode().WithPreloadedLanguageModels().Build()
		e.g = &groupShared{model: m, linguas: map[uint64]lingua.LanguageDetector{}}
	})
	return e.g, e.err
}

// Candidates returns the detector's candidate codes, sorted.
func (d *Detector) Candidates() []string { return append([]string(nil), d.codes...) }

// TableBytes returns the resident size of the packed n-gram tables the
// detector uses (shared with other detectors over the same languages).
func (d *Detector) TableBytes() int64 {
	var n int64
	for _, r := range d.byScript {
		if r.group != nil {
			n += r.group.model.bytesResident
		}
	}
	return n
}

// scratch is per-call working memory, pooled so Detect does not allocate.
type scratch struct {
	setKeys []uint64
	setGen  []uint32
	gen     uint32
	used    int
	keys    []uint64 // the sample's distinct n-gram keys, in text order
	rows    []uint32 // their rows
	lo, hi  []uint64 // per-row-word lane sums (see addRow)
	sums    []uint64 // per-language sums of quantised log-probabilities
	scores  []float64
	dist    []float64
	mix     []float64
}

func (d *Detector) newScratch() *scratch {
	n := 1 << d.setBits
	k := max(d.maxK, 1)
	w := 4 * ((k+3)/4 + 8) // room for any group's padded row
	return &scratch{
		setKeys: make([]uint64, n), setGen: make([]uint32, n),
		keys: make([]uint64, 0, n/2), rows: make([]uint32, n/2),
		lo: make([]uint64, w/4), hi: make([]uint64, w/4), sums: make([]uint64, w),
		scores: make([]float64, k), dist: make([]float64, k), mix: make([]float64, k),
	}
}

// resetSet empties the trigram set in O(1) by moving to a new generation.
func (sc *scratch) resetSet() {
	sc.gen++
	sc.used = 0
	if sc.gen == 0 { // wrapped: stale generations could collide
		clear(sc.setGen)
		sc.gen = 1
	}
}

// addUnique inserts key and reports whether it was new. A full set (load
// 1/2) accepts nothing more; that cannot happen within the rune bound the
// set is sized for.
func (sc *scratch) addUnique(key uint64, shift uint) bool {
	mask := uint64(len(sc.setKeys) - 1)
	i := (key * hashMul) >> shift
	for {
		if sc.setGen[i] != sc.gen {
			if 2*sc.used >= len(sc.setKeys) {
				return false
			}
			sc.setGen[i] = sc.gen
			sc.setKeys[i] = key
			sc.used++
			return true
		}
		if sc.setKeys[i] == key {
			return false
		}
		i = (i + 1) & mask
	}
}

// Detect identifies the language of text. It never panics, whatever the
// bytes (invalid UTF-8 and NUL count as symbols), and does not allocate
// except when a close call is handed to lingua.
func (d *Detector) Detect(text string) Result {
	r, _ := d.detect(text)
	return r
}

// detect is Detect that also returns the text's weighted letter count
// (Han, kana and Hangul letters weigh cjkLetterWeight).
func (d *Detector) detect(text string) (Result, int) {
	return d.detectStages(text, true)
}

// detectStages is detect with the close-pair second stage (closepairs.go)
// on or off; off, the answer is the n-gram model's alone.
func (d *Detector) detectStages(text string, closePairs bool) (Result, int) {
	st := scanText(text)
	res := Result{Lang: Undetermined, Letters: st.letters}
	if st.nonSpace > 0 {
		res.LetterShare = float64(st.letters) / float64(st.nonSpace)
	}
	group, weighted := scriptWeights(&st)
	dom, best := scriptNone, 0
	for s := scriptLatin; s < numScripts; s++ {
		if group[s] > best {
			dom, best = s, group[s]
		}
	}
	if dom == scriptNone {
		return res, weighted
	}
	res.Script = scriptNames[dom]
	res.ScriptShare = float64(best) / float64(weighted)
	top, within := -1, 1.0
	switch r := d.byScript[dom]; {
	case dom == scriptHan:
		kana := st.scripts[scriptHiragana] + st.scripts[scriptKatakana]
		if float64(kana) >= kanaMinShare*float64(best/cjkLetterWeight) {
			top = d.ja
		} else {
			top = d.zh
		}
	case r.group != nil:
		top, within = d.scoreSamples(r.group, text, st, &res)
		if dom == scriptLatin && top >= 0 && d.srSlot >= 0 {
			if l, _ := ParseCode(d.codes[top]); l == lingua.Croatian || l == lingua.Bosnian {
				sample := text
				if cut := 4 * d.windowChars; len(sample) > cut {
					sample = sample[:snapBackward(sample, cut)]
				}
				if gap, ok := d.serbianGap(r.group, int(r.group.slot[l]), sample); ok && gap > serbianMargin {
					top = d.sr
				}
			}
		}
		if closePairs && dom == scriptLatin && top >= 0 {
			top = d.closePair(top, text)
		}
	default:
		top = r.single
	}
	if top < 0 {
		return res, weighted
	}
	res.Lang = d.codes[top]
	res.Confidence = math.Min(1, res.ScriptShare*within)
	return res, weighted
}

// scriptWeights sums a text's letters per script group (kana with Han),
// a Han, kana or Hangul letter counting cjkLetterWeight times, and returns
// the groups and their total.
func scriptWeights(st *textStats) (group [numScripts]int, total int) {
	for s := scriptNone; s < numScripts; s++ {
		gs, w := s, 1
		switch s {
		case scriptHiragana, scriptKatakana:
			gs, w = scriptHan, cjkLetterWeight
		case scriptHan, scriptHangul:
			w = cjkLetterWeight
		}
		group[gs] += w * st.scripts[s]
		total += w * st.scripts[s]
	}
	return group, total
}

// scoreSamples scores samples of text with g's model and returns the
// winning candidate id and its mean confidence, or -1.
func (d *Detector) scoreSamples(g *ngramGroup, text string, st textStats, res *Result) (int, float64) {
	sc := d.pool.Get().(*scratch)
	defer d.pool.Put(sc)
	k := len(g.model.langs)
	mix := sc.mix[:k]
	clear(mix)
	n := len(text)
	if n == 0 || st.runes == 0 {
		return -1, 0
	}
	// wb: the sample length in bytes, from the text's mean rune width.
	wb := max(1, int(float64(d.windowChars)*float64(n)/float64(st.runes)))
	total, top := 0.0, 0
	score := func(sample string) {
		if st.marks > 0 && !belowU0300(sample) {
			// Decomposed accents ("e" + U+0301) would split words at
			// every mark; lingua's models are of composed text.
			sample = norm.NFC.String(sample)
		}
		hits, letters := d.scoreSample(g.model, sample, sc, 3)
		if hits == 0 && letters >= minBigramLetters {
			// Words of one or two letters only (Devanagari text splits
			// at every vowel sign, which is a mark, not a letter, for
			// lingua too): score bigrams, backing off to letters, as
			// lingua's high-accuracy mode adds them for short text;
			// below minBigramLetters letters nothing is named.
			hits, letters = d.scoreSample(g.model, sample, sc, 2)
		}
		if hits == 0 {
			return
		}
		dist := sc.dist[:k]
		if gap := softmax(sc.scores[:k], dist); gap < ambiguityNats && (letters < shortSampleLetters || gap < longAmbiguityNats) {
			// gap is finite, so at least two languages are in the mask.
			mask := nearBest(sc.scores[:k])
			if letters < shortSampleLetters && letters >= highAccuracyMinLetters && !d.lowAcc {
				if two := topTwo(sc.scores[:k]); g.model.sameCluster(two) {
					mask = two | highAccuracyBit
				}
			}
			if !linguaDist(g, g.shared.linguaDetector(mask), sample, dist) {
				// lingua names nothing (its words are too short to
				// score, as in Devanagari text): keep the packed scores.
				softmax(sc.scores[:k], dist)
			}
			res.LinguaWindows++
		}
		wt := float64(hits)
		for j, p := range dist {
			mix[j] += wt * p
		}
		total += wt
		res.Windows++
		top = 0
		for j := 1; j < k; j++ {
			if mix[j] > mix[top] {
				top = j
			}
		}
	}
	if n <= wb*d.windows {
		// Short enough to read all of it: consecutive pieces.
		pieces := (n + wb - 1) / wb
		prev := 0
		for i := 0; i < pieces; i++ {
			end := n
			if i < pieces-1 {
				end = max(prev, snapForward(text, (i+1)*n/pieces))
			}
			score(text[prev:end])
			prev = end
		}
	} else {
		// Samples at start, end, middle, then quarter points... while
		// they disagree, up to maxWindows and as many as fit side by side.
		limit := min(d.maxWindows, n/wb)
		for i := 0; i < limit; i++ {
			if i >= d.windows && total > 0 && mix[top] >= agreeShare*total {
				break
			}
			start := int(sampleFrac(i) * float64(n-wb))
			end := start + wb
			if start > 0 {
				start = snapForward(text, start)
			}
			if end < n {
				end = snapBackward(text, end)
			}
			if end > start {
				score(text[start:end])
			}
		}
	}
	if total == 0 || mix[top] == 0 {
		return -1, 0
	}
	return g.ids[top], mix[top] / total
}

// belowU0300 reports whether every rune of s is below U+0300 (its UTF-8
// lead bytes are below 0xCC), so s is in NFC already: the first code point
// that NFC may change or compose with, U+0300 COMBINING GRAVE ACCENT,
// starts the Combining Diacritical Marks block (Unicode Standard Annex
// #15, the NFC_Quick_Check property of the Unicode Character Database is
// Yes for every code point below it). It spares the normaliser's scan of
// Latin samples of a page that holds decomposed accents elsewhere.
func belowU0300(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] >= 0xcc {
			return false
		}
	}
	return true
}

// sampleFrac is the relative position of the i-th sample of a long text:
// 0 (start), 1 (end), then 1/2, 1/4, 3/4, 1/8, 5/8, 3/8, 7/8... (the base-2
// van der Corput sequence), so any number of samples spreads evenly.
func sampleFrac(i int) float64 {
	switch i {
	case 0:
		return 0
	case 1:
		return 1
	}
	f, scale := 0.0, 0.5
	for k := i - 1; k > 0; k >>= 1 {
		f += float64(k&1) * scale
		scale /= 2
	}
	return f
}

// snapForward moves i to just after a nearby space, else to a rune start.
func snapForward(s string, i int) int {
	for j := i; j < len(s) && j < i+snapBytes; j++ {
		if s[j] == ' ' || s[j] == '\n' {
			return j + 1
		}
	}
	for i < len(s) && !utf8.RuneStart(s[i]) {
		i++
	}
	return i
}

// snapBackward moves i back to a nearby space, else to a rune start.
func snapBackward(s string, i int) int {
	for j := i; j > 0 && j > i-snapBytes; j-- {
		if s[j-1] == ' ' || s[j-1] == '\n' {
			return j - 1
		}
	}
	for i > 0 && i < len(s) && !utf8.RuneStart(s[i]) {
		i--
	}
	return i
}

// scoreSample sums, for each language of m, lingua's log-probability of
// every distinct trigram of the sample's words into sc.scores, as lingua
// does in its trigram mode: words are maximal runs of letters (\p{L}),
// lower-cased; Han, kana and Hangul letters are one-letter words (no
// trigram); markup is skipped. It returns the number of distinct trigrams
// that any language knows (at any back-off level) and the number of word
// letters (lingua's "character count").
//
// With order 2 it scores distinct bigrams instead (a word's first letter
// alone when the word has one letter), each backing off to its first
// letter.
//
// It works in three passes: collect the distinct keys, look up their rows
// (independent probes, so the processor overlaps their cache misses), sum
// the rows.
func (d *Detector) scoreSample(m *ngramModel, s string, sc *scratch, order int) (hits, letters int) {
	t := classTable()
	sc.resetSet()
	keys := sc.keys[:0]
	shift := 64 - d.setBits
	var p1, p2 rune
	n := 0 // letters of the current word seen so far, capped at 2
	for i := 0; i < len(s); {
		b := s[i]
		var r rune
		if b < utf8.RuneSelf {
			switch {
			case b >= 'a' && b <= 'z':
				r = rune(b)
			case b >= 'A' && b <= 'Z':
				r = rune(b + 'a' - 'A')
			case b == '<' || b == '&':
				if l := markupLen(s[i:]); l > 0 {
					i += l
					n = 0
					continue
				}
				fallthrough
			default:
				i++
				n = 0
				continue
			}
			i++
		} else {
			var size int
			r, size = decodeRune(s, i)
			i += size
			c := runeClass(t, r)
			if c&classWord == 0 {
				n = 0
				continue
			}
			switch script(c & classScript) {
			case scriptHan, scriptHiragana, scriptKatakana, scriptHangul:
				letters++
				n = 0
				continue
			}
			r = unicode.ToLower(r)
		}
		letters++
		if order == 2 {
			// A unigram key is the letter alone (key>>21 == 0), a
			// bigram key has its first letter above it.
			key := uint64(r)
			if n > 0 {
				key |= uint64(p1) << 21
			}
			if sc.addUnique(key, shift) {
				keys = append(keys, key)
			}
			n = 1
		} else if n < 2 {
			n++
		} else if key := uint64(p2)<<42 | uint64(p1)<<21 | uint64(r); sc.addUnique(key, shift) {
			keys = append(keys, key)
		}
		p2, p1 = p1, r
	}
	sc.keys = keys
	rows := sc.rows[:len(keys)]
	for i, key := range keys {
		switch {
		case order == 3:
			rows[i] = m.triRow(key)
		case key>>21 == 0:
			rows[i], _ = m.uni.lookup(key)
		default:
			rows[i] = m.biRow(key)
		}
	}
	hits = m.sumRows(rows, sc)
	return hits, letters
}

// lanes selects 16-bit lanes 0 and 2 of a row word into the two 32-bit
// lanes of a sum.
const lanes = 0x0000ffff_0000ffff

// flushHits bounds how many rows are summed in 32-bit lanes before they
// are moved to the 64-bit sums: 65536 values below 2^16 fit 32 bits.
const flushHits = 1 << 16

// sumRows adds the rows (row 0: none) and writes each language's sum of
// log-probabilities into sc.scores; it returns how many rows were not 0.
// A row word holds four languages' quantised values; sc.lo sums languages
// 0 and 2 of each word, sc.hi languages 1 and 3, each in a 32-bit lane, so
// one addition serves two languages. Integer sums are exact, so the
// scores do not depend on the order of the rows.
func (m *ngramModel) sumRows(rows []uint32, sc *scratch) int {
	words := (len(m.langs) + 3) / 4
	lo, hi := sc.lo[:words], sc.hi[:words]
	sums := sc.sums[:4*words]
	clear(lo)
	clear(hi)
	clear(sums)
	hits := 0
	for _, r := range rows {
		if r == 0 {
			continue
		}
		row := m.rows[int(r)*m.words+1:]
		row = row[:len(lo)]
		for w, x := range row {
			lo[w] += x & lanes
			hi[w] += x >> 16 & lanes
		}
		hits++
		if hits%flushHits == 0 {
			flushLanes(lo, hi, sums)
		}
	}
	flushLanes(lo, hi, sums)
	scores := sc.scores[:len(m.langs)]
	for j := range scores {
		scores[j] = -float64(sums[j]) / qScale
	}
	return hits
}

// flushLanes moves the lane sums into sums and clears them.
func flushLanes(lo, hi, sums []uint64) {
	for w := range lo {
		sums[4*w] += lo[w] & 0xffffffff
		sums[4*w+2] += lo[w] >> 32
		sums[4*w+1] += hi[w] & 0xffffffff
		sums[4*w+3] += hi[w] >> 32
		lo[w], hi[w] = 0, 0
	}
}

// confusable lists groups of closely related languages whose short texts
// lingua's trigram model often cannot tell apart but its high-accuracy
// mode can (from memory, common knowledge; the UDHR da/nb paragraphs show
// it). Only these pairs get the high-accuracy models, so at most their
// languages' models are ever loaded (~20 MB each).
var confusable = [][]lingua.Language{
	{lingua.Danish, lingua.Bokmal, lingua.Nynorsk, lingua.Swedish},
	{lingua.Czech, lingua.Slovak},
	{lingua.Spanish, lingua.Portuguese, lingua.Catalan},
	{lingua.Indonesian, lingua.Malay},
	{lingua.Bosnian, lingua.Croatian, lingua.Slovene},
	{lingua.Afrikaans, lingua.Dutch},
	{lingua.Zulu, lingua.Xhosa},
	{lingua.Sotho, lingua.Tswana},
}

// clusterOf maps a language to its confusable cluster (1-based; 0: none).
var clusterOf = func() (m [lingua.Unknown + 1]uint8) {
	for i, c := range confusable {
		for _, l := range c {
			m[l] = uint8(i + 1)
		}
	}
	return
}()

// sameCluster reports whether the (two) languages of mask are confusable.
func (m *ngramModel) sameCluster(mask uint64) bool {
	var c uint8
	for j, l := range m.langs {
		if mask&(1<<j) == 0 {
			continue
		}
		if clusterOf[l] == 0 || (c != 0 && clusterOf[l] != c) {
			return false
		}
		c = clusterOf[l]
	}
	return c != 0
}

// topTwo returns the bit set of the two best-scoring languages.
func topTwo(scores []float64) uint64 {
	a, b := -1, -1
	for j, s := range scores {
		if s >= 0 {
			continue
		}
		switch {
		case a < 0 || s > scores[a]:
			a, b = j, a
		case b < 0 || s > scores[b]:
			b = j
		}
	}
	return 1<<a | 1<<b
}

// nearBest returns the bit set of the languages scoring within
// ambiguityNats of the best (at least two: the caller saw a close call).
func nearBest(scores []float64) uint64 {
	best := math.Inf(-1)
	for _, s := range scores {
		if s < 0 && s > best {
			best = s
		}
	}
	var mask uint64
	for j, s := range scores {
		if s < 0 && s >= best-ambiguityNats {
			mask |= 1 << j
		}
	}
	return mask
}

// softmax turns summed log-probabilities into lingua's confidence values:
// languages whose sum is negative share probability exp(s)/Σexp(s); a
// language of which no n-gram was found (sum 0) gets 0, as in lingua. It
// returns the gap in nats between the best and second-best language
// (+Inf when fewer than two languages scored).
func softmax(scores, dist []float64) float64 {
	best, second := math.Inf(-1), math.Inf(-1)
	for _, s := range scores {
		if s >= 0 {
			continue
		}
		if s > best {
			best, second = s, best
		} else if s > second {
			second = s
		}
	}
	clear(dist)
	if math.IsInf(best, -1) {
		return math.Inf(1)
	}
	sum := 0.0
	for j, s := range scores {
		if s < 0 {
			dist[j] = math.Exp(s - best)
			sum += dist[j]
		}
	}
	for j := range dist {
		dist[j] /= sum
	}
	return best - second
}

// linguaDist asks det for the confidence values of a sample and writes
// them into dist, indexed like g.model.langs; false when lingua gives
// every language 0. Lingua is given the sample
// as the packed scorer read it: markup removed, and letters of other
// scripts too (lingua picks the alphabet most words are in, and breaks
// ties between alphabets at random).
func linguaDist(g *ngramGroup, det lingua.LanguageDetector, sample string, dist []float64) bool {
	clear(dist)
	any := false
	for _, v := range det.ComputeLanguageConfidenceValues(linguaText(sample, g.script)) {
		if j := g.slot[v.Language()]; j >= 0 {
			// lingua sums in map order, so its values vary in the last
			// bits from call to call; rounding keeps results identical.
			dist[j] = math.Round(v.Value()*linguaPrecision) / linguaPrecision
			any = any || dist[j] > 0
		}
	}
	return any
}

// linguaText returns s with tags, entities and letters of scripts other
// than keep replaced by spaces.
func linguaText(s string, keep script) string {
	t := classTable()
	var b strings.Builder
	b.Grow(len(s))
	for i := 0; i < len(s); {
		c := s[i]
		if c == '<' || c == '&' {
			if l := markupLen(s[i:]); l > 0 {
				b.WriteByte(' ')
				i += l
				continue
			}
		}
		if c < utf8.RuneSelf {
			if keep != scriptLatin && asciiKind[c] == asciiLetter {
				c = ' '
			}
			b.WriteByte(c)
			i++
			continue
		}
		r, n := utf8.DecodeRuneInString(s[i:])
		if cl := runeClass(t, r); cl&classWord != 0 && script(cl&classScript) != keep {
			b.WriteByte(' ')
		} else {
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}
