package shard

import (
	"fmt"
	"math"
	"math/bits"
	"sort"
	"strings"
)

// Mixing: choosing which documents go out, and in which order.
//
// Every document (or piece of a split document) is a unit with a source,
// a token count and a keyed hash of its document id (xxh3 with the run
// seed), so choices depend on the seed and the ids only, never on the
// number of workers or on input order.
//
//  1. Target. With shares w_s (normalized to sum 1) and available tokens
//     A_s, the total T is the largest that every source can supply:
//     min_s A_s/w_s without a budget (no repetition); with budget_tokens B,
//     min(B, min_s E·A_s/w_s) where E is max_epochs. Source s then
//     contributes U_s = w_s·T tokens.
//  2. Selection. Each source's units are ranked by their hash (the pieces
//     of one document stay adjacent, in order). Whole passes over the
//     source are taken while U_s needs them (up-sampling by repeating
//     whole documents, each pass in its own hash order), then a prefix of
//     the next pass, ending at the unit that brings the total closest to
//     U_s.
//  3. Interleaving. Unit j of source s gets the position key
//     (c_j + t_j/2) / U_s, where c_j is the tokens of s before it; merging
//     all sources by that key (compared exactly in 128-bit integers) puts
//     every prefix of the output within about one unit of the target
//     shares. Cutting that stream into shards therefore keeps each shard's
//     shares within (largest unit)/shard_tokens of the target, which is
//     why long documents are split before mixing (split_tokens).

// unit is the compact record kept in memory per spilled unit: 16 bytes.
type unit struct {
	hash   uint64 // keyed hash of the document id
	tokens uint32
	src    uint16
	piece  uint16 // piece number within its document (0 when whole)
}

// slot is one output position: a unit, and which pass over its source
// (epoch, from 0) put it there.
type slot struct {
	unit  uint32
	epoch uint16
}

// MixSource is one source's line in the manifest's mix section.
type MixSource struct {
	Source string `json:"source"`
	// Share is the target share of output tokens (normalized).
	Share float64 `json:"share"`
	// Available is the tokens of the source's surviving documents.
	Available int64 `json:"tokens_available"`
	// Used is the tokens written, repetitions included.
	Used int64 `json:"tokens_used"`
	// Epochs is Used/Available: below 1 the source was subsampled, above
	// 1 up-sampled by repeating whole documents.
	Epochs float64 `json:"epochs"`
	// DocsUsed counts written units (repetitions included).
	DocsUsed int64 `json:"docs_used"`
	// ShareUsed is the source's actual share of the output.
	ShareUsed float64 `json:"share_used"`
	// LeftOut is the source's surviving tokens not written (Available −
	// Used, 0 when up-sampled) and LeftOutWhy says why, in words.
	LeftOut    int64  `json:"tokens_left_out"`
	LeftOutWhy string `json:"left_out_reason,omitempty"`
}

// LeftOutLines returns one line per source whose surviving tokens were
// not all written, saying how many and why (nil when nothing was left
// out).
func (r *MixReport) LeftOutLines() []string {
	if r == nil {
		return nil
	}
	var out []string
	for _, s := range r.Sources {
		if s.LeftOut > 0 {
			out = append(out, fmt.Sprintf("%s: %d of %d tokens left out (%.1f%%): %s", s.Source, s.LeftOut, s.Available,
				100*float64(s.LeftOut)/float64(s.Available), s.LeftOutWhy))
		}
	}
	return out
}

// MixReport is the manifest's mix section.
type MixReport struct {
	// Mode says how the total was set: "capped" (limited by the scarcest
	// source without repetition, or by max_epochs), "budget" (the budget
	// was met by subsampling) or "upsampled" (the budget was met by
	// repeating documents of at least one source).
	Mode            string `json:"mode"`
	Note            string `json:"note"`
	BudgetTokens    int64  `json:"budget_tokens,omitempty"`
	MaxEpochs       int    `json:"max_epochs"`
	TargetTokens    int64  `json:"target_tokens"`
	TokensAvailable int64  `json:"tokens_available"`
	TokensUsed      int64  `json:"tokens_used"`
	// Missing names the sources given a share that had no surviving
	// tokens (every document removed by the stages).
	Missing []string    `json:"missing_sources,omitempty"`
	Sources []MixSource `json:"sources"`
}

