package webpage

import (
	"bytes"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"

	"golang.org/x/net/html"
	"golang.org/x/net/html/atom"

	"winnow/filters"
)

// block is one text block of a page: the text between two block-level
// tags, whitespace collapsed (or kept as it is inside <pre>).
type block struct {
	start, end int   // the text is extractor.buf[start:end]
	elem       int32 // innermost open block-level element (0: none)
	runes      int   // characters
	linkRunes  int   // characters inside <a> elements
	heading    bool
	pre        bool
	cf, class  class // context-free and final classes (classify.go)
}

// extractor holds the reusable state of one extraction.
type extractor struct {
	buf    []byte
	blocks []block

	// The block being built.
	cur          block
	space        bool // whitespace seen since the last character
	brRun        int  // consecutive <br> tags
	linkDepth    int
	anchors      []anchor // open <a> elements
	preDepth     int
	headingDepth int

	// A dropped element being skipped: its atom (or name when it has
	// none) and how many of it are open.
	skipAtom  atom.Atom
	skipName  string
	skipDepth int

	// Open block-level elements (indices into elems) and every element
	// seen: its tag and its parent, for the content region (classify.go).
	stack []int32
	elems []elem

	title     []byte
	inTitle   bool
	titleDone bool
	htmlLang  string

	name     [32]byte // the current tag's name, lower case
	usedLang string
	scratch  filters.Scratch
	out      []byte
}

var extractorPool = sync.Pool{New: func() any { return new(extractor) }}

func getExtractor() *extractor { return extractorPool.Get().(*extractor) }

// maxPooledBytes keeps an extractor that grew for a very large page out of
// the pool, so one page does not pin its memory.
const maxPooledBytes = 4 << 20

func putExtractor(ex *extractor) {
	if cap(ex.buf) > maxPooledBytes || cap(ex.out) > maxPooledBytes {
		return
	}
	extractorPool.Put(ex)
}

func (ex *extractor) reset() {
	ex.buf = ex.buf[:0]
	ex.blocks = ex.blocks[:0]
	ex.cur = block{}
	ex.space, ex.brRun = false, 0
	ex.linkDepth, ex.preDepth, ex.headingDepth = 0, 0, 0
	ex.anchors = ex.anchors[:0]
	ex.skipAtom, ex.skipName, ex.skipDepth = 0, "", 0
	ex.stack = ex.stack[:0]
	ex.elems = append(ex.elems[:0], elem{}) // 0 is the document
	ex.title = ex.title[:0]
	ex.inTitle, ex.titleDone = false, false
	ex.htmlLang, ex.usedLang = "", ""
	ex.out = ex.out[:0]
}

// blockTags are the tags that start or end a block: Pomikálek 2011's list
// (ch. 3, "segmentation") with the sectioning elements of HTML5.
var blockTags = func() map[atom.Atom]bool {
	m := map[atom.Atom]bool{}
	for _, a := range []atom.Atom{
		atom.Address, atom.Article, atom.Aside, atom.Blockquote, atom.Body, atom.Caption, atom.Center,
		atom.Col, atom.Colgroup, atom.Dd, atom.Details, atom.Dialog, atom.Dir, atom.Div, atom.Dl, atom.Dt,
		atom.Fieldset, atom.Figcaption, atom.Figure, atom.Footer, atom.Form, atom.H1, atom.H2, atom.H3,
		atom.H4, atom.H5, atom.H6, atom.Head, atom.Header, atom.Hgroup, atom.Hr, atom.Html, atom.Legend,
		atom.Li, atom.Main, atom.Menu, atom.Nav, atom.Ol, atom.Optgroup, atom.Option, atom.P, atom.Pre,
		atom.Section, atom.Summary, atom.Table, atom.Tbody, atom.Td, atom.Tfoot, atom.Th, atom.Thead,
		atom.Title, atom.Tr, atom.Ul,
	} {
		m[a] = true
	}
	return m
}()

