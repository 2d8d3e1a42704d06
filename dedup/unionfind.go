package dedup

// Union-find (disjoint sets) over dense document indices.
//
// Near-duplicate candidates that pass verification are unioned; each
// resulting set is a cluster of near copies. The root of a set is always
// its smallest index, and indices are assigned in input order (documents
// of a previous run first), so the root is the document a cluster keeps:
// "the earliest document wins" falls out of the data structure.
//
// Memory is 4 bytes per document (one uint32 parent each). Union by
// smallest index instead of by rank gives up the inverse-Ackermann bound,
// but path halving keeps Find amortized logarithmic, and the sets are
// small in practice.

// UnionFind is a disjoint-set forest whose roots are the smallest member.
type UnionFind struct {
	parent []uint32
}

// NewUnionFind returns n singleton sets 0..n-1.
func NewUnionFind(n int) *UnionFind {
	p := make([]uint32, n)
	for i := range p {
		p[i] = uint32(i)
	}
	return &UnionFind{parent: p}
}

// Len returns the number of elements.
func (u *UnionFind) Len() int { return len(u.parent) }

// Find returns the root (smallest member) of x's set.
func (u *UnionFind) Find(x uint32) uint32 {
	p := u.parent
	for p[x] != x {
		p[x] = p[p[x]] // path halving
		x = p[x]
	}
	return x
}

// Union merges the sets of a and b and returns the new root, the smaller
// of the two roots.
func (u *UnionFind) Union(a, b uint32) uint32 {
	ra, rb := u.Find(a), u.Find(b)
	if ra == rb {
		return ra
	}
	if rb < ra {
		ra, rb = rb, ra
	}
	u.parent[rb] = ra
	return ra
}

// Same reports whether a and b are in one set.
func (u *UnionFind) Same(a, b uint32) bool { return u.Find(a) == u.Find(b) }
