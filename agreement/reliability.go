package agreement

import (
	"fmt"
	"math"
	"slices"
	"strings"
)

// ReliabilityOptions holds the flag thresholds. A zero field takes the
// default named beside it; a negative one switches that check off. The
// defaults are common practice picked for Concord, not published values.
type ReliabilityOptions struct {
	// MinSeconds: a median time per vote below it flags TooFast. Default 1 s.
	MinSeconds float64
	// NearRandomMargin: a Dawid-Skene accuracy within this of 1/K flags
	// NearRandom. Default 0.1.
	NearRandomMargin float64
	// KappaNearZero: |kappa vs the leave-one-out consensus| below it also
	// flags NearRandom. Default 0.1.
	KappaNearZero float64
	// OveruseRatio and OveruseMinShare: a labeller's most used label flags
	// OverusedLabel when its share is at least OveruseMinShare and at least
	// OveruseRatio times that label's share of the consensus on the same
	// items. Defaults 2 and 0.5.
	OveruseRatio    float64
	OveruseMinShare float64
	// MinVotes: labellers with fewer votes get no flags; a handful of
	// votes cannot tell skill from luck. Default 20.
	MinVotes int
	// Z is the normal quantile of the Wilson interval. Default Z95.
	Z float64
}

// Z95 is the two-sided 95% quantile of the standard normal distribution.
const Z95 = 1.959964

func (o ReliabilityOptions) withDefaults() ReliabilityOptions {
	def := func(x *float64, d float64) {
		if *x == 0 {
			*x = d
		}
	}
	def(&o.MinSeconds, 1)
	def(&o.NearRandomMargin, 0.1)
	def(&o.KappaNearZero, 0.1)
	def(&o.OveruseRatio, 2)
	def(&o.OveruseMinShare, 0.5)
	def(&o.Z, Z95)
	if o.MinVotes == 0 {
		o.MinVotes = 20
	}
	return o
}

// Flags mark a labeller for a lead to look at. They are prompts for a
// conversation, not verdicts: see the package doc before tying them to pay.
type Flags uint8

const (
	FlagTooFast Flags = 1 << iota
	FlagNearRandom
	FlagOverusedLabel
)

func (f Flags) String() string {
	var s []string
	for _, n := range []struct {
		f    Flags
		name string
	}{{FlagTooFast, "too_fast"}, {FlagNearRandom, "near_random"}, {FlagOverusedLabel, "overused_label"}} {
		if f&n.f != 0 {
			s = append(s, n.name)
		}
	}
	return strings.Join(s, ",")
}

// LabellerReport describes one labeller. Rates with nothing to count are NaN.
type LabellerReport struct {
	Labeller int
	Votes    int
	// EstimatedAccuracy is sum_k prior_k * pi_kk from the Dawid-Skene fit:
	// the chance the labeller is right on an item drawn from the priors.
	EstimatedAccuracy float64
	// Gold: votes on gold items, how many right, the share and its Wilson
	// (1927) score interval.
	GoldVotes, GoldCorrect       int
	GoldAccuracy, GoldLo, GoldHi float64
	// ConsensusVotes counts votes whose item has a unique majority among
	// the other votes (leave one vote out); ConsensusAgreement is the share
	// matching it and KappaVsConsensus is Cohen's (1960) unweighted kappa
	// on those pairs, so a labeller who agrees only as often as their
	// label mix predicts scores near 0.
	ConsensusVotes     int
	ConsensusAgreement float64
	KappaVsConsensus   float64
	// MedianSeconds over votes with a known time.
	MedianSeconds float64
	// TopLabel is the labeller's most used label (lowest id on ties),
	// TopLabelShare its share of their votes, ConsensusShare its share of
	// the Dawid-Skene labels of the same items.
	TopLabel                      int
	TopLabelShare, ConsensusShare float64
	Flags                         Flags
}