// mix64 is the splitmix64 finalizer: a fresh order for each pass.
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	x ^= x >> 31
	return x
}

func passKey(h uint64, epoch int) uint64 {
	if epoch == 0 {
		return h
	}
	return mix64(h ^ uint64(epoch)*0x9e3779b97f4a7c15)
}

// planMix selects and orders units for the target shares.
func planMix(units []unit, srcNames []string, shares map[string]float64, budget int64, maxEpochs int) ([]slot, *MixReport, error) {
	k := len(srcNames)
	avail := make([]int64, k)
	members := make([][]uint32, k)
	for i, u := range units {
		avail[u.src] += int64(u.tokens)
		members[u.src] = append(members[u.src], uint32(i))
	}
	w := make([]float64, k)
	var sum float64
	present := map[string]int{}
	for i, n := range srcNames {
		present[n] = i
	}
	for _, name := range sortedKeys(shares) {
		v := shares[name]
		if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, nil, fmt.Errorf("mix.%s: share %v must be a non-negative number", name, v)
		}
		sum += v
	}
	if sum <= 0 {
		return nil, nil, fmt.Errorf("mix: shares sum to %v, want a positive total", sum)
	}
	// A source whose documents were all removed cannot supply its share;
	// the others are mixed at their relative shares, and the report says
	// so (failing here would lose a whole run's work at its very end).
	var missing []string
	var psum float64
	for _, name := range sortedKeys(shares) {
		if shares[name] == 0 {
			continue
		}
		i, ok := present[name]
		if !ok || avail[i] == 0 {
			missing = append(missing, name)
			continue
		}
		psum += shares[name]
	}
	if psum == 0 {
		return nil, &MixReport{Mode: "empty", MaxEpochs: maxEpochs, BudgetTokens: budget, Missing: missing, Sources: []MixSource{},
			Note: fmt.Sprintf("no source of the mix has surviving tokens (%s): nothing written", strings.Join(missing, ", "))}, nil
	}
	for _, name := range sortedKeys(shares) {
		if i, ok := present[name]; ok && avail[i] > 0 {
			w[i] = shares[name] / psum
		}
	}
	if maxEpochs < 1 {
		maxEpochs = 1
	}
	// The total every source can supply.
	epochs := 1.0
	if budget > 0 {
		epochs = float64(maxEpochs)
	}
	supply := math.Inf(1)
	limiting := ""
	for i := range srcNames {
		if w[i] == 0 {
			continue
		}
		if s := epochs * float64(avail[i]) / w[i]; s < supply {
			supply, limiting = s, srcNames[i]
		}
	}
	total := math.Floor(supply)
	rep := &MixReport{MaxEpochs: maxEpochs, BudgetTokens: budget}
	switch {
	case budget > 0 && float64(budget) <= total:
		total = float64(budget)
		rep.Mode = "budget"
	case budget > 0:
		rep.Mode = "capped"
		rep.Note = fmt.Sprintf("budget %d not reachable: source %s supplies at most %d tokens at %d epoch(s), so the total is capped at %d", budget, limiting, int64(epochs*float64(avail[present[limiting]])), maxEpochs, int64(total))
	default:
		rep.Mode = "capped"
		rep.Note = fmt.Sprintf("no budget: the total is the largest that source %s supplies without repetition", limiting)
	}
	rep.TargetTokens = int64(total)
	var capWhy string
	switch {
	case rep.Mode == "budget":
		capWhy = fmt.Sprintf("budget_tokens %d reached with a share of %%.3g", budget)
	case budget > 0:
		capWhy = fmt.Sprintf("total capped at %d tokens (budget %d not reachable): source %s supplies only %d tokens at max_epochs %d for its share %.3g", int64(total), budget, limiting, int64(epochs*float64(avail[present[limiting]])), maxEpochs, w[present[limiting]])
	default:
		capWhy = fmt.Sprintf("total capped at %d tokens: source %s has only %d tokens for its share %.3g (no budget_tokens, no repetition)", int64(total), limiting, avail[present[limiting]], w[present[limiting]])
	}

	lists := make([][]slot, k)
	used := make([]int64, k)
	for i := range srcNames {
		if w[i] == 0 {
			continue
		}
		target := int64(math.Round(w[i] * total))
		m := members[i]
		for e := 0; e < maxEpochs && used[i] < target; e++ {
			order := append([]uint32(nil), m...)
			sort.Slice(order, func(a, b int) bool {
				ua, ub := &units[order[a]], &units[order[b]]
				ka, kb := passKey(ua.hash, e), passKey(ub.hash, e)
				if ka != kb {
					return ka < kb
				}
				if ua.piece != ub.piece {
					return ua.piece < ub.piece
				}
				return order[a] < order[b]
			})
			for _, ui := range order {
				t := int64(units[ui].tokens)
				rem := target - used[i]
				if 2*rem <= t { // adding t would overshoot more than stopping
					break
				}
				lists[i] = append(lists[i], slot{unit: ui, epoch: uint16(e)})
				used[i] += t
			}
		}
		if rep.Mode == "budget" && used[i] > avail[i] {
			rep.Mode = "upsampled"
		}
	}
	if rep.Mode == "upsampled" {
		rep.Note = fmt.Sprintf("budget %d met by repeating whole documents (at most %d epochs)", budget, maxEpochs)
	} else if rep.Mode == "budget" {
		rep.Note = fmt.Sprintf("budget %d met by subsampling every source", budget)
	}

	if len(missing) > 0 {
		rep.Missing = missing
		rep.Note = fmt.Sprintf("source(s) %s have no surviving tokens, so the others are mixed at their relative shares; %s", strings.Join(missing, ", "), rep.Note)
	}
	order := interleave(lists, used, units)
	var all int64
	for i, name := range srcNames {
		all += used[i]
		rep.TokensAvailable += avail[i]
		ms := MixSource{Source: name, Share: w[i], Available: avail[i], Used: used[i], DocsUsed: int64(len(lists[i]))}
		if avail[i] > 0 {
			ms.Epochs = math.Round(float64(used[i])/float64(avail[i])*1000) / 1000
		}
		if ms.LeftOut = max(avail[i]-used[i], 0); ms.LeftOut > 0 {
			v, listed := shares[name]
			switch {
			case !listed:
				ms.LeftOutWhy = "not in mix (add it with a share to use it)"
			case v == 0:
				ms.LeftOutWhy = "share 0 in mix"
			case rep.Mode == "budget":
				ms.LeftOutWhy = fmt.Sprintf(capWhy, w[i])
			case name == limiting && used[i] < avail[i]:
				ms.LeftOutWhy = "the scarcest source: its last documents would overshoot its share"
			default:
				ms.LeftOutWhy = capWhy
			}
		}
		rep.Sources = append(rep.Sources, ms)
	}
	rep.TokensUsed = all
	for i := range rep.Sources {
		if all > 0 {
			rep.Sources[i].ShareUsed = math.Round(float64(rep.Sources[i].Used)/float64(all)*1e4) / 1e4
		}
	}
	return order, rep, nil
}

