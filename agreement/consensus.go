package agreement

import "fmt"

// Consensus is the per-item outcome of a consensus method, in flat slices
// indexed by dense item id. Posterior holds NumItems rows of NumClasses
// probabilities each (row-major), so one allocation serves a million items.
type Consensus struct {
	NumItems   int
	NumClasses int
	// Label is the class with the highest posterior, or -1 when the item
	// has no votes and no fixed label, or (majority vote only) is tied.
	Label []int32
	// Confidence is the posterior of Label (0 when Label is -1).
	Confidence []float64
	// Posterior is NumItems x NumClasses, row-major; each row sums to 1.
	Posterior []float64
	// Votes is the number of votes each item received.
	Votes []int32
}

// PosteriorOf returns item's row of the posterior. The slice aliases the
// result; copy it before changing it.
func (c *Consensus) PosteriorOf(item int) []float64 {
	k := c.NumClasses
	return c.Posterior[item*k : (item+1)*k : (item+1)*k]
}

// Majority is plain majority vote. Ties are reported, never broken: the
// order in which votes arrived must not decide an item's label.
type Majority struct {
	Consensus
	// Counts is NumItems x NumClasses: how many votes each label got.
	Counts []int32
	// Tied marks items whose top count is shared by two or more labels.
	Tied []bool
}

// TiedLabels returns the labels sharing the top count on item, in class
// order, or nil when the item is not tied.
func (m *Majority) TiedLabels(item int) []int {
	if !m.Tied[item] {
		return nil
	}
	row := m.Counts[item*m.NumClasses : (item+1)*m.NumClasses]
	top := maxInt32(row)
	var out []int
	for k, n := range row {
		if n == top {
			out = append(out, k)
		}
	}
	return out
}

// MajorityVote counts the votes per item and label. The posterior is the
// share of votes per label (uniform for an item without votes); Label is -1
// for tied or unvoted items and Confidence is then the top share.
func MajorityVote(v *Votes) (*Majority, error) {
	if err := v.Validate(); err != nil {
		return nil, fmt.Errorf("majority vote: %w", err)
	}
	n, k := v.NumItems, v.NumClasses
	m := &Majority{
		Consensus: newConsensus(n, k),
		Counts:    make([]int32, n*k),
		Tied:      make([]bool, n),
	}
	for i, item := range v.Item {
		m.Counts[int(item)*k+int(v.Label[i])]++
		m.Votes[item]++
	}
	for item := 0; item < n; item++ {
		row := m.Counts[item*k : (item+1)*k]
		post := m.PosteriorOf(item)
		total := m.Votes[item]
		if total == 0 {
			for c := range post {
				post[c] = 1 / float64(k)
			}
			m.Label[item] = -1
			continue
		}
		top, best, ties := int32(-1), int32(-1), 0
		for c, cnt := range row {
			post[c] = float64(cnt) / float64(total)
			switch {
			case cnt > top:
				top, best, ties = cnt, int32(c), 1
			case cnt == top:
				ties++
			}
		}
		m.Confidence[item] = float64(top) / float64(total)
		if ties > 1 {
			m.Tied[item] = true
			best = -1
		}
		m.Label[item] = best
	}
	return m, nil
}

func newConsensus(items, classes int) Consensus {
	return Consensus{
		NumItems:   items,
		NumClasses: classes,
		Label:      make([]int32, items),
		Confidence: make([]float64, items),
		Posterior:  make([]float64, items*classes),
		Votes:      make([]int32, items),
	}
}

func maxInt32(xs []int32) int32 {
	top := xs[0]
	for _, x := range xs[1:] {
		top = max(top, x)
	}
	return top
}

// byItem lists vote indices grouped by item (a CSR layout): the votes on
// item i are order[start[i]:start[i+1]], in input order. Built with a
// counting sort so it costs two passes and no comparisons.
type byItem struct {
	start []int32
	order []int32
}

func groupByItem(v *Votes) byItem {
	start := make([]int32, v.NumItems+1)
	for _, it := range v.Item {
		start[it+1]++
	}
	for i := 1; i <= v.NumItems; i++ {
		start[i] += start[i-1]
	}
	next := make([]int32, v.NumItems)
	copy(next, start[:v.NumItems])
	order := make([]int32, len(v.Item))
	for i, it := range v.Item {
		order[next[it]] = int32(i)
		next[it]++
	}
	return byItem{start: start, order: order}
}
