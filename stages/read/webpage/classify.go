package webpage

import (
	"bytes"
	"strings"

	"golang.org/x/net/html/atom"

	"winnow/filters"
)

// Boilerplate classification: the paragraph classifier of Pomikálek 2011
// (PhD thesis "Removing Boilerplate and Duplicate Content from Web
// Corpora", Masaryk University, ch. 3), with its published defaults (the
// rules and numbers below are recalled from memory and match the defaults
// documented for the thesis's reference implementation).
//
// Context-free step, per block, first rule that applies:
//
//	link density > maxLinkDensity           bad
//	contains "©"                            bad
//	length < lengthLow: with a link         bad, else short
//	stop-word density >= stopwordsHigh      good if length > lengthHigh, else near-good
//	stop-word density >= stopwordsLow       near-good
//	otherwise                               bad
//
// Context-sensitive step: short headings followed by a good block within
// maxHeadingDistance characters become near-good; a short block between
// two good blocks (skipping short and near-good ones) is good, between two
// bad ones bad, and between a good and a bad one good only when a
// near-good block is next to it on the bad side; a near-good block is bad
// only between two bad ones; finally a heading the context step made bad
// (not bad by itself) is good when a good block follows within
// maxHeadingDistance. The page's ends count as bad blocks.
//
// Two adaptations, ours: a <pre> block is judged by its link density only
// (code has no stop words), and is near-good when it passes, so code
// examples stay with the prose around them and go with the boilerplate
// around them. The stop-word lists are those of stopwords-iso (in
// filters), which are longer than the thesis's lists, so densities run
// higher; the thresholds are kept as published.
const (
	lengthLow          = 70  // characters; below, a block is short
	lengthHigh         = 200 // characters; above, a stop-word-rich block is good outright
	stopwordsLow       = 0.30
	stopwordsHigh      = 0.32
	maxLinkDensity     = 0.2
	maxHeadingDistance = 200 // characters between a heading and good text
)

// minAutoDensity decides the language-independent mode for a page whose
// language is not declared: when under 10% of its words are English stop
// words it is taken to be in another language and classified with both
// stop-word thresholds at 0, as the thesis does for languages without a
// list (ch. 3). The 10% is our choice: English prose runs near 50% with
// the stopwords-iso list.
const minAutoDensity = 0.10

var copyright = []byte("©")

type class uint8

const (
	bad class = iota
	short
	nearGood
	good
)

// classify sets every block's class.
func (ex *extractor) classify(opt Options, lang, contentLang string) {
	if opt.KeepBoilerplate {
		for i := range ex.blocks {
			ex.blocks[i].class = good
		}
		return
	}
	sw, densities := ex.stopwords(lang, contentLang)
	low, high := stopwordsLow, stopwordsHigh
	if sw == nil {
		low, high = 0, 0
	}
	for i := range ex.blocks {
		b := &ex.blocks[i]
		ld := float64(b.linkRunes) / float64(b.runes)
		text := ex.buf[b.start:b.end]
		switch {
		case ld > maxLinkDensity:
			b.cf = bad
		case b.pre:
			b.cf = nearGood
		case bytes.Contains(text, copyright):
			b.cf = bad
		case b.runes < lengthLow:
			if b.linkRunes > 0 {
				b.cf = bad
			} else {
				b.cf = short
			}
		case densities[i] >= high:
			if b.runes > lengthHigh {
				b.cf = good
			} else {
				b.cf = nearGood
			}
		case densities[i] >= low:
			b.cf = nearGood
		default:
			b.cf = bad
		}
		b.class = b.cf
	}
	ex.revise()
	ex.fillRegion()
}

// The content region (our addition to the thesis's method, for pages such
// as software documentation whose paragraphs are short and dense in code
// and names, where the context step alone keeps too little): the deepest
// block-level element holding at least regionShare of the page's good
// text. Inside it, every block that is not link-dense (link density at
// most regionMaxLinkDensity) and carries no "©" is kept too. A page whose
// region is the whole body gets no fill. The good text counted is that of
// the blocks good in the end or good or near-good by themselves (the
// context-free step), so that a section of short paragraphs the context
// step dropped still pulls the region up to its parent.
const (
	regionShare          = 0.9
	regionMaxLinkDensity = 0.5
)

func (ex *extractor) fillRegion() {
	ev := make([]int, len(ex.elems))
	total := 0
	for _, b := range ex.blocks {
		if b.class == good || b.cf == good || b.cf == nearGood {
			total += b.runes
			for e := b.elem; ; e = ex.elems[e].parent {
				ev[e] += b.runes
				if e == 0 {
					break
				}
			}
		}
	}
	if total == 0 {
		return
	}
	// best[e] is the child of e with the most evidence.
	best := make([]int32, len(ex.elems))
	for i := 1; i < len(ex.elems); i++ {
		p := ex.elems[i].parent
		if best[p] == 0 || ev[i] > ev[best[p]] {
			best[p] = int32(i)
		}
	}
	region := int32(0)
	for best[region] != 0 && float64(ev[best[region]]) >= regionShare*float64(total) {
		region = best[region]
	}
	switch ex.elems[region].tag {
	case 0, atom.Html, atom.Body:
		return
	}
	for i := range ex.blocks {
		b := &ex.blocks[i]
		if b.class == good || float64(b.linkRunes) > regionMaxLinkDensity*float64(b.runes) ||
			bytes.Contains(ex.buf[b.start:b.end], copyright) {
			continue
		}
		for e := b.elem; e != 0; e = ex.elems[e].parent {
			if e == region {
				b.class = good
				break
			}
		}
	}
}

