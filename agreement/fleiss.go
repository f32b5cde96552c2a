package agreement

import (
	"fmt"
	"math"
)

// ItemCounts is the per-item tally that Fleiss' kappa, Krippendorff's alpha
// and their bootstraps share: for item i, entries Start[i]..Start[i+1]-1 say
// that Count[e] votes gave class Class[e]. Only classes with a vote appear,
// so the table stays small when the taxonomy has many classes and each item
// only a few votes. Build it once with CountVotes and reuse it.
type ItemCounts struct {
	NumItems   int
	NumClasses int
	Start      []int32 // len NumItems+1
	Class      []int32
	Count      []int32
}

// CountVotes tallies votes per item and class. Every vote counts, including
// repeat votes by one labeller on one item: Fleiss' kappa and alpha treat
// votes, not labellers, as the unit.
func CountVotes(v *Votes) (*ItemCounts, error) {
	if err := v.Validate(); err != nil {
		return nil, fmt.Errorf("count votes: %w", err)
	}
	items := groupByItem(v)
	c := &ItemCounts{NumItems: v.NumItems, NumClasses: v.NumClasses, Start: make([]int32, v.NumItems+1)}
	tally := make([]int32, v.NumClasses)
	for i := 0; i < v.NumItems; i++ {
		first := int32(len(c.Class))
		for _, vi := range items.order[items.start[i]:items.start[i+1]] {
			l := v.Label[vi]
			if tally[l] == 0 {
				c.Class = append(c.Class, l)
			}
			tally[l]++
		}
		for e := first; e < int32(len(c.Class)); e++ {
			c.Count = append(c.Count, tally[c.Class[e]])
			tally[c.Class[e]] = 0
		}
		c.Start[i+1] = int32(len(c.Class))
	}
	return c, nil
}

// CountsFromTable builds ItemCounts from a dense items x classes table, the
// form in which published examples print their data.
func CountsFromTable(rows [][]int) (*ItemCounts, error) {
	if len(rows) == 0 {
		return nil, fmt.Errorf("counts table: no rows")
	}
	k := len(rows[0])
	c := &ItemCounts{NumItems: len(rows), NumClasses: k, Start: make([]int32, len(rows)+1)}
	for i, row := range rows {
		if len(row) != k {
			return nil, fmt.Errorf("counts table: row %d has %d classes, row 0 has %d", i, len(row), k)
		}
		for j, n := range row {
			if n < 0 {
				return nil, fmt.Errorf("counts table: row %d class %d: negative count %d", i, j, n)
			}
			if n > 0 {
				c.Class = append(c.Class, int32(j))
				c.Count = append(c.Count, int32(n))
			}
		}
		c.Start[i+1] = int32(len(c.Class))
	}
	return c, nil
}

// Votes returns the number of votes item i received.
func (c *ItemCounts) Votes(i int) int {
	n := 0
	for e := c.Start[i]; e < c.Start[i+1]; e++ {
		n += int(c.Count[e])
	}
	return n
}

// ItemAgreement is Fleiss' P_i for item i: the share of ordered pairs of its
// votes that agree, sum_j n_ij(n_ij-1) / (n_i(n_i-1)). It is NaN (undefined)
// for an item with fewer than two votes.
func (c *ItemCounts) ItemAgreement(i int) float64 {
	n, same := 0.0, 0.0
	for e := c.Start[i]; e < c.Start[i+1]; e++ {
		x := float64(c.Count[e])
		n += x
		same += x * (x - 1)
	}
	if n < 2 {
		return math.NaN()
	}
	return same / (n * (n - 1))
}

// FleissResult is Fleiss' kappa with the parts it is made of.
//
// Kappa is NaN exactly when OK is false: no item has two votes (then PBar
// and PBarE are NaN too), or every vote is in one class (PBarE = 1, chance
// agreement is total). PerCategory[j] is NaN when class j got no votes or all of them;
// check CategoryOK[j].
type FleissResult struct {
	Kappa       float64
	PBar        float64   // mean observed agreement over included items
	PBarE       float64   // chance agreement, sum of Share[j]^2
	Share       []float64 // p_j, share of class j among included votes
	PerCategory []float64
	CategoryOK  []bool
	Items       int // items with two or more votes, the ones used
	Skipped     int // items with fewer than two votes, left out
	Votes       int // votes on included items
	OK          bool
}

