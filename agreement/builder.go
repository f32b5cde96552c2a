package agreement

import (
	"errors"
	"fmt"
)

// Builder turns named votes into dense Votes. Ids are handed out in order of
// first appearance, and the names are kept so callers can turn ids back into
// names at the edges.
//
// A labeller voting twice on one item: Add reports dup=true and the later
// vote replaces the earlier one (label and seconds), keeping the earlier
// vote's position. A changed mind is the labeller's latest word, and
// counting both would give one person two votes in majority vote and
// Dawid-Skene alike.
type Builder struct {
	fixedClasses bool
	items        names
	labellers    names
	classes      names
	votes        Votes
	pair         map[uint64]int32 // item<<32 | labeller -> vote index
}

// names is a dense id <-> name table.
type names struct {
	list []string
	id   map[string]int32
}

func (n *names) lookup(name string) (int32, bool) {
	id, ok := n.id[name]
	return id, ok
}

func (n *names) intern(name string) int32 {
	if id, ok := n.id[name]; ok {
		return id
	}
	if n.id == nil {
		n.id = make(map[string]int32)
	}
	id := int32(len(n.list))
	n.id[name] = id
	n.list = append(n.list, name)
	return id
}

// NewBuilder returns a Builder whose classes are taken from the votes in
// order of first appearance.
func NewBuilder() *Builder {
	return &Builder{pair: make(map[uint64]int32)}
}

// NewBuilderWithClasses fixes the class list and order up front (say, the
// taxonomy's nodes), so class ids are stable across projects and runs and a
// class nobody chose still has a column. Add then rejects unknown labels.
func NewBuilderWithClasses(classes []string) (*Builder, error) {
	b := NewBuilder()
	for i, c := range classes {
		if c == "" {
			return nil, fmt.Errorf("agreement: class %d: empty name", i)
		}
		if _, ok := b.classes.lookup(c); ok {
			return nil, fmt.Errorf("agreement: class %d: %q listed twice", i, c)
		}
		b.classes.intern(c)
	}
	b.fixedClasses = true
	return b, nil
}

// ErrUnknownClass is returned by Add for a label outside a fixed class list.
var ErrUnknownClass = errors.New("unknown class")

// Add records one vote; seconds is the time spent (negative if unknown).
// dup reports that this labeller had already voted on this item (see
// Builder for what happens then).
func (b *Builder) Add(item, labeller, label string, seconds float64) (dup bool, err error) {
	switch {
	case item == "":
		return false, errors.New("agreement: vote with empty item name")
	case labeller == "":
		return false, fmt.Errorf("agreement: item %q: vote with empty labeller name", item)
	case label == "":
		return false, fmt.Errorf("agreement: item %q, labeller %q: empty label", item, labeller)
	}
	var c int32
	if b.fixedClasses {
		var ok bool
		if c, ok = b.classes.lookup(label); !ok {
			return false, fmt.Errorf("agreement: item %q, labeller %q: label %q: %w", item, labeller, label, ErrUnknownClass)
		}
	} else {
		c = b.classes.intern(label)
	}
	it, lb := b.items.intern(item), b.labellers.intern(labeller)
	key := uint64(it)<<32 | uint64(lb)
	if at, ok := b.pair[key]; ok {
		b.votes.Label[at] = c
		b.votes.Seconds[at] = seconds
		return true, nil
	}
	b.pair[key] = int32(len(b.votes.Item))
	b.votes.Item = append(b.votes.Item, it)
	b.votes.Labeller = append(b.votes.Labeller, lb)
	b.votes.Label = append(b.votes.Label, c)
	b.votes.Seconds = append(b.votes.Seconds, seconds)
	return false, nil
}

// Build returns the votes so far. The slices are copies: adding more votes
// afterwards does not change a built Votes.
func (b *Builder) Build() *Votes {
	return &Votes{
		NumItems:     len(b.items.list),
		NumLabellers: len(b.labellers.list),
		NumClasses:   len(b.classes.list),
		Item:         append([]int32(nil), b.votes.Item...),
		Labeller:     append([]int32(nil), b.votes.Labeller...),
		Label:        append([]int32(nil), b.votes.Label...),
		Seconds:      append([]float64(nil), b.votes.Seconds...),
	}
}

// ItemNames returns item names indexed by dense id.
func (b *Builder) ItemNames() []string { return append([]string(nil), b.items.list...) }

// LabellerNames returns labeller names indexed by dense id.
func (b *Builder) LabellerNames() []string { return append([]string(nil), b.labellers.list...) }

// ClassNames returns class names indexed by dense id.
func (b *Builder) ClassNames() []string { return append([]string(nil), b.classes.list...) }

// ItemID returns the dense id of a named item.
func (b *Builder) ItemID(name string) (int, bool) { id, ok := b.items.lookup(name); return int(id), ok }

// LabellerID returns the dense id of a named labeller.
func (b *Builder) LabellerID(name string) (int, bool) {
	id, ok := b.labellers.lookup(name)
	return int(id), ok
}

// ClassID returns the dense id of a named class.
func (b *Builder) ClassID(name string) (int, bool) {
	id, ok := b.classes.lookup(name)
	return int(id), ok
}