// planShuffle orders every unit by its keyed hash (the pieces of one
// document adjacent, in order), ending at the unit that brings the total
// closest to budget when budget > 0.
func planShuffle(units []unit, budget int64) []slot {
	order := make([]slot, len(units))
	for i := range units {
		order[i] = slot{unit: uint32(i)}
	}
	sort.Slice(order, func(a, b int) bool {
		ua, ub := &units[order[a].unit], &units[order[b].unit]
		if ua.hash != ub.hash {
			return ua.hash < ub.hash
		}
		if ua.piece != ub.piece {
			return ua.piece < ub.piece
		}
		return order[a].unit < order[b].unit
	})
	if budget <= 0 {
		return order
	}
	var used int64
	for i, s := range order {
		t := int64(units[s.unit].tokens)
		if 2*(budget-used) <= t {
			return order[:i]
		}
		used += t
	}
	return order
}

// interleave merges the per-source lists by position key (c+t/2)/U.
func interleave(lists [][]slot, used []int64, units []unit) []slot {
	n := 0
	for _, l := range lists {
		n += len(l)
	}
	out := make([]slot, 0, n)
	next := make([]int, len(lists))
	cum := make([]int64, len(lists))
	for len(out) < n {
		best := -1
		var bestNum uint64
		for s, l := range lists {
			if next[s] >= len(l) {
				continue
			}
			num := uint64(2*cum[s] + int64(units[l[next[s]].unit].tokens))
			if best < 0 || keyLess(num, uint64(used[s]), bestNum, uint64(used[best])) {
				best, bestNum = s, num
			}
		}
		sl := lists[best][next[best]]
		out = append(out, sl)
		next[best]++
		cum[best] += int64(units[sl.unit].tokens)
	}
	return out
}

