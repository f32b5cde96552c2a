package agreement

import (
	"math"
	"testing"
)

// Worked by hand with a labeller who is right 80% of the time on two
// classes. For posterior (0.6, 0.4) one more vote gives
// max(.48,.08) + max(.12,.32) = .80, a gain of .20; (0.5, 0.5) gains .30;
// (0.99, 0.01) gains nothing, since one vote cannot overturn it. Two
// agreeing votes lift (0.6, 0.4) to 1.5*16/(1.5*16+1) = .96 >= .95.
func TestVotePolicyPlan(t *testing.T) {
	avg := []float64{0.8, 0.2, 0.2, 0.8}
	c := &Consensus{NumItems: 5, NumClasses: 2,
		Posterior: []float64{0.6, 0.4, 0.99, 0.01, 0.99, 0.01, 0.6, 0.4, 0.5, 0.5},
		Votes:     []int32{3, 2, 3, 5, 4},
	}
	pol := VotePolicy{MinVotes: 3, MaxVotes: 5, Target: 0.95}
	plans, err := pol.Plan(c, avg)
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		status ItemStatus
		more   int
		gain   float64
	}{
		{StatusNeedsVotes, 2, 0.2},
		{StatusNeedsVotes, 1, 0}, // held only by MinVotes
		{StatusDone, 0, 0},
		{StatusReview, 0, 0},
		{StatusNeedsVotes, 1, 0.3}, // would need 3 agreeing votes; 1 left
	}
	for i, w := range want {
		pl := plans[i]
		if pl.Status != w.status || pl.MoreVotes != w.more || math.Abs(pl.Gain-w.gain) > 1e-12 {
			t.Errorf("item %d: %v more %d gain %.3f; want %v more %d gain %.3f", i, pl.Status, pl.MoreVotes, pl.Gain, w.status, w.more, w.gain)
		}
	}
	q := Queue(plans)
	if len(q) != 3 || q[0].Item != 4 || q[1].Item != 0 || q[2].Item != 1 {
		t.Errorf("queue %+v, want items 4, 0, 1", q)
	}
	if StatusNeedsVotes.String() != "needs_votes" {
		t.Errorf("status name %q", StatusNeedsVotes)
	}
}

func TestVotePolicyValidate(t *testing.T) {
	for _, p := range []VotePolicy{
		{MinVotes: -1, MaxVotes: 3, Target: 0.9},
		{MinVotes: 4, MaxVotes: 3, Target: 0.9},
		{MinVotes: 1, MaxVotes: 3, Target: 0},
		{MinVotes: 1, MaxVotes: 3, Target: 1.5},
	} {
		if p.Validate() == nil {
			t.Errorf("%+v accepted", p)
		}
	}
}

func TestAverageConfusionWeightsByVotes(t *testing.T) {
	r := &DawidSkeneResult{Consensus: Consensus{NumClasses: 2}, NumLabellers: 2,
		LabellerVotes: []int32{3, 1},
		Confusion:     []float64{1, 0, 0, 1, 0.6, 0.4, 0.2, 0.8},
	}
	want := []float64{0.9, 0.1, 0.05, 0.95}
	for i, x := range AverageConfusion(r) {
		if math.Abs(x-want[i]) > 1e-12 {
			t.Errorf("cell %d = %v, want %v", i, x, want[i])
		}
	}
}
