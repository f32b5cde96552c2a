package dataset

import (
	"fmt"
	"strconv"
	"strings"
)

// Split is one of a release's three parts.
type Split uint8

// The splits, in the order "most protected last": a group that must move
// (see AssignSplits) only ever moves towards Test.
const (
	Train Split = iota
	Validation
	Test
)

var splitNames = [...]string{"train", "validation", "test"}

func (s Split) String() string { return splitNames[s] }

// ParseSplitName reads "train", "validation" or "test".
func ParseSplitName(name string) (Split, error) {
	for i, n := range splitNames {
		if n == name {
			return Split(i), nil
		}
	}
	return 0, fmt.Errorf("split %q: want train, validation or test", name)
}

// Fractions are the split's target shares in whole percent, summing to 100.
type Fractions [3]int

// DefaultFractions is 80/10/10.
var DefaultFractions = Fractions{80, 10, 10}

// ParseFractions reads "80/10/10" (train/validation/test percent).
func ParseFractions(s string) (Fractions, error) {
	parts := strings.Split(s, "/")
	if len(parts) != 3 {
		return Fractions{}, fmt.Errorf("split %q: want three whole percentages like 80/10/10", s)
	}
	var f Fractions
	sum := 0
	for i, p := range parts {
		n, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || n < 0 || n > 100 {
			return Fractions{}, fmt.Errorf("split %q: part %d: want a whole percentage 0-100", s, i+1)
		}
		f[i] = n
		sum += n
	}
	if sum != 100 {
		return Fractions{}, fmt.Errorf("split %q: parts sum to %d, want 100", s, sum)
	}
	return f, nil
}

func (f Fractions) String() string { return fmt.Sprintf("%d/%d/%d", f[0], f[1], f[2]) }

// GroupSplit is the split of the group whose key is group, a pure function
// of (seed, group, fractions): the group lands in one of 100 buckets by a
// hash, and the buckets are dealt out by percent. Because nothing else
// enters, a group keeps its split however the dataset grows. This function
// is part of the release format: changing it moves items between splits of
// existing projects.
func GroupSplit(seed, group int64, f Fractions) Split {
	x := splitmix64(uint64(seed) ^ splitmix64(uint64(group)))
	bucket := int((x >> 32) * 100 >> 32) // uniform in [0,100)
	switch {
	case bucket < f[0]:
		return Train
	case bucket < f[0]+f[1]:
		return Validation
	}
	return Test
}

// splitmix64 is the finaliser of Steele, Lea and Flood's SplitMix64
// generator (OOPSLA 2014): a bijection whose output bits each depend on
// every input bit.
func splitmix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// GroupItem is what split assignment needs to know of an item.
type GroupItem struct {
	ID        int64
	ClusterID int64  // near-duplicate cluster (0: none)
	GroupKey  string // manifest group ("": none)
}

// AssignSplits gives every item a split and a group key, keeping each
// group in one split. Groups are the connected components of "same
// near-duplicate cluster" and "same manifest group"; a group's key is its
// smallest item id, which new items (with larger ids) never change.
//
// pins holds the splits items had in earlier releases (of any seed and
// fractions): a group with a pinned item keeps the pinned split, so only
// never-released groups are dealt out by seed and fractions. When a new
// item joins two old groups into one, the merged group takes the highest
// split any of its pinned items had (Test over Validation over Train), so
// a test item never becomes a training item. With the same seed and
// fractions and no such merge, pinned items' splits equal GroupSplit's
// anyway.
func AssignSplits(items []GroupItem, seed int64, f Fractions, pins map[int64]Split) (splits []Split, groups []int64) {
	uf := newUnionFind(len(items))
	first := map[int64]int32{}
	firstGroup := map[string]int32{}
	for i, it := range items {
		if it.ClusterID != 0 {
			if j, ok := first[it.ClusterID]; ok {
				uf.union(int32(i), j)
			} else {
				first[it.ClusterID] = int32(i)
			}
		}
		if it.GroupKey != "" {
			if j, ok := firstGroup[it.GroupKey]; ok {
				uf.union(int32(i), j)
			} else {
				firstGroup[it.GroupKey] = int32(i)
			}
		}
	}
	// Indexed by a set's root: its smallest id, and its latest pinned split
	// plus one (0: none pinned).
	key := make([]int64, len(items))
	pinned := make([]Split, len(items))
	for i, it := range items {
		r := uf.find(int32(i))
		if k := key[r]; k == 0 || it.ID < k {
			key[r] = it.ID
		}
		if s, ok := pins[it.ID]; ok && s+1 > pinned[r] {
			pinned[r] = s + 1
		}
	}
	splits, groups = make([]Split, len(items)), make([]int64, len(items))
	for i := range items {
		r := uf.find(int32(i))
		groups[i] = key[r]
		if pinned[r] > 0 {
			splits[i] = pinned[r] - 1
		} else {
			splits[i] = GroupSplit(seed, key[r], f)
		}
	}
	return splits, groups
}
