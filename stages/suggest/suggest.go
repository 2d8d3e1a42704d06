// Package suggest finds the likely intended name for a misspelt one, for
// error messages such as `unknown key "fewest_wrods" (did you mean
// "fewest_words"?)`.
package suggest

// Nearest returns the candidate closest to s in edit distance when it is
// close enough to be a likely typo (at most 2 edits, or at most 4 and
// fewer than half of s), else "".
func Nearest(s string, candidates []string) string {
	best, bestD := "", 1<<30
	for _, c := range candidates {
		if d := EditDistance(s, c); d < bestD {
			best, bestD = c, d
		}
	}
	if bestD <= 2 || (bestD <= len(s)/2 && bestD <= 4) {
		return best
	}
	return ""
}

// EditDistance is the Levenshtein distance of a and b, in bytes.
func EditDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