// keyLess reports whether na/da < nb/db, exactly (128-bit products).
func keyLess(na, da, nb, db uint64) bool {
	if da == 0 || db == 0 {
		return da != 0 && db == 0 // zero-total sources never compete
	}
	h1, l1 := bits.Mul64(na, db)
	h2, l2 := bits.Mul64(nb, da)
	return h1 < h2 || (h1 == h2 && l1 < l2)
}

// cut is a shard boundary: after the first offset tokens of the slot at
// position pos. offset equal to the slot's tokens cuts after it; a smaller
// offset splits the unit's text there.
type cut struct {
	pos    int
	offset int64
}

// cutTolerance is how far (in parts of shard_tokens) a cut may move to the
// nearest document boundary instead of splitting a document: each shard
// boundary within ±0.5% keeps each shard within ±1%.
const cutTolerance = 200

// planCuts places the shard boundaries of a stream of slot token counts:
// ideally at every multiple of shardTokens, moved to the nearest unit
// boundary when that is within shardTokens/cutTolerance, else splitting
// the unit. A remainder under that tolerance joins the last shard.
func planCuts(tokens []int64, shardTokens int64) []cut {
	var total int64
	for _, t := range tokens {
		total += t
	}
	if total == 0 || shardTokens <= 0 {
		return nil
	}
	tol := shardTokens / cutTolerance
	n := (total + shardTokens - 1) / shardTokens
	if n > 1 && total-(n-1)*shardTokens <= tol {
		n--
	}
	var cuts []cut
	p, start := 0, int64(0) // slot p starts at token start
	for k := int64(1); k < n; k++ {
		c := k * shardTokens
		for p < len(tokens) && start+tokens[p] <= c {
			start += tokens[p]
			p++
		}
		if p >= len(tokens) {
			break
		}
		before, after := c-start, start+tokens[p]-c
		switch {
		case before == 0 && p > 0:
			cuts = append(cuts, cut{pos: p - 1, offset: tokens[p-1]})
		case before <= after && before <= tol && p > 0:
			cuts = append(cuts, cut{pos: p - 1, offset: tokens[p-1]})
		case after <= tol:
			cuts = append(cuts, cut{pos: p, offset: tokens[p]})
		default:
			cuts = append(cuts, cut{pos: p, offset: before})
		}
	}
	// A boundary cut at the previous slot can repeat when slots are empty
	// or tiny shards are asked for; keep cuts strictly increasing.
	out := cuts[:0]
	for _, c := range cuts {
		if len(out) > 0 {
			l := out[len(out)-1]
			if c.pos < l.pos || (c.pos == l.pos && c.offset <= l.offset) {
				continue
			}
		}
		out = append(out, c)
	}
	return out
}
