package langid

import (
	"bufio"
	"bytes"
	"compress/gzip"
	_ "embed"
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"
)

// The close-pair word models: per-word counts of Bosnian, Croatian and
// Serbian (Latin letters), and of Indonesian and Malay, learnt from
// translation catalogues that Debian packages ship and that are not part of
// the held-out evaluation set (pairdata/README.md, pairdata/build.py). It
// scores a text as a multinomial naive Bayes classifier with add-one
// (Laplace) smoothing over the words it has seen (Manning, Raghavan and
// Schütze, Introduction to Information Retrieval, 2008, §13.2), uniform
// priors. Loaded on the first text that reaches the second stage: 38,655
// words of both groups, 5 MB of heap (measured 2026-12-03).

//go:embed pairdata/words.tsv.gz
var pairWordsGz []byte

// pairGroup is one close group's model.
type pairGroup struct {
	labels []string             // language codes, in model order
	logp   map[string][]float32 // word -> log P(word | label); words it never saw are skipped
}

var (
	pairOnce   sync.Once
	pairGroups map[string]*pairGroup // by group name: "ma", "sc"
	pairErr    error
)

func loadPairGroups() (map[string]*pairGroup, error) {
	pairOnce.Do(func() { pairGroups, pairErr = parsePairWords(pairWordsGz) })
	return pairGroups, pairErr
}

// pairModel is the word model of a close group ("ma": Indonesian/Malay,
// "sc": Bosnian/Croatian/Serbian), or nil if the embedded counts cannot be
// read (a broken build; TestPairWordsParse fails then): the marker words
// alone decide then.
func pairModel(group string) *pairGroup {
	gs, err := loadPairGroups()
	if err != nil {
		return nil
	}
	return gs[group]
}

// parsePairWords reads words.tsv.gz: "group label word count" lines; a
// line with an empty word gives the label's total number of words read.
func parsePairWords(gz []byte) (map[string]*pairGroup, error) {
	zr, err := gzip.NewReader(bytes.NewReader(gz))
	if err != nil {
		return nil, fmt.Errorf("langid: close-pair words: %w", err)
	}
	type raw struct {
		labels []string
		totals map[string]float64
		used   map[string]float64 // sum of the word counts read, per label
		counts map[string]map[string]float64
	}
	groups := map[string]*raw{}
	sc := bufio.NewScanner(zr)
	line := 0
	for sc.Scan() {
		line++
		t := sc.Text()
		if strings.HasPrefix(t, "#") {
			continue
		}
		p := strings.Split(t, "\t")
		if len(p) != 4 {
			return nil, fmt.Errorf("langid: close-pair words line %d: %d fields, want 4", line, len(p))
		}
		n, err := strconv.ParseFloat(p[3], 64)
		if err != nil || !(n > 0) || math.IsInf(n, 1) {
			return nil, fmt.Errorf("langid: close-pair words line %d: bad count %q", line, p[3])
		}
		g := groups[p[0]]
		if g == nil {
			g = &raw{totals: map[string]float64{}, counts: map[string]map[string]float64{}}
			groups[p[0]] = g
		}
		if p[2] == "" {
			if _, dup := g.totals[p[1]]; dup {
				return nil, fmt.Errorf("langid: close-pair words line %d: second total for %q", line, p[1])
			}
			g.labels = append(g.labels, p[1])
			g.totals[p[1]] = n
			continue
		}
		if _, ok := g.totals[p[1]]; !ok {
			return nil, fmt.Errorf("langid: close-pair words line %d: label %q has no total", line, p[1])
		}
		m := g.counts[p[2]]
		if m == nil {
			m = map[string]float64{}
			g.counts[p[2]] = m
		}
		if _, dup := m[p[1]]; dup {
			return nil, fmt.Errorf("langid: close-pair words line %d: second count of %q for %q", line, p[2], p[1])
		}
		m[p[1]] = n
		if g.used == nil {
			g.used = map[string]float64{}
		}
		if g.used[p[1]] += n; g.used[p[1]] > g.totals[p[1]] {
			return nil, fmt.Errorf("langid: close-pair words line %d: the counts of %q exceed its total", line, p[1])
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("langid: close-pair words: %w", err)
	}
	out := map[string]*pairGroup{}
	for name, g := range groups {
		v := float64(len(g.counts))
		pg := &pairGroup{labels: g.labels, logp: make(map[string][]float32, len(g.counts))}
		for w, m := range g.counts {
			lp := make([]float32, len(g.labels))
			for i, l := range g.labels {
				lp[i] = float32(math.Log((m[l] + 1) / (g.totals[l] + v)))
			}
			pg.logp[w] = lp
		}
		out[name] = pg
	}
	return out, nil
}

// forWords calls f with each word of text lower-cased (runs of letters
// with inner hyphens), in buf; f must not keep the slice.
func forWords(text string, buf []byte, f func(w []byte)) {
	for i := 0; i < len(text); {
		r, n := utf8.DecodeRuneInString(text[i:])
		if !unicode.IsLetter(r) {
			i += n
			continue
		}
		j := i
		w := buf[:0]
		for j < len(text) {
			r, n := utf8.DecodeRuneInString(text[j:])
			if !unicode.IsLetter(r) && !(r == '-' && j > i) {
				break
			}
			if len(w)+4 <= cap(w) {
				w = utf8.AppendRune(w, unicode.ToLower(r))
			}
			j += n
		}
		for len(w) > 0 && w[len(w)-1] == '-' {
			w = w[:len(w)-1]
		}
		f(w)
		i = j
	}
}
