package agreement

import "fmt"

// Hierarchy is a label tree over the classes, given as parent ids so that
// agreement need not know the taxonomy package. Every node is a class:
// leaves (PET bottle) and internal nodes (plastic, material) alike, so a
// labeller may vote "plastic" when unsure of the bottle type, and that vote
// holds posterior mass on the "plastic" class itself.
type Hierarchy struct {
	parent []int
	depth  []int // roots are depth 0
	order  []int // classes, deepest first
}

// NewHierarchy checks parent (parent[c] is c's parent class, or -1 for a
// root) for range errors and cycles.
func NewHierarchy(parent []int) (*Hierarchy, error) {
	h := &Hierarchy{parent: append([]int(nil), parent...), depth: make([]int, len(parent))}
	for c := range h.depth {
		h.depth[c] = -1
	}
	for c, p := range parent {
		if p < -1 || p >= len(parent) {
			return nil, fmt.Errorf("agreement: hierarchy: class %d: parent %d out of range [-1,%d)", c, p, len(parent))
		}
	}
	for c := range parent {
		if _, err := h.depthOf(c); err != nil {
			return nil, err
		}
	}
	h.order = h.deepestFirst()
	return h, nil
}

// depthOf walks up to a root or to a node of known depth, then fills in
// depths on the way back; a walk longer than the tree is a cycle.
func (h *Hierarchy) depthOf(c int) (int, error) {
	var path []int
	n := c
	for n >= 0 && h.depth[n] < 0 {
		path = append(path, n)
		if len(path) > len(h.parent) {
			return 0, fmt.Errorf("agreement: hierarchy: class %d is its own ancestor", c)
		}
		n = h.parent[n]
	}
	d := -1
	if n >= 0 {
		d = h.depth[n]
	}
	for i := len(path) - 1; i >= 0; i-- {
		d++
		h.depth[path[i]] = d
	}
	return h.depth[c], nil
}

// Depth is the number of edges from c up to its root.
func (h *Hierarchy) Depth(c int) int { return h.depth[c] }

// AtDepth returns c's ancestor at depth d (0 = its root), the label to show
// when a release is cut at that level. A class shallower than d is its own
// answer: a "glass" vote at depth 2 is still "glass".
func (h *Hierarchy) AtDepth(c, d int) int {
	for h.depth[c] > d {
		c = h.parent[c]
	}
	return c
}

// SubtreeMass sums post (one item's posterior over all classes) over each
// node's subtree: out[n] = post[n] + the masses of n's children.
func (h *Hierarchy) SubtreeMass(post []float64) []float64 {
	out := append([]float64(nil), post...)
	// Adding deepest nodes first makes each child complete before its
	// parent takes it in.
	for _, c := range h.order {
		if p := h.parent[c]; p >= 0 {
			out[p] += out[c]
		}
	}
	return out
}

func (h *Hierarchy) deepestFirst() []int {
	maxDepth := 0
	for _, d := range h.depth {
		maxDepth = max(maxDepth, d)
	}
	order := make([]int, 0, len(h.depth))
	for d := maxDepth; d >= 0; d-- {
		for c, cd := range h.depth {
			if cd == d {
				order = append(order, c)
			}
		}
	}
	return order
}

// RollUp returns the deepest class whose subtree holds at least target of
// the item's posterior, and that mass: "PET bottle, 0.98" when the bottle
// type is clear, "plastic, 0.97" when it is disputed. Among nodes at the
// same depth the larger mass wins, then the lower id (only possible for
// target <= 0.5). It returns -1, 0 when not even a root reaches target,
// which can happen when the tree has several roots.
func (h *Hierarchy) RollUp(post []float64, target float64) (class int, mass float64) {
	sub := h.SubtreeMass(post)
	class = -1
	for c, m := range sub {
		if m < target {
			continue
		}
		switch {
		case class < 0, h.depth[c] > h.depth[class]:
			class, mass = c, m
		case h.depth[c] == h.depth[class] && m > mass:
			class, mass = c, m
		}
	}
	return class, mass
}

// RollUpAll applies RollUp to every item of a consensus.
func (h *Hierarchy) RollUpAll(c *Consensus, target float64) (class []int32, mass []float64, err error) {
	if c.NumClasses != len(h.parent) {
		return nil, nil, fmt.Errorf("agreement: roll-up: consensus has %d classes, hierarchy %d", c.NumClasses, len(h.parent))
	}
	class, mass = make([]int32, c.NumItems), make([]float64, c.NumItems)
	for item := 0; item < c.NumItems; item++ {
		n, m := h.RollUp(c.PosteriorOf(item), target)
		class[item], mass[item] = int32(n), m
	}
	return class, mass, nil
}