// stopwords picks the stop-word list (nil for the language-independent
// mode) and returns each block's stop-word density under it.
func (ex *extractor) stopwords(lang, contentLang string) (*filters.Stopwords, []float64) {
	declared := true
	if lang == "" {
		lang = primaryTag(ex.htmlLang)
	}
	if lang == "" {
		lang = primaryTag(contentLang)
	}
	if lang == "" {
		lang, declared = "en", false
	}
	sw, err := filters.StopwordsFor(lang)
	if err != nil {
		ex.usedLang = ""
		return nil, make([]float64, len(ex.blocks))
	}
	d := make([]float64, len(ex.blocks))
	covered, tokens := 0, 0
	all := string(ex.buf) // one copy for every block's text
	for i, b := range ex.blocks {
		if b.pre || b.runes < lengthLow {
			continue // never judged by density
		}
		text := all[b.start:b.end]
		ex.scratch.Split(text)
		c := filters.CountStopwords(&ex.scratch, text, sw)
		if c.Tokens > 0 {
			d[i] = float64(c.Covered) / float64(c.Tokens)
		}
		covered += c.Covered
		tokens += c.Tokens
	}
	if !declared && tokens > 0 && float64(covered)/float64(tokens) < minAutoDensity {
		ex.usedLang = ""
		return nil, d
	}
	ex.usedLang = lang
	return sw, d
}

// primaryTag returns the lower-case primary subtag of a BCP 47 language
// tag ("en-US" → "en"), or of the first tag of a Content-Language list.
func primaryTag(tag string) string {
	tag, _, _ = strings.Cut(tag, ",")
	tag = strings.TrimSpace(tag)
	if i := strings.IndexAny(tag, "-_"); i >= 0 {
		tag = tag[:i]
	}
	return strings.ToLower(tag)
}

// goodWithin reports whether a good block follows block i within
// maxHeadingDistance characters.
func (ex *extractor) goodWithin(i int) bool {
	dist := 0
	for j := i + 1; j < len(ex.blocks) && dist <= maxHeadingDistance; j++ {
		if ex.blocks[j].class == good {
			return true
		}
		dist += ex.blocks[j].runes
	}
	return false
}

// neighbours returns, for every block, the class of the nearest block
// before it (dir -1) or after it (dir +1) that is not short (nor
// near-good when ignoreNearGood); the page's ends are bad. One pass, so
// pages of many short blocks stay linear.
func (ex *extractor) neighbours(dir int, ignoreNearGood bool) []class {
	bs := ex.blocks
	out := make([]class, len(bs))
	last := bad
	// Walk towards the neighbour's side: for the previous neighbour,
	// front to back; for the next one, back to front.
	if dir < 0 {
		for i := 0; i < len(bs); i++ {
			out[i] = last
			if c := bs[i].class; c != short && !(ignoreNearGood && c == nearGood) {
				last = c
			}
		}
	} else {
		for i := len(bs) - 1; i >= 0; i-- {
			out[i] = last
			if c := bs[i].class; c != short && !(ignoreNearGood && c == nearGood) {
				last = c
			}
		}
	}
	return out
}

// revise is the context-sensitive step.
func (ex *extractor) revise() {
	bs := ex.blocks
	for i := range bs {
		if bs[i].heading && bs[i].class == short && ex.goodWithin(i) {
			bs[i].class = nearGood
		}
	}
	// Short blocks, decided on the classes before this pass.
	prevIgn, nextIgn := ex.neighbours(-1, true), ex.neighbours(1, true)
	prevAny, nextAny := ex.neighbours(-1, false), ex.neighbours(1, false)
	next := make([]class, len(bs))
	for i := range bs {
		next[i] = bs[i].class
		if bs[i].class != short {
			continue
		}
		prev, nxt := prevIgn[i], nextIgn[i]
		switch {
		case prev == good && nxt == good:
			next[i] = good
		case prev == bad && nxt == bad:
			next[i] = bad
		case prev == bad && prevAny[i] == nearGood, nxt == bad && nextAny[i] == nearGood:
			next[i] = good
		default:
			next[i] = bad
		}
	}
	for i := range bs {
		bs[i].class = next[i]
	}
	// Near-good blocks, in order: no block is short any more, and those
	// before block i are already decided, so its previous neighbour is
	// block i-1 and its next one the first later block not near-good.
	nextIgn = ex.neighbours(1, true)
	for i := range bs {
		if bs[i].class != nearGood {
			continue
		}
		prev := bad
		if i > 0 {
			prev = bs[i-1].class
		}
		if prev == bad && nextIgn[i] == bad {
			bs[i].class = bad
		} else {
			bs[i].class = good
		}
	}
	for i := range bs {
		if bs[i].heading && bs[i].class == bad && bs[i].cf != bad && ex.goodWithin(i) {
			bs[i].class = good
		}
	}
}