// Defined reports whether Kappa is a number.
func (r FleissResult) Defined() bool { return r.OK }

// Fleiss computes Fleiss' kappa from votes. See FleissCounts.
func Fleiss(v *Votes) (FleissResult, error) {
	c, err := CountVotes(v)
	if err != nil {
		return FleissResult{}, fmt.Errorf("fleiss kappa: %w", err)
	}
	return FleissCounts(c), nil
}

// FleissCounts computes Fleiss' kappa, overall and per class, allowing items
// to have different numbers of votes n_i.
//
// Fleiss (1971, Psychological Bulletin 76(5):378-382) assumes every item has
// the same n. The generalisation used here replaces n by n_i item by item
// and pools all votes of the included items for p_j. That is common
// practice, not a formula printed in the 1971 paper; Gwet's Handbook of
// Inter-Rater Reliability treats missing ratings the same way for P_i but
// averages per-item shares for p_j (from memory), so the two can differ a
// little when n_i vary:
//
//	P_i   = sum_j n_ij(n_ij-1) / (n_i(n_i-1))          items with n_i >= 2
//	PBar  = mean of P_i over those items
//	p_j   = sum_i n_ij / sum_i n_i                      same items
//	PBarE = sum_j p_j^2
//	kappa = (PBar - PBarE) / (1 - PBarE)
//
// Per class, Fleiss (1971) gives kappa_j = 1 - sum_i n_ij(n-n_ij) /
// (N n(n-1) p_j q_j) with q_j = 1-p_j; replacing n by n_i the same way gives
//
//	kappa_j = 1 - mean_i[ n_ij(n_i-n_ij) / (n_i(n_i-1)) ] / (p_j q_j)
//
// and kappa stays the p_j q_j-weighted mean of the kappa_j, as in the paper.
// With equal n_i both reduce to Fleiss' formulas exactly.
func FleissCounts(c *ItemCounts) FleissResult {
	k := c.NumClasses
	r := FleissResult{Share: make([]float64, k), PerCategory: make([]float64, k), CategoryOK: make([]bool, k)}
	disagree := make([]float64, k) // sum over items of n_ij(n_i-n_ij)/(n_i(n_i-1))
	sumP := 0.0
	for i := 0; i < c.NumItems; i++ {
		lo, hi := c.Start[i], c.Start[i+1]
		n := 0.0
		for e := lo; e < hi; e++ {
			n += float64(c.Count[e])
		}
		if n < 2 {
			r.Skipped++
			continue
		}
		r.Items++
		r.Votes += int(n)
		pairs := n * (n - 1)
		same := 0.0
		for e := lo; e < hi; e++ {
			x := float64(c.Count[e])
			same += x * (x - 1)
			r.Share[c.Class[e]] += x
			disagree[c.Class[e]] += x * (n - x) / pairs
		}
		sumP += same / pairs
	}
	r.Kappa, r.PBar, r.PBarE = math.NaN(), math.NaN(), math.NaN()
	for j := range r.PerCategory {
		r.PerCategory[j] = math.NaN()
	}
	if r.Items == 0 {
		return r
	}
	pe := 0.0
	for j := range r.Share {
		r.Share[j] /= float64(r.Votes)
		pe += r.Share[j] * r.Share[j]
		if pq := r.Share[j] * (1 - r.Share[j]); pq > 0 {
			r.PerCategory[j] = 1 - disagree[j]/float64(r.Items)/pq
			r.CategoryOK[j] = true
		}
	}
	r.PBar = sumP / float64(r.Items)
	r.PBarE = pe
	if pe < 1 {
		r.Kappa = (r.PBar - pe) / (1 - pe)
		r.OK = true
	}
	return r
}