// droppedTags are removed with everything inside them: code, styling,
// embedded objects, navigation and forms (their text is never page text).
var droppedTags = func() map[atom.Atom]bool {
	m := map[atom.Atom]bool{}
	for _, a := range []atom.Atom{
		atom.Script, atom.Style, atom.Noscript, atom.Template, atom.Svg, atom.Math, atom.Nav,
		atom.Form, atom.Select, atom.Textarea, atom.Button, atom.Iframe, atom.Object, atom.Embed,
		atom.Canvas, atom.Audio, atom.Video, atom.Map, atom.Datalist, atom.Noembed, atom.Noframes,
	} {
		m[a] = true
	}
	return m
}()

// voidTags have no end tag (HTML Living Standard §13.1.2), so they never
// open a dropped subtree.
var voidTags = map[atom.Atom]bool{
	atom.Area: true, atom.Base: true, atom.Br: true, atom.Col: true, atom.Embed: true, atom.Hr: true,
	atom.Img: true, atom.Input: true, atom.Link: true, atom.Meta: true, atom.Source: true,
	atom.Track: true, atom.Wbr: true,
}

// droppedRoles are ARIA landmark and widget roles whose content is
// navigation or page furniture (WAI-ARIA 1.2 §5.3).
var droppedRoles = map[string]bool{
	"navigation": true, "search": true, "banner": true, "contentinfo": true,
	"menu": true, "menubar": true, "toolbar": true, "tablist": true,
}

// Tag kinds, as bits of one table so a tag costs one lookup.
const (
	kindBlock uint8 = 1 << iota
	kindDropped
	kindVoid
)

var tagKinds = func() map[atom.Atom]uint8 {
	m := map[atom.Atom]uint8{}
	for a := range blockTags {
		m[a] |= kindBlock
	}
	for a := range droppedTags {
		m[a] |= kindDropped
	}
	for a := range voidTags {
		m[a] |= kindVoid
	}
	return m
}()

func isHeading(a atom.Atom) bool {
	switch a {
	case atom.H1, atom.H2, atom.H3, atom.H4, atom.H5, atom.H6:
		return true
	}
	return false
}

// run extracts the blocks of page (UTF-8) and classifies them.
func (ex *extractor) run(page string, opt Options, lang, contentLang string) {
	ex.reset()
	z := html.NewTokenizer(strings.NewReader(page))
	for {
		tt := z.Next()
		switch tt {
		case html.ErrorToken:
			ex.flush()
			ex.classify(opt, lang, contentLang)
			return
		case html.TextToken:
			if ex.skipDepth > 0 {
				continue
			}
			t := z.Text()
			if ex.inTitle {
				if !ex.titleDone {
					ex.title = append(ex.title, t...)
				}
				continue
			}
			ex.addText(t)
		case html.StartTagToken, html.SelfClosingTagToken:
			name, hasAttr := ex.tagName(z)
			a := atom.Lookup(name)
			kind := tagKinds[a]
			opens := tt == html.StartTagToken && kind&kindVoid == 0
			if ex.skipDepth > 0 {
				if opens && ex.isSkipped(a, name) {
					ex.skipDepth++
				}
				continue
			}
			drop, href := kind&kindDropped != 0, false
			if hasAttr {
				var d bool
				d, href = ex.attrs(z, a)
				drop = drop || d
			}
			if drop {
				ex.flush()
				if opens {
					ex.skipAtom, ex.skipDepth = a, 1
					if a == 0 {
						ex.skipName = string(name)
					}
				}
				continue
			}
			ex.startTag(a, kind, tt == html.SelfClosingTagToken, href)
		case html.EndTagToken:
			name, _ := ex.tagName(z)
			a := atom.Lookup(name)
			if ex.skipDepth > 0 {
				if ex.isSkipped(a, name) {
					ex.skipDepth--
				}
				continue
			}
			ex.endTag(a)
		}
	}
}

