package agreement

import "testing"

// BenchmarkFleissAlpha1M is the budgeted path: tally 1,000,000 votes
// (100,000 items x 10 votes, 500 labellers, 20 classes; millionVotes) once,
// then Fleiss' kappa and nominal alpha from the same tally.
func BenchmarkFleissAlpha1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		c, err := CountVotes(v)
		if err != nil {
			return err
		}
		FleissCounts(c)
		_, err = AlphaCounts(c, AlphaOptions{Metric: Nominal})
		return err
	})
}

func BenchmarkAlphaOrdinal1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		_, err := Alpha(v, AlphaOptions{Metric: Ordinal})
		return err
	})
}

// BenchmarkPairwiseCohen1M computes kappa for every pair of the 500
// labellers that shares at least DefaultMinShared items.
func BenchmarkPairwiseCohen1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		_, err := PairwiseCohen(v, PairOptions{})
		return err
	})
}

func BenchmarkPairwiseCohenQuadratic1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		_, err := PairwiseCohen(v, PairOptions{Weights: QuadraticWeights(20)})
		return err
	})
}

// BenchmarkBootstrapFleiss1M draws the default 1000 resamples of the
// 100,000 items; BenchmarkBootstrapAlpha1M the same for nominal alpha.
func BenchmarkBootstrapFleiss1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		c, err := CountVotes(v)
		if err != nil {
			return err
		}
		_, err = BootstrapFleiss(c, BootstrapOptions{Seed: 1})
		return err
	})
}

func BenchmarkBootstrapAlpha1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		c, err := CountVotes(v)
		if err != nil {
			return err
		}
		_, err = BootstrapAlpha(c, AlphaOptions{Metric: Nominal}, BootstrapOptions{Seed: 1})
		return err
	})
}
