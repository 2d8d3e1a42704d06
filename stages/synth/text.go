package synth

import (
	"math/rand/v2"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// This file holds the small text machinery every document generator uses:
// templates with {slot} markers compiled once at start-up into literal and
// slot pieces, decks that draw templates without replacement inside one
// document (so a document does not repeat its own sentences), and a byte
// buffer the current document is built into. Nothing here formats with
// fmt: the hot path is append calls on one reused buffer.

// slotFn appends one value for a {slot} marker to the document being built.
type slotFn func(g *gen)

// piece is a literal run of a template or a slot to fill.
type piece struct {
	lit string
	fn  slotFn
}

// tmpl is a compiled template.
type tmpl []piece

// slotTable maps slot names to their fillers; filled by registerSlots before
// any template is compiled.
var slotTable = map[string]slotFn{}

// bankSlot returns a filler that picks one entry of b.
func bankSlot(b []string) slotFn { return func(g *gen) { g.w(g.pick(b)) } }

// compile turns "Remove the {part} with a {tool}." into pieces. An unknown
// slot name is a bug in the built-in templates, caught at start-up by every
// test of the package.
func compile(src string) tmpl {
	var t tmpl
	for {
		i := strings.IndexByte(src, '{')
		if i < 0 {
			if src != "" {
				t = append(t, piece{lit: src})
			}
			return t
		}
		j := strings.IndexByte(src[i:], '}')
		if j < 0 {
			panic("synth: unclosed slot in template " + strconv.Quote(src))
		}
		name := src[i+1 : i+j]
		fn, ok := slotTable[name]
		if !ok {
			panic("synth: unknown slot {" + name + "} in template " + strconv.Quote(src))
		}
		if i > 0 {
			t = append(t, piece{lit: src[:i]})
		}
		t = append(t, piece{fn: fn})
		src = src[i+j+1:]
	}
}

// compileAll compiles a list of templates.
func compileAll(srcs []string) []tmpl {
	out := make([]tmpl, len(srcs))
	for i, s := range srcs {
		out[i] = compile(s)
	}
	return out
}

// deck is a set of templates drawn without replacement within a document.
type deck struct {
	id int
	ts []tmpl
}

// decks lists every deck so a generator can size its per-deck state.
var decks []*deck

// newDeck compiles srcs into a registered deck.
func newDeck(srcs []string) *deck {
	d := &deck{id: len(decks), ts: compileAll(srcs)}
	decks = append(decks, d)
	return d
}

// deckState is a generator's position in one deck's current shuffle.
type deckState struct {
	order []int
	pos   int
	used  int // draws in the current document
}

// gen builds one document at a time into b from the seeded stream r.
type gen struct {
	r     *rand.Rand
	b     []byte
	decks []deckState
	// dealer is the dealer of the page being built ({dealer}, {town}).
	dealer dealerInfo
	// kinds is scratch space for paragraphKinds.
	kinds [6]int
}

func init() {
	registerSlots()
	setupManuals()
	setupForum()
	setupDealer()
	setupForeign()
}

func newGen(seed uint64) *gen {
	g := &gen{
		r:     rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15)),
		b:     make([]byte, 0, 64<<10),
		decks: make([]deckState, len(decks)),
	}
	for i, d := range decks {
		g.decks[i].order = make([]int, len(d.ts))
		g.decks[i].pos = len(d.ts)
	}
	return g
}

// reset starts a new document: empty buffer, all decks reshuffled on their
// next draw.
func (g *gen) reset() {
	g.b = g.b[:0]
	for i := range g.decks {
		g.decks[i].pos = len(g.decks[i].order)
		g.decks[i].used = 0
	}
}

// left is how many templates of d the current document has not used yet.
func (g *gen) left(d *deck) int { return len(d.ts) - g.decks[d.id].used }

// draw returns the next template of d, reshuffling when the deck runs out.
func (g *gen) draw(d *deck) tmpl {
	st := &g.decks[d.id]
	if st.pos >= len(st.order) {
		for i := range st.order {
			st.order[i] = i
		}
		g.r.Shuffle(len(st.order), func(i, j int) { st.order[i], st.order[j] = st.order[j], st.order[i] })
		st.pos = 0
	}
	t := d.ts[st.order[st.pos]]
	st.pos++
	st.used++
	return t
}

func (g *gen) w(s string)     { g.b = append(g.b, s...) }
func (g *gen) wb(c byte)      { g.b = append(g.b, c) }
func (g *gen) sp()            { g.b = append(g.b, ' ') }
func (g *gen) nl()            { g.b = append(g.b, '\n') }
func (g *gen) para()          { g.b = append(g.b, '\n', '\n') }
func (g *gen) intn(n int) int { return g.r.IntN(n) }

// between returns a uniform integer in [lo, hi].
func (g *gen) between(lo, hi int) int { return lo + g.r.IntN(hi-lo+1) }

// chance is true with probability p.
func (g *gen) chance(p float64) bool { return g.r.Float64() < p }

// pick returns a uniform entry of b.
func (g *gen) pick(b []string) string { return b[g.r.IntN(len(b))] }

// num appends a uniform integer in [lo, hi].
func (g *gen) num(lo, hi int) { g.b = strconv.AppendInt(g.b, int64(g.between(lo, hi)), 10) }

// dec appends a decimal in [lo, hi] tenths, e.g. dec(5, 30) -> "0.5".."3.0".
func (g *gen) dec(lo, hi int) {
	v := g.between(lo, hi)
	g.b = strconv.AppendInt(g.b, int64(v/10), 10)
	g.b = append(g.b, '.', byte('0'+v%10))
}

// expand appends t with its slots filled.
func (g *gen) expand(t tmpl) {
	for _, p := range t {
		if p.fn != nil {
			p.fn(g)
		} else {
			g.b = append(g.b, p.lit...)
		}
	}
}

// sentence appends t and capitalises its first letter.
func (g *gen) sentence(t tmpl) {
	start := len(g.b)
	g.expand(t)
	capitalizeAt(g.b, start)
}

// sentences appends n sentences drawn from d, separated by spaces.
func (g *gen) sentences(d *deck, n int) {
	for i := 0; i < n; i++ {
		if i > 0 {
			g.sp()
		}
		g.sentence(g.draw(d))
	}
}

// capitalizeAt upper-cases the letter at b[i] in place when it is a
// lower-case ASCII letter or a two-byte lower-case letter whose upper case
// has the same encoded length (ä, é, ñ...).
func capitalizeAt(b []byte, i int) {
	if i >= len(b) {
		return
	}
	c := b[i]
	if c >= 'a' && c <= 'z' {
		b[i] = c - 32
		return
	}
	if c < utf8.RuneSelf {
		return
	}
	r, n := utf8.DecodeRune(b[i:])
	u := unicode.ToUpper(r)
	if u != r && utf8.RuneLen(u) == n {
		utf8.EncodeRune(b[i:], u)
	}
}

// appendPadded appends v as a zero-padded decimal of at least width digits.
func appendPadded(b []byte, v int64, width int) []byte {
	var tmp [20]byte
	s := strconv.AppendInt(tmp[:0], v, 10)
	for i := len(s); i < width; i++ {
		b = append(b, '0')
	}
	return append(b, s...)
}