// tagName returns the lower-case name of the current tag and whether the
// tag may carry an attribute this extractor reads. It reads the name from
// the token's raw bytes, as the tokenizer delimits it (HTML Living Standard
// §13.2.5.8: up to white space, "/" or ">"), because Tokenizer.TagName
// copies the name on every call; names with bytes the tokenizer would
// rewrite (NUL, non-ASCII) or longer than the buffer go to TagName.
func (ex *extractor) tagName(z *html.Tokenizer) ([]byte, bool) {
	raw := z.Raw()
	i := 1
	if i < len(raw) && raw[i] == '/' {
		i++
	}
	n := 0
	for ; i < len(raw); i++ {
		c := raw[i]
		if c == ' ' || c == '\t' || c == '\n' || c == '\f' || c == '\r' || c == '/' || c == '>' {
			break
		}
		if c == 0 || c >= utf8.RuneSelf || n == len(ex.name) {
			name, hasAttr := z.TagName()
			return name, hasAttr && mayHaveWantedAttr(raw)
		}
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		ex.name[n] = c
		n++
	}
	return ex.name[:n], i < len(raw) && mayHaveWantedAttr(raw[i:])
}

// mayHaveWantedAttr reports whether raw tag bytes contain, in any case,
// the name of an attribute that attrs reads (href, role, lang, hidden,
// aria-hidden); others are never asked for, which saves the tokenizer's
// copies.
func mayHaveWantedAttr(raw []byte) bool {
	for i := 0; i+4 <= len(raw); i++ {
		switch raw[i] | 0x20 {
		case 'h':
			if hasFold(raw[i:], "href") || hasFold(raw[i:], "hidden") {
				return true
			}
		case 'r':
			if hasFold(raw[i:], "role") {
				return true
			}
		case 'l':
			if hasFold(raw[i:], "lang") {
				return true
			}
		}
	}
	return false
}

// hasFold reports whether b starts with the lower-case ASCII word w, in
// any case.
func hasFold(b []byte, w string) bool {
	if len(b) < len(w) {
		return false
	}
	for i := 0; i < len(w); i++ {
		if b[i]|0x20 != w[i] {
			return false
		}
	}
	return true
}

func (ex *extractor) isSkipped(a atom.Atom, name []byte) bool {
	if a != 0 {
		return a == ex.skipAtom
	}
	return ex.skipAtom == 0 && string(name) == ex.skipName
}

// attrs reads the attributes of the current start tag: the page language
// from <html lang>, and whether the element is to be dropped (hidden, or
// a navigation role), and whether it has an href.
func (ex *extractor) attrs(z *html.Tokenizer, a atom.Atom) (drop, href bool) {
	for {
		k, v, more := z.TagAttr()
		switch string(k) {
		case "lang":
			if a == atom.Html && ex.htmlLang == "" {
				ex.htmlLang = string(v)
			}
		case "role":
			if droppedRoles[strings.ToLower(string(bytes.TrimSpace(v)))] {
				drop = true
			}
		case "href":
			href = true
		case "hidden":
			drop = true
		case "aria-hidden":
			if string(v) == "true" {
				drop = true
			}
		}
		if !more {
			return drop, href
		}
	}
}

func (ex *extractor) startTag(a atom.Atom, kind uint8, selfClosing, href bool) {
	if a != atom.Br {
		ex.brRun = 0
	}
	switch {
	case a == atom.Title:
		ex.flush()
		ex.inTitle = !selfClosing
		return
	case a == atom.A:
		// Only links count: a named anchor (<a name>, no href) is not one.
		if !selfClosing {
			ex.anchors = append(ex.anchors, anchor{href: href, buf: len(ex.buf), runes: ex.cur.runes, links: ex.cur.linkRunes, space: ex.space,
				blocks: len(ex.blocks), start: ex.cur.start})
			if href {
				ex.linkDepth++
			}
		}
		return
	case a == atom.Br:
		if ex.preDepth > 0 {
			ex.appendRaw([]byte{'\n'})
			return
		}
		ex.brRun++
		if ex.brRun >= 2 {
			ex.flush()
		} else {
			ex.space = true
		}
		return
	case a == atom.Img || a == atom.Wbr:
		return
	}
	if kind&kindBlock == 0 {
		return
	}
	ex.flush()
	if selfClosing {
		return
	}
	switch {
	case a == atom.Pre:
		ex.preDepth++
	case isHeading(a):
		ex.headingDepth++
	}
	if len(ex.elems) < maxElems && len(ex.stack) < maxDepth {
		ex.elems = append(ex.elems, elem{tag: a, parent: ex.top()})
		ex.stack = append(ex.stack, int32(len(ex.elems)-1))
	}
}

