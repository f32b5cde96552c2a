package agreement

import (
	"cmp"
	"fmt"
	"slices"
)

// VotePolicy says when an item has enough votes. An item is done once it
// has MinVotes votes and its consensus confidence reaches Target; it goes to
// review when MaxVotes votes still leave it below Target.
type VotePolicy struct {
	MinVotes int
	MaxVotes int
	Target   float64
}

// ItemStatus is where an item stands under a VotePolicy.
type ItemStatus int

const (
	StatusDone ItemStatus = iota
	StatusNeedsVotes
	StatusReview
)

func (s ItemStatus) String() string {
	switch s {
	case StatusDone:
		return "done"
	case StatusNeedsVotes:
		return "needs_votes"
	case StatusReview:
		return "review"
	}
	return fmt.Sprintf("ItemStatus(%d)", int(s))
}

// ItemPlan is one item's status and, if it needs votes, how urgently.
type ItemPlan struct {
	Item       int
	Status     ItemStatus
	Votes      int
	Confidence float64
	// MoreVotes is the least number of further votes that could settle
	// the item: enough for MinVotes, and enough unanimous votes for the
	// current label from the average labeller to reach Target (capped at
	// MaxVotes, in which case even that may fall short). 0 unless
	// Status is StatusNeedsVotes.
	MoreVotes int
	// Gain is the expected rise in the probability that the item's label
	// is right after one more vote (see the package doc).
	Gain float64
}

// Validate checks the policy's numbers.
func (p VotePolicy) Validate() error {
	switch {
	case p.MinVotes < 0:
		return fmt.Errorf("vote policy: min votes %d is negative", p.MinVotes)
	case p.MaxVotes < max(p.MinVotes, 1):
		return fmt.Errorf("vote policy: max votes %d is below min votes %d or 1", p.MaxVotes, p.MinVotes)
	case !(p.Target > 0 && p.Target <= 1):
		return fmt.Errorf("vote policy: target %g is outside (0,1]", p.Target)
	}
	return nil
}

// AverageConfusion is the vote-weighted mean of the labellers' confusion
// matrices: the labeller the next vote is expected to come from when the
// claimant is not yet known.
func AverageConfusion(r *DawidSkeneResult) []float64 {
	kk := r.NumClasses * r.NumClasses
	avg := make([]float64, kk)
	total := 0.0
	for l, n := range r.LabellerVotes {
		w := float64(n)
		total += w
		for i, x := range r.ConfusionOf(l) {
			avg[i] += w * x
		}
	}
	if total == 0 {
		// No votes at all: an uninformative labeller.
		for i := range avg {
			avg[i] = 1 / float64(r.NumClasses)
		}
		return avg
	}
	for i := range avg {
		avg[i] /= total
	}
	return avg
}

// Plan gives every item's status under the policy, in item order. avg is
// a K x K confusion matrix (rows: true class), usually AverageConfusion of
// a Dawid-Skene fit whose Consensus is c.
func (p VotePolicy) Plan(c *Consensus, avg []float64) ([]ItemPlan, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	k := c.NumClasses
	if len(avg) != k*k {
		return nil, fmt.Errorf("vote policy: confusion matrix has %d cells, want %d", len(avg), k*k)
	}
	plans := make([]ItemPlan, c.NumItems)
	w := make([]float64, k)
	for item := range plans {
		post := c.PosteriorOf(item)
		label := argmax(post)
		pl := ItemPlan{Item: item, Votes: int(c.Votes[item]), Confidence: post[label]}
		switch {
		case pl.Votes >= p.MinVotes && pl.Confidence >= p.Target:
			pl.Status = StatusDone
		case pl.Votes >= p.MaxVotes:
			pl.Status = StatusReview
		default:
			pl.Status = StatusNeedsVotes
			room := p.MaxVotes - pl.Votes
			pl.MoreVotes = max(p.MinVotes-pl.Votes, unanimousVotesToTarget(post, avg, label, p.Target, room, w))
			pl.Gain = oneVoteGain(post, avg)
		}
		plans[item] = pl
	}
	return plans, nil
}

// Queue returns the items needing votes, most useful first: by Gain, then
// lower confidence, then item id, so the order is total and reproducible.
func Queue(plans []ItemPlan) []ItemPlan {
	var q []ItemPlan
	for _, pl := range plans {
		if pl.Status == StatusNeedsVotes {
			q = append(q, pl)
		}
	}
	slices.SortFunc(q, func(a, b ItemPlan) int {
		return cmp.Or(cmp.Compare(b.Gain, a.Gain), cmp.Compare(a.Confidence, b.Confidence), cmp.Compare(a.Item, b.Item))
	})
	return q
}

// oneVoteGain is E[max_t P(t | votes, next vote)] - max_t P(t | votes)
// where the next vote j comes from avg: sum_j max_t p_t A[t][j] - max_t p_t.
func oneVoteGain(post, avg []float64) float64 {
	k := len(post)
	after := 0.0
	for j := 0; j < k; j++ {
		best := 0.0
		for t, p := range post {
			best = max(best, p*avg[t*k+j])
		}
		after += best
	}
	return max(after-post[argmax(post)], 0)
}

// unanimousVotesToTarget is the smallest n <= room such that n more votes
// for label from the average labeller lift its posterior to target, or
// room if none does. w is scratch space of len(post).
func unanimousVotesToTarget(post, avg []float64, label int, target float64, room int, w []float64) int {
	k := len(post)
	copy(w, post)
	for n := 1; n <= room; n++ {
		sum := 0.0
		for t := range w {
			w[t] *= avg[t*k+label]
			sum += w[t]
		}
		if sum == 0 {
			return room
		}
		// Rescale so long runs do not underflow.
		for t := range w {
			w[t] /= sum
		}
		if w[label] >= target {
			return n
		}
	}
	return room
}

// argmax returns the first index of the largest value.
func argmax(xs []float64) int {
	best := 0
	for i, x := range xs {
		if x > xs[best] {
			best = i
		}
	}
	return best
}
