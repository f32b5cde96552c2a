package taxonomy

import "slices"

// Node indices given to the methods below run from 0 to Len()-1; like slice
// indexing, an index out of range panics.

// Len is the number of labels.
func (t *Taxonomy) Len() int { return len(t.nodes) }

// Node returns node i. The returned Children slice is a copy.
func (t *Taxonomy) Node(i int) Node {
	n := t.nodes[i]
	n.Children = slices.Clone(n.Children)
	return n
}

// Key returns the key of node i.
func (t *Taxonomy) Key(i int) string { return t.nodes[i].Key }

// Keys returns every key in pre-order.
func (t *Taxonomy) Keys() []string {
	keys := make([]string, len(t.nodes))
	for i := range t.nodes {
		keys[i] = t.nodes[i].Key
	}
	return keys
}

// Lookup returns the index of the label with key, and whether it exists.
func (t *Taxonomy) Lookup(key string) (int, bool) {
	i, ok := t.index[key]
	return i, ok
}

// Roots returns the roots in file order.
func (t *Taxonomy) Roots() []int { return slices.Clone(t.roots) }

// Children returns the children of node i in file order.
func (t *Taxonomy) Children(i int) []int { return slices.Clone(t.nodes[i].Children) }

// Parent returns the parent of node i, or -1 for a root.
func (t *Taxonomy) Parent(i int) int { return t.nodes[i].Parent }

// Parents returns the parent index of every node, -1 for roots: the flat
// form the agreement engine takes.
func (t *Taxonomy) Parents() []int {
	p := make([]int, len(t.nodes))
	for i := range t.nodes {
		p[i] = t.nodes[i].Parent
	}
	return p
}

// Depth returns the depth of node i; roots have depth 0.
func (t *Taxonomy) Depth(i int) int { return t.nodes[i].Depth }

// IsLeaf reports whether node i has no children.
func (t *Taxonomy) IsLeaf(i int) bool { return len(t.nodes[i].Children) == 0 }

// Ancestors returns the ancestors of node i from its root down to its
// parent; empty for a root.
func (t *Taxonomy) Ancestors(i int) []int {
	out := make([]int, t.nodes[i].Depth)
	for p := t.nodes[i].Parent; p >= 0; p = t.nodes[p].Parent {
		out[t.nodes[p].Depth] = p
	}
	return out
}

// Path returns the keys from the root of node i down to node i itself.
func (t *Taxonomy) Path(i int) []string {
	keys := make([]string, t.nodes[i].Depth+1)
	for n := i; n >= 0; n = t.nodes[n].Parent {
		keys[t.nodes[n].Depth] = t.nodes[n].Key
	}
	return keys
}

// Descendants returns every node below i in pre-order, without i itself.
func (t *Taxonomy) Descendants(i int) []int {
	out := make([]int, 0, t.end[i]-i-1)
	for d := i + 1; d < t.end[i]; d++ {
		out = append(out, d)
	}
	return out
}

// IsAncestor reports whether a is a proper ancestor of d.
func (t *Taxonomy) IsAncestor(a, d int) bool { return a < d && d < t.end[a] }

// Leaves returns every node without children, in pre-order.
func (t *Taxonomy) Leaves() []int {
	var out []int
	for i := range t.nodes {
		if len(t.nodes[i].Children) == 0 {
			out = append(out, i)
		}
	}
	return out
}

// AtDepth returns the node at depth n on the path from the root to node i
// (i itself when n is its depth), and false when n is negative or deeper
// than i.
func (t *Taxonomy) AtDepth(i, n int) (int, bool) {
	if n < 0 || n > t.nodes[i].Depth {
		return -1, false
	}
	for t.nodes[i].Depth > n {
		i = t.nodes[i].Parent
	}
	return i, true
}

// LowestCommonAncestor returns the deepest node that is a or an ancestor of
// a and also b or an ancestor of b, and false (with -1) when a and b lie
// under different roots.
func (t *Taxonomy) LowestCommonAncestor(a, b int) (int, bool) {
	for t.nodes[a].Depth > t.nodes[b].Depth {
		a = t.nodes[a].Parent
	}
	for t.nodes[b].Depth > t.nodes[a].Depth {
		b = t.nodes[b].Parent
	}
	for a != b {
		a, b = t.nodes[a].Parent, t.nodes[b].Parent
	}
	return a, a >= 0
}
