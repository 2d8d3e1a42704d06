package dedup

// Paragraph-level exact dedup: removal of paragraphs repeated across many
// documents (footers, cookie banners, navigation blocks).
//
// A paragraph is a maximal run of non-blank lines; blank lines (only
// whitespace) separate paragraphs. Each paragraph is normalized like a
// whole document for exact dedup (normalize.go) and hashed with xxh3-64.
// Add receives the distinct paragraph hashes of one document and appends
// them to an external Sorter of uint64 (spill.go), so after sorting the
// length of each run of equal hashes is the number of documents that
// contain the paragraph. Reduce keeps the hashes seen in more than
// MaxRepeats documents; Strip then removes those paragraphs from every
// document that has them (including the first: boilerplate carries no
// information wherever it appears), keeping the original separators
// between the paragraphs that remain.
//
// Memory: 8 bytes per (document, distinct paragraph) while scanning, held
// only up to the memory budget and spilled as sorted runs beyond it; after
// Reduce, 8 bytes per frequent paragraph. A 64-bit hash can merge the
// counts of two different paragraphs with probability ~M²/2^65 for M
// distinct paragraphs (negligible below billions).
//
// A split run counts 64 ranges of the hash in separate processes
// (paragraph_split.go).
//
// Not implemented: near-duplicate paragraphs, line-level dedup, and
// incremental runs (counts of a previous run are not carried over).

import (
	"errors"
	"slices"

	"github.com/zeebo/xxh3"
)

// ParagraphSpans appends the [start, end) byte spans of the paragraphs of
// text to dst: maximal runs of lines that contain a non-space character.
// A span ends at the end of its last line, before the line break.
func ParagraphSpans(text string, dst [][2]int) [][2]int {
	start := -1 // start of the current paragraph, -1 outside one
	lastEnd := 0
	for i := 0; i <= len(text); {
		j := i
		for j < len(text) && text[j] != '\n' {
			j++
		}
		line := text[i:j]
		if isBlank(line) {
			if start >= 0 {
				dst = append(dst, [2]int{start, lastEnd})
				start = -1
			}
		} else {
			if start < 0 {
				start = i
			}
			lastEnd = j
			if lastEnd > i && text[lastEnd-1] == '\r' {
				lastEnd--
			}
		}
		if j >= len(text) {
			break
		}
		i = j + 1
	}
	if start >= 0 {
		dst = append(dst, [2]int{start, lastEnd})
	}
	return dst
}

func isBlank(line string) bool {
	for i := 0; i < len(line); i++ {
		switch line[i] {
		case ' ', '\t', '\r', '\v', '\f':
		default:
			if line[i] < 0x80 {
				return false
			}
			// Non-ASCII: blank only if every rune is a space.
			for _, r := range line[i:] {
				if !isSpaceRune(r) {
					return false
				}
			}
			return true
		}
	}
	return true
}

func isSpaceRune(r rune) bool {
	switch r {
	case '\u00a0', '\u1680', '\u2028', '\u2029', '\u202f', '\u205f', '\u3000', '\u200b', '\ufeff':
		return true
	}
	return r >= '\u2000' && r <= '\u200a' || r == ' ' || r == '\t' || r == '\r' || r == '\v' || r == '\f'
}

// paragraphHash returns the xxh3-64 of a normalized paragraph; ok is false
// when it normalizes to nothing.
func paragraphHash(p string, norm Normalization, buf []byte) (uint64, bool, []byte) {
	buf = norm.Append(buf[:0], p)
	if len(buf) == 0 {
		return 0, false, buf
	}
	return xxh3.Hash(buf), true, buf
}

// ParagraphHashes appends the sorted distinct hashes of the paragraphs of
// text to dst.
func ParagraphHashes(text string, norm Normalization, dst []uint64) []uint64 {
	var spans [][2]int
	spans = ParagraphSpans(text, spans)
	bp := normPool.Get().(*[]byte)
	buf := *bp
	base := len(dst)
	for _, sp := range spans {
		var h uint64
		var ok bool
		h, ok, buf = paragraphHash(text[sp[0]:sp[1]], norm, buf)
		if ok {
			dst = append(dst, h)
		}
	}
	if cap(buf) <= maxPooledScratch {
		*bp = buf
		normPool.Put(bp)
	}
	set := SortedSet(dst[base:])
	return dst[:base+len(set)]
}

