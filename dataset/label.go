package dataset

import (
	"fmt"
	"strings"
)

// TaxNode is one label of the project's taxonomy, in pre-order (parents
// before children).
type TaxNode struct {
	ID       int64
	ParentID int64 // 0 for a root
	Key      string
	Name     string
	Depth    int
	IsLeaf   bool
}

// LevelLeaf asks for leaf labels.
const LevelLeaf = -1

// ParseLevel reads "leaf" or a depth (0 = the taxonomy's roots).
func ParseLevel(s string) (int, error) {
	if s == "leaf" || s == "" {
		return LevelLeaf, nil
	}
	var n int
	if _, err := fmt.Sscanf(s, "%d", &n); err != nil || n < 0 || fmt.Sprint(n) != s {
		return 0, fmt.Errorf("level %q: want leaf or a depth 0, 1, 2...", s)
	}
	return n, nil
}

// Vote is an item's evidence for its label, as the agreement engine left
// it.
type Vote struct {
	LabelID          int64 // consensus leaf or node (0: none)
	Confidence       float64
	RollupLabelID    int64 // deepest sure ancestor at the project's target (0: none)
	RollupConfidence float64
	PosteriorLabels  []int64 // the full posterior, when the engine kept it
	Posterior        []float64
	LeadLabelID      int64 // a lead's decision overrides the crowd (0: none)
}

// labeller picks an item's label at the release's level.
type labeller struct {
	nodes []TaxNode
	index map[int64]int
	paths []string
	level int
	min   float64
	mass  []float64 // scratch, one per node
}

func newLabeller(nodes []TaxNode, level int, min float64) (*labeller, error) {
	l := &labeller{nodes: nodes, index: make(map[int64]int, len(nodes)), paths: make([]string, len(nodes)),
		level: level, min: min, mass: make([]float64, len(nodes))}
	for i, n := range nodes {
		l.index[n.ID] = i
		l.paths[i] = n.Key
		if n.ParentID != 0 {
			p, ok := l.index[n.ParentID]
			if !ok {
				return nil, fmt.Errorf("taxonomy: label %q comes before its parent", n.Key)
			}
			l.paths[i] = l.paths[p] + "/" + n.Key
		}
	}
	return l, nil
}

// eligible says whether node i may be a label at the release's level: a
// leaf for "leaf"; at depth N a node at depth N, or a leaf above it ("glass"
// has no deeper kinds, so it is its own answer at any depth).
func (l *labeller) eligible(i int) bool {
	n := l.nodes[i]
	if l.level == LevelLeaf {
		return n.IsLeaf
	}
	return n.Depth == l.level || n.IsLeaf && n.Depth < l.level
}

// atLevel climbs from node id to its ancestor at the release's level.
func (l *labeller) atLevel(id int64) (int, bool) {
	i, ok := l.index[id]
	if !ok {
		return 0, false
	}
	for l.level != LevelLeaf && l.nodes[i].Depth > l.level {
		i = l.index[l.nodes[i].ParentID]
	}
	return i, l.eligible(i)
}

// choose returns the label for an item and its confidence, or ok=false
// when nothing at the level is sure enough. A lead's decision wins. With a
// posterior, each eligible node's subtree mass is its confidence, so a
// disputed "PET bottle vs film" item still counts as a sure "plastic" at
// depth 1. Without one, the consensus label and then the roll-up are
// climbed to the level.
func (l *labeller) choose(v Vote) (node int, conf float64, ok bool) {
	if v.LeadLabelID != 0 {
		if i, ok := l.atLevel(v.LeadLabelID); ok {
			return i, 1, true
		}
		return 0, 0, false
	}
	if len(v.Posterior) > 0 && len(v.Posterior) == len(v.PosteriorLabels) {
		clear(l.mass)
		for k, id := range v.PosteriorLabels {
			if i, ok := l.index[id]; ok {
				l.mass[i] += v.Posterior[k]
			}
		}
		// Pre-order: children follow parents, so a backward sweep adds each
		// finished subtree into its parent.
		for i := len(l.nodes) - 1; i >= 0; i-- {
			if p := l.nodes[i].ParentID; p != 0 {
				l.mass[l.index[p]] += l.mass[i]
			}
		}
		best := -1
		for i := range l.nodes {
			if l.eligible(i) && (best < 0 || l.mass[i] > l.mass[best]) {
				best = i
			}
		}
		if best >= 0 && l.mass[best] >= l.min {
			return best, min(l.mass[best], 1), true
		}
		return 0, 0, false
	}
	if v.LabelID != 0 && v.Confidence >= l.min {
		if i, ok := l.atLevel(v.LabelID); ok {
			return i, v.Confidence, true
		}
	}
	if v.RollupLabelID != 0 && v.RollupConfidence >= l.min {
		if i, ok := l.atLevel(v.RollupLabelID); ok {
			return i, v.RollupConfidence, true
		}
	}
	return 0, 0, false
}

// tree renders the taxonomy as an indented list for the card.
func treeText(nodes []TaxNode) string {
	var b strings.Builder
	for _, n := range nodes {
		fmt.Fprintf(&b, "%s- %s (%s)\n", strings.Repeat("  ", n.Depth), n.Key, n.Name)
	}
	return b.String()
}
