package agreement

import (
	"math"
	"testing"
)

// Wilson intervals for four of the examples in Newcombe (1998, Statistics
// in Medicine 17, 857-872, Table I, method 3). The table's figures are from
// memory; each was recomputed here from Wilson's formula and agrees to 4 dp.
func TestWilsonIntervalNewcombe(t *testing.T) {
	for _, tc := range []struct {
		x, n   int
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0, 0.1611},
		{1, 29, 0.0061, 0.1718},
	} {
		lo, hi := WilsonInterval(tc.x, tc.n, 1.959964)
		if math.Abs(lo-tc.lo) > 5e-5 || math.Abs(hi-tc.hi) > 5e-5 {
			t.Errorf("%d/%d: [%.4f, %.4f], want [%.4f, %.4f]", tc.x, tc.n, lo, hi, tc.lo, tc.hi)
		}
	}
	if lo, _ := WilsonInterval(0, 0, 1.96); !math.IsNaN(lo) {
		t.Errorf("0/0 gave %v, want NaN", lo)
	}
}

func TestLeaveOneOutMajority(t *testing.T) {
	for _, tc := range []struct {
		counts []int32
		own    int
		want   int
	}{
		{[]int32{3, 1, 0}, 0, 0},  // 2 vs 1 for the others
		{[]int32{2, 1, 0}, 0, -1}, // 1 vs 1: tied
		{[]int32{1, 0, 0}, 0, -1}, // nobody else voted
		{[]int32{1, 2, 0}, 0, 1},
	} {
		if got := leaveOneOutMajority(tc.counts, tc.own); got != tc.want {
			t.Errorf("counts %v own %d: %d, want %d", tc.counts, tc.own, got, tc.want)
		}
	}
}

// Twelve sound labellers (85% right), one guessing at random, one who
// always answers "glass" (class 0, 20% of the items) and one who is sound
// but clicks through in half a second. Each must get exactly its flag.
func TestReliabilityFlagsSimulatedLabellers(t *testing.T) {
	const k, good = 3, 12
	conf := make([][]float64, good+3)
	for l := range conf {
		conf[l] = symmetricConfusion(k, 0.85)
	}
	random, spammer, fast := good, good+1, good+2
	conf[random] = symmetricConfusion(k, 1.0/3)
	conf[spammer] = []float64{1, 0, 0, 1, 0, 0, 1, 0, 0}
	s := simulate(5, 1500, 5, conf, []float64{0.2, 0.4, 0.4})
	s.votes.Seconds = make([]float64, s.votes.Len())
	for i, l := range s.votes.Labeller {
		s.votes.Seconds[i] = 4 + float64(i%3)
		if int(l) == fast {
			s.votes.Seconds[i] = 0.5
		}
	}
	gold := map[int]int{}
	for item := 0; item < 300; item++ {
		gold[item] = int(s.truth[item])
	}
	goldRight, goldSeen := make([]int, len(conf)), make([]int, len(conf))
	for i, item := range s.votes.Item {
		if g, ok := gold[int(item)]; ok {
			goldSeen[s.votes.Labeller[i]]++
			if int(s.votes.Label[i]) == g {
				goldRight[s.votes.Labeller[i]]++
			}
		}
	}
	truthRight := make([]float64, len(conf))
	perLabeller := make([]float64, len(conf))
	for i, item := range s.votes.Item {
		l := s.votes.Labeller[i]
		perLabeller[l]++
		if s.votes.Label[i] == s.truth[item] {
			truthRight[l]++
		}
	}
	for l := range truthRight {
		truthRight[l] /= perLabeller[l]
	}
	ds, err := DawidSkene(s.votes, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	reps, err := Reliability(s.votes, ds, gold, ReliabilityOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for l, r := range reps {
		var want Flags
		switch l {
		case random:
			want = FlagNearRandom
		case spammer:
			// Always "glass": right only on the 20% glass items, so its
			// estimated accuracy is 0.2 as well.
			want = FlagOverusedLabel | FlagNearRandom
		case fast:
			want = FlagTooFast
		}
		if r.Flags != want {
			t.Errorf("labeller %d: flags %q, want %q (%+v)", l, r.Flags, want, r)
		}
		if l < good || l == fast {
			// Compare with how often this labeller was really right in the
			// draw, not with the 0.85 it was drawn from (sampling noise).
			if math.Abs(r.EstimatedAccuracy-truthRight[l]) > 0.02 {
				t.Errorf("labeller %d: estimated accuracy %.3f, right on %.3f of its votes", l, r.EstimatedAccuracy, truthRight[l])
			}
		}
		if r.GoldCorrect != goldRight[l] || r.GoldVotes != goldSeen[l] {
			t.Errorf("labeller %d: gold %d/%d, counted %d/%d", l, r.GoldCorrect, r.GoldVotes, goldRight[l], goldSeen[l])
		}
		if lo, hi := WilsonInterval(goldRight[l], goldSeen[l], 1.959964); r.GoldLo != lo || r.GoldHi != hi {
			t.Errorf("labeller %d: interval [%v, %v], want [%v, %v]", l, r.GoldLo, r.GoldHi, lo, hi)
		}
	}
	if r := reps[spammer]; r.TopLabel != 0 || r.TopLabelShare != 1 || math.Abs(r.ConsensusShare-0.2) > 0.05 {
		t.Errorf("spammer: top label %d share %.2f, consensus share %.2f", r.TopLabel, r.TopLabelShare, r.ConsensusShare)
	}
	if r := reps[random]; math.Abs(r.KappaVsConsensus) > 0.1 || reps[0].KappaVsConsensus < 0.5 {
		t.Errorf("kappa vs consensus: random %.3f, sound %.3f", r.KappaVsConsensus, reps[0].KappaVsConsensus)
	}
	if reps[0].MedianSeconds != 5 {
		t.Errorf("median seconds %v, want 5", reps[0].MedianSeconds)
	}
}