// ParagraphOptions configures a ParagraphIndex.
type ParagraphOptions struct {
	Norm Normalization
	// MaxRepeats is the number of documents a paragraph may appear in;
	// beyond it, it is removed everywhere.
	MaxRepeats   int
	TempDir      string
	MemoryBudget int64
}

// ParagraphIndex counts in how many documents each paragraph appears and
// strips the paragraphs that appear too often.
type ParagraphIndex struct {
	opt      ParagraphOptions
	sorter   *Sorter[uint64]
	frequent []uint64
	reduced  bool
	stats    IndexStats
	// only, when not nil, marks the hash partitions this index counts
	// (RestrictPartitions); hashes of the others are skipped.
	only     []bool
	onlyList []int
}

// NewParagraphIndex returns an empty index writing spill runs to
// opt.TempDir.
func NewParagraphIndex(opt ParagraphOptions) *ParagraphIndex {
	return &ParagraphIndex{opt: opt, sorter: NewSorter(Uint64Codec, opt.TempDir, opt.MemoryBudget)}
}

// Add counts one document's distinct paragraph hashes (as ParagraphHashes
// returns them).
func (p *ParagraphIndex) Add(hs []uint64) error {
	if p.reduced {
		return errors.New("dedup: ParagraphIndex.Add after Reduce")
	}
	for _, h := range hs {
		if p.only != nil && !p.only[h>>(64-paragraphPartitionBits)] {
			continue // another task counts this partition
		}
		if err := p.sorter.Add(h); err != nil {
			return err
		}
	}
	p.stats.Docs++
	p.stats.ResidentBytes = max(p.stats.ResidentBytes, p.sorter.ResidentBytes())
	return nil
}

// Reduce finds the paragraphs that appear in more than MaxRepeats
// documents.
func (p *ParagraphIndex) Reduce() error {
	if p.reduced {
		return errors.New("dedup: ParagraphIndex.Reduce called twice")
	}
	p.reduced = true
	p.stats.Records = p.sorter.Len()
	p.stats.Runs = p.sorter.Runs()
	it, err := p.sorter.Iterate()
	if err != nil {
		return err
	}
	defer it.Close()
	p.stats.SpilledBytes = p.sorter.SpilledBytes()
	var cur uint64
	n := 0
	for {
		h, ok := it.Next()
		if !ok || h != cur || n == 0 {
			if n > p.opt.MaxRepeats {
				p.frequent = append(p.frequent, cur)
			}
			if !ok {
				break
			}
			cur, n = h, 0
		}
		n++
	}
	return it.Err()
}

// Frequent returns the number of paragraphs found to repeat too often.
func (p *ParagraphIndex) Frequent() int { return len(p.frequent) }

// Stats returns counters of the index.
func (p *ParagraphIndex) Stats() IndexStats { return p.stats }

// Strip returns text without its frequent paragraphs and the number of
// paragraphs removed. The separators between kept paragraphs are the
// original ones. Safe for concurrent use after Reduce.
func (p *ParagraphIndex) Strip(text string) (string, int) {
	if len(p.frequent) == 0 {
		return text, 0
	}
	var spansArr [32][2]int
	spans := ParagraphSpans(text, spansArr[:0])
	var keepArr [32]bool
	keep := keepArr[:0]
	bp := normPool.Get().(*[]byte)
	buf := *bp
	removed := 0
	for _, sp := range spans {
		var h uint64
		var ok bool
		h, ok, buf = paragraphHash(text[sp[0]:sp[1]], p.opt.Norm, buf)
		k := true
		if ok {
			if _, found := slices.BinarySearch(p.frequent, h); found {
				k = false
				removed++
			}
		}
		keep = append(keep, k)
	}
	if cap(buf) <= maxPooledScratch {
		*bp = buf
		normPool.Put(bp)
	}
	if removed == 0 {
		return text, 0
	}
	if removed == len(spans) {
		return "", removed
	}
	out := make([]byte, 0, len(text))
	out = append(out, text[:spans[0][0]]...)
	prev := -1
	for i, sp := range spans {
		if !keep[i] {
			continue
		}
		if prev >= 0 {
			// The gap that followed the previous kept paragraph.
			out = append(out, text[spans[prev][1]:spans[prev+1][0]]...)
		}
		out = append(out, text[sp[0]:sp[1]]...)
		prev = i
	}
	out = append(out, text[spans[len(spans)-1][1]:]...)
	return string(out), removed
}

// Close removes spill files.
func (p *ParagraphIndex) Close() error { return p.sorter.Close() }
