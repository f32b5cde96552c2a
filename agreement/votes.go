package agreement

import "fmt"

// Votes holds votes in dense form: vote v is labeller Labeller[v] giving
// label Label[v] to item Item[v]. Ids run from 0 to NumItems-1,
// NumLabellers-1 and NumClasses-1. Seconds is optional (nil or one entry per
// vote, the time the labeller spent; negative means unknown).
type Votes struct {
	NumItems     int
	NumLabellers int
	NumClasses   int
	Item         []int32
	Labeller     []int32
	Label        []int32
	Seconds      []float64
}

// Len is the number of votes.
func (v *Votes) Len() int { return len(v.Item) }

// Validate checks that every id is in range and the slices agree in length.
func (v *Votes) Validate() error {
	n := len(v.Item)
	if len(v.Labeller) != n || len(v.Label) != n {
		return fmt.Errorf("agreement: votes slices differ in length: %d items, %d labellers, %d labels", n, len(v.Labeller), len(v.Label))
	}
	if v.Seconds != nil && len(v.Seconds) != n {
		return fmt.Errorf("agreement: %d seconds for %d votes", len(v.Seconds), n)
	}
	for i := 0; i < n; i++ {
		if it := v.Item[i]; it < 0 || int(it) >= v.NumItems {
			return fmt.Errorf("agreement: vote %d: item %d out of range [0,%d)", i, it, v.NumItems)
		}
		if l := v.Labeller[i]; l < 0 || int(l) >= v.NumLabellers {
			return fmt.Errorf("agreement: vote %d: labeller %d out of range [0,%d)", i, l, v.NumLabellers)
		}
		if c := v.Label[i]; c < 0 || int(c) >= v.NumClasses {
			return fmt.Errorf("agreement: vote %d: label %d out of range [0,%d)", i, c, v.NumClasses)
		}
	}
	return nil
}