// Reliability reports on every labeller. gold maps item -> class; ds is a
// Dawid-Skene fit of v. Repeated votes by one labeller on an item (possible
// in hand-built Votes, not from Builder) count as separate votes.
func Reliability(v *Votes, ds *DawidSkeneResult, gold map[int]int, opt ReliabilityOptions) ([]LabellerReport, error) {
	if ds.NumItems != v.NumItems || ds.NumLabellers != v.NumLabellers || ds.NumClasses != v.NumClasses {
		return nil, fmt.Errorf("reliability: fit is for %d items, %d labellers, %d classes; votes have %d, %d, %d",
			ds.NumItems, ds.NumLabellers, ds.NumClasses, v.NumItems, v.NumLabellers, v.NumClasses)
	}
	mv, err := MajorityVote(v)
	if err != nil {
		return nil, fmt.Errorf("reliability: %w", err)
	}
	opt = opt.withDefaults()
	k, nl := v.NumClasses, v.NumLabellers
	own := make([]int, nl*k)  // labeller's label counts
	cons := make([]int, nl*k) // DS labels of the labeller's items
	// pairs[l] is labeller l's labels against the leave-one-out majority.
	pairs := make([]float64, nl*k*k)
	reps := make([]LabellerReport, nl)
	for i := range v.Item {
		item, l, c := int(v.Item[i]), int(v.Labeller[i]), int(v.Label[i])
		r := &reps[l]
		r.Votes++
		own[l*k+c]++
		cons[l*k+int(ds.Label[item])]++
		if g, ok := gold[item]; ok {
			r.GoldVotes++
			if g == c {
				r.GoldCorrect++
			}
		}
		if loo := leaveOneOutMajority(mv.Counts[item*k:(item+1)*k], c); loo >= 0 {
			r.ConsensusVotes++
			pairs[(l*k+c)*k+loo]++
		}
	}
	medians := medianSecondsByLabeller(v)
	for l := range reps {
		r := &reps[l]
		r.Labeller = l
		r.MedianSeconds = medians[l]
		conf := ds.ConfusionOf(l)
		for t, p := range ds.Prior {
			r.EstimatedAccuracy += p * conf[t*k+t]
		}
		r.GoldAccuracy, r.GoldLo, r.GoldHi = math.NaN(), math.NaN(), math.NaN()
		if r.GoldVotes > 0 {
			r.GoldAccuracy = float64(r.GoldCorrect) / float64(r.GoldVotes)
			r.GoldLo, r.GoldHi = WilsonInterval(r.GoldCorrect, r.GoldVotes, opt.Z)
		}
		r.KappaVsConsensus, r.ConsensusAgreement = math.NaN(), math.NaN()
		if r.ConsensusVotes > 0 {
			kap, err := CohenKappa(&Contingency{K: k, Counts: pairs[l*k*k : (l+1)*k*k]}, Weights{})
			if err != nil {
				return nil, fmt.Errorf("reliability: labeller %d: %w", l, err)
			}
			r.ConsensusAgreement, r.KappaVsConsensus = kap.Observed, kap.Kappa
		}
		if r.Votes > 0 {
			row := own[l*k : (l+1)*k]
			r.TopLabel = slices.Index(row, slices.Max(row))
			r.TopLabelShare = float64(row[r.TopLabel]) / float64(r.Votes)
			r.ConsensusShare = float64(cons[l*k+r.TopLabel]) / float64(r.Votes)
		}
		r.Flags = flagsFor(r, k, opt)
	}
	return reps, nil
}

func flagsFor(r *LabellerReport, k int, o ReliabilityOptions) Flags {
	if r.Votes < o.MinVotes {
		return 0
	}
	var f Flags
	if o.MinSeconds > 0 && r.MedianSeconds < o.MinSeconds {
		f |= FlagTooFast // NaN (no times known) compares false: no flag
	}
	if o.NearRandomMargin > 0 && r.EstimatedAccuracy <= 1/float64(k)+o.NearRandomMargin {
		f |= FlagNearRandom
	}
	if o.KappaNearZero > 0 && r.ConsensusVotes >= o.MinVotes && math.Abs(r.KappaVsConsensus) < o.KappaNearZero {
		f |= FlagNearRandom
	}
	if o.OveruseRatio > 0 && r.TopLabelShare >= o.OveruseMinShare && r.TopLabelShare >= o.OveruseRatio*r.ConsensusShare {
		f |= FlagOverusedLabel
	}
	return f
}

// leaveOneOutMajority is the unique top label of counts once one vote for
// own is removed, or -1 when the rest are tied or there are none.
func leaveOneOutMajority(counts []int32, own int) int {
	best, top, ties := -1, int32(0), 0
	for c, n := range counts {
		if c == own {
			n--
		}
		switch {
		case n > top:
			best, top, ties = c, n, 1
		case n == top && n > 0:
			ties++
		}
	}
	if ties != 1 {
		return -1
	}
	return best
}

// WilsonInterval is the Wilson (1927, JASA 22(158) 209-212) score interval
// for x successes in n trials at normal quantile z. Unlike the Wald
// interval it stays inside [0,1] and is sound for the few gold votes a
// labeller often has.
func WilsonInterval(x, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return math.NaN(), math.NaN()
	}
	p, nf, z2 := float64(x)/float64(n), float64(n), z*z
	d := 1 + z2/nf
	centre := (p + z2/(2*nf)) / d
	half := z / d * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	return max(centre-half, 0), min(centre+half, 1)
}

// medianSecondsByLabeller ignores negative (unknown) times; NaN if none.
func medianSecondsByLabeller(v *Votes) []float64 {
	per := make([][]float64, v.NumLabellers)
	for i, s := range v.Seconds {
		if s >= 0 {
			per[v.Labeller[i]] = append(per[v.Labeller[i]], s)
		}
	}
	out := make([]float64, v.NumLabellers)
	for l, xs := range per {
		out[l] = math.NaN()
		if n := len(xs); n > 0 {
			slices.Sort(xs)
			out[l] = (xs[(n-1)/2] + xs[n/2]) / 2
		}
	}
	return out
}