// anchor is an open <a> element: whether it is a link, and the state of
// the block when it opened.
type anchor struct {
	href          bool
	buf           int
	runes, links  int
	space         bool
	blocks, start int // blocks done and the current block's start
}

// dropPermalink removes the text of a link that is only a permalink
// sign ("¶", "#", "§", "🔗") inside a heading, as documentation
// generators add to every heading: it is page furniture, not text (common
// practice in text extraction; the signs are from the generators of the
// crawled test pages and other frequent ones).
func (ex *extractor) dropPermalink(an anchor) {
	// Only when the link's text is the tail of the block it opened in.
	if !an.href || ex.headingDepth == 0 || ex.preDepth > 0 || an.buf > len(ex.buf) || len(ex.blocks) != an.blocks ||
		an.runes > 0 && ex.cur.start != an.start || ex.cur.runes < an.runes {
		return
	}
	t := bytes.TrimSpace(ex.buf[an.buf:])
	switch string(t) {
	case "¶", "#", "§", "🔗":
	default:
		return
	}
	ex.buf = ex.buf[:an.buf]
	ex.cur.runes, ex.cur.linkRunes, ex.space = an.runes, an.links, an.space
}

// elem is a block-level element of the page.
type elem struct {
	tag    atom.Atom
	parent int32
}

// maxElems bounds the elements remembered per page; past it, blocks are
// filed under the innermost remembered element.
const maxElems = 1 << 20

// maxDepth bounds the open elements remembered: deeper ones (a page of
// unclosed <div>s) are filed under the deepest remembered one, so closing
// a tag and walking up from a block cost at most maxDepth steps.
const maxDepth = 256

// top returns the innermost open block-level element, 0 for none.
func (ex *extractor) top() int32 {
	if n := len(ex.stack); n > 0 {
		return ex.stack[n-1]
	}
	return 0
}

// pop closes the innermost open element with tag a and those opened
// inside it (whose end tags were omitted); an end tag that matches no open
// element is ignored, as the HTML parser does.
func (ex *extractor) pop(a atom.Atom) {
	for i := len(ex.stack) - 1; i >= 0; i-- {
		if ex.elems[ex.stack[i]].tag == a {
			ex.stack = ex.stack[:i]
			return
		}
	}
}

func (ex *extractor) endTag(a atom.Atom) {
	ex.brRun = 0
	switch {
	case a == atom.Title:
		ex.inTitle = false
		if len(bytes.TrimSpace(ex.title)) > 0 {
			ex.titleDone = true
		}
		return
	case a == atom.A:
		if n := len(ex.anchors); n > 0 {
			an := ex.anchors[n-1]
			if an.href && ex.linkDepth > 0 {
				ex.linkDepth--
			}
			ex.anchors = ex.anchors[:n-1]
			ex.dropPermalink(an)
		}
		return
	}
	if tagKinds[a]&kindBlock == 0 {
		return
	}
	ex.flush()
	ex.pop(a)
	switch {
	case a == atom.Pre:
		if ex.preDepth > 0 {
			ex.preDepth--
		}
	case isHeading(a):
		if ex.headingDepth > 0 {
			ex.headingDepth--
		}
	}
}

// addText appends a text token to the current block, collapsing runs of
// white space (Unicode White_Space) to one space outside <pre>.
func (ex *extractor) addText(t []byte) {
	if ex.preDepth > 0 {
		ex.appendRaw(t)
		return
	}
	for i := 0; i < len(t); {
		c := t[i]
		if c < utf8.RuneSelf {
			if asciiSpace[c] {
				ex.space = true
				i++
				continue
			}
			// A run of printable ASCII: appended at once.
			j := i + 1
			for j < len(t) && t[j] < utf8.RuneSelf && !asciiSpace[t[j]] {
				j++
			}
			ex.appendWord(t[i:j], j-i)
			i = j
			continue
		}
		r, n := utf8.DecodeRune(t[i:])
		if unicode.IsSpace(r) {
			ex.space = true
		} else {
			ex.appendWord(t[i:i+n], 1)
		}
		i += n
	}
}

var asciiSpace = [utf8.RuneSelf]bool{' ': true, '\n': true, '\t': true, '\r': true, '\f': true, '\v': true}

// appendWord appends w (runes characters, no white space) to the current
// block, after one space if white space came before it.
func (ex *extractor) appendWord(w []byte, runes int) {
	if ex.cur.runes == 0 {
		ex.begin()
	} else if ex.space {
		ex.buf = append(ex.buf, ' ')
		runes++
	}
	ex.space = false
	ex.brRun = 0
	ex.buf = append(ex.buf, w...)
	ex.cur.runes += runes
	if ex.linkDepth > 0 {
		ex.cur.linkRunes += runes
	}
}

// begin starts a block at the end of buf.
func (ex *extractor) begin() {
	ex.cur.start = len(ex.buf)
	ex.cur.elem = ex.top()
	ex.cur.heading = ex.headingDepth > 0
	ex.cur.pre = ex.preDepth > 0
}

// appendRaw appends preformatted text as it is.
func (ex *extractor) appendRaw(t []byte) {
	if len(t) == 0 {
		return
	}
	if ex.cur.runes == 0 && !ex.cur.pre {
		ex.begin()
		ex.cur.pre = true
	}
	ex.buf = append(ex.buf, t...)
	n := utf8.RuneCount(t)
	ex.cur.runes += n
	if ex.linkDepth > 0 {
		ex.cur.linkRunes += n
	}
}

// flush ends the current block, keeping it when it has visible text.
func (ex *extractor) flush() {
	ex.space = false
	b := ex.cur
	ex.cur = block{}
	if b.runes == 0 {
		return
	}
	if b.pre {
		// Drop blank lines at both ends and trailing spaces of the last
		// line; a block of white space only is no block.
		text := ex.buf[b.start:]
		lead := 0
		for i, c := range text {
			if c == '\n' {
				lead = i + 1
			} else if c != ' ' && c != '\t' && c != '\r' {
				break
			}
		}
		end := len(bytes.TrimRight(text, " \t\r\n"))
		if end <= lead {
			ex.buf = ex.buf[:b.start]
			return
		}
		b.runes -= utf8.RuneCount(text[:lead]) + utf8.RuneCount(text[end:])
		copy(ex.buf[b.start:], text[lead:end])
		ex.buf = ex.buf[:b.start+end-lead]
		if b.linkRunes > b.runes {
			b.linkRunes = b.runes
		}
	}
	b.end = len(ex.buf)
	ex.blocks = append(ex.blocks, b)
}

// output joins the kept blocks, one per line (a <pre> block keeps its own
// line breaks).
func (ex *extractor) output() string {
	out := ex.out[:0]
	for _, b := range ex.blocks {
		if b.class != good {
			continue
		}
		if len(out) > 0 {
			out = append(out, '\n')
		}
		out = append(out, ex.buf[b.start:b.end]...)
	}
	ex.out = out
	return string(out)
}

// Title returns the collapsed text of <title>.
func (ex *extractor) titleText() string {
	return strings.Join(strings.Fields(string(ex.title)), " ")
}
