package agreement

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
)

// DefaultResamples is the number of bootstrap resamples when none is given.
// 1000 is common practice for 95% percentile intervals: the 2.5% and 97.5%
// points then rest on 25 resamples each.
const DefaultResamples = 1000

// DefaultLevel is the confidence level when none is given.
const DefaultLevel = 0.95

// BootstrapOptions tunes a bootstrap. Zero values mean the defaults:
// DefaultResamples, DefaultLevel, and one worker per GOMAXPROCS. The result
// depends only on Seed and Resamples, never on Workers: resample r draws
// from its own generator, PCG(Seed, r).
type BootstrapOptions struct {
	Resamples int
	Level     float64
	Seed      uint64
	Workers   int
}

// BootstrapInterval is a percentile bootstrap confidence interval. Lower and Upper
// are NaN exactly when OK is false: the statistic is undefined on the full
// data, or on all but one of the resamples.
type BootstrapInterval struct {
	Estimate     float64 // the statistic on the full data
	Lower, Upper float64
	Level        float64
	Resamples    int // resamples drawn
	Undefined    int // resamples on which the statistic was undefined, left out
	OK           bool
}

// Defined reports whether the interval is a pair of numbers.
func (iv BootstrapInterval) Defined() bool { return iv.OK }

// BootstrapFleiss resamples items (those with two or more votes) with
// replacement and returns a percentile interval for Fleiss' kappa as
// FleissCounts computes it.
func BootstrapFleiss(c *ItemCounts, opt BootstrapOptions) (BootstrapInterval, error) {
	est := FleissCounts(c)
	units, newStat := fleissResampler(c)
	return bootstrap(est.Kappa, est.OK, len(units), newStat, opt)
}

// fleissResampler returns the pairable units and Fleiss' kappa as a
// function of how often each was drawn.
func fleissResampler(c *ItemCounts) ([]int32, func() resampleStat) {
	units, size := pairableUnits(c)
	agreement := make([]float64, len(units))
	for i, u := range units {
		agreement[i] = c.ItemAgreement(int(u))
	}
	newStat := func() resampleStat {
		share := make([]float64, c.NumClasses)
		return func(mult []int32) (float64, bool) {
			clear(share)
			sumP, items, votes := 0.0, 0.0, 0.0
			for i, m := range mult {
				if m == 0 {
					continue
				}
				w := float64(m)
				u := units[i]
				sumP += w * agreement[i]
				items += w
				votes += w * size[i]
				for e := c.Start[u]; e < c.Start[u+1]; e++ {
					share[c.Class[e]] += w * float64(c.Count[e])
				}
			}
			pe := 0.0
			for _, s := range share {
				pe += (s / votes) * (s / votes)
			}
			if pe >= 1 {
				return math.NaN(), false
			}
			return (sumP/items - pe) / (1 - pe), true
		}
	}
	return units, newStat
}

// BootstrapAlpha resamples pairable units with replacement and returns a
// percentile interval for Krippendorff's alpha as AlphaCounts computes it.
//
// For nominal, interval and ratio metrics each unit's observed disagreement
// sum_ck o_ck d2_ck is one number, so a resample costs a pass over the
// units' class counts. The ordinal distance depends on the resample's value
// frequencies, so there each resample rebuilds the coincidence matrix.
func BootstrapAlpha(c *ItemCounts, a AlphaOptions, opt BootstrapOptions) (BootstrapInterval, error) {
	est, err := AlphaCounts(c, a)
	if err != nil {
		return BootstrapInterval{}, fmt.Errorf("bootstrap alpha: %w", err)
	}
	d, err := newDistance(c.NumClasses, a)
	if err != nil {
		return BootstrapInterval{}, fmt.Errorf("bootstrap alpha: %w", err)
	}
	units, newStat := alphaResampler(c, d)
	return bootstrap(est.Alpha, est.OK, len(units), newStat, opt)
}

// alphaResampler returns the pairable units and alpha as a function of how
// often each was drawn.
func alphaResampler(c *ItemCounts, d *distance) ([]int32, func() resampleStat) {
	units, size := pairableUnits(c)
	k := c.NumClasses
	var newStat func() resampleStat
	if d.d2 == nil {
		newStat = func() resampleStat {
			o, nc := make([]float64, k*k), make([]float64, k)
			return func(mult []int32) (float64, bool) {
				clear(o)
				clear(nc)
				for i, m := range mult {
					if m > 0 {
						addCoincidences(c, int(units[i]), float64(m), o, nc)
					}
				}
				_, _, alpha, _, ok := alphaFromCoincidences(o, nc, d)
				return alpha, ok
			}
		}
	} else {
		// Each unit's sum_ck o_ck d2_ck, computed once.
		observed := make([]float64, len(units))
		o, nc := make([]float64, k*k), make([]float64, k)
		for i, u := range units {
			clear(o)
			addCoincidences(c, int(u), 1, o, nc)
			for j, x := range o {
				observed[i] += x * d.d2[j]
			}
		}
		newStat = func() resampleStat {
			nc := make([]float64, k)
			return func(mult []int32) (float64, bool) {
				clear(nc)
				n, obs := 0.0, 0.0
				for i, m := range mult {
					if m == 0 {
						continue
					}
					w := float64(m)
					u := units[i]
					n += w * size[i]
					obs += w * observed[i]
					for e := c.Start[u]; e < c.Start[u+1]; e++ {
						nc[c.Class[e]] += w * float64(c.Count[e])
					}
				}
				exp := 0.0
				for x := 0; x < k; x++ {
					for y := 0; y < k; y++ {
						exp += nc[x] * nc[y] * d.d2[x*k+y]
					}
				}
				if exp <= 0 {
					return math.NaN(), false
				}
				return 1 - (n-1)*obs/exp, true
			}
		}
	}
	return units, newStat
}

// pairableUnits lists the items with two or more votes and their vote
// counts: the only items that move Fleiss' kappa or alpha.
func pairableUnits(c *ItemCounts) (units []int32, size []float64) {
	for i := 0; i < c.NumItems; i++ {
		if n := c.Votes(i); n >= 2 {
			units = append(units, int32(i))
			size = append(size, float64(n))
		}
	}
	return units, size
}

// resampleStat computes a statistic from how many times each unit was
// drawn. Each worker gets its own, so it may keep scratch buffers.
type resampleStat func(mult []int32) (float64, bool)

func bootstrap(estimate float64, ok bool, units int, newStat func() resampleStat, opt BootstrapOptions) (BootstrapInterval, error) {
	b, level, workers := opt.Resamples, opt.Level, opt.Workers
	if b == 0 {
		b = DefaultResamples
	}
	if level == 0 {
		level = DefaultLevel
	}
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	if b < 0 {
		return BootstrapInterval{}, fmt.Errorf("bootstrap: %d resamples, want > 0", b)
	}
	if !(level > 0 && level < 1) {
		return BootstrapInterval{}, fmt.Errorf("bootstrap: level %v, want between 0 and 1", level)
	}
	iv := BootstrapInterval{Estimate: estimate, Lower: math.NaN(), Upper: math.NaN(), Level: level, Resamples: b}
	if !ok || units == 0 {
		iv.Undefined = b
		return iv, nil
	}
	values := make([]float64, b)
	defined := make([]bool, b)
	workers = min(workers, b)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Go(func() {
			stat := newStat()
			mult := make([]int32, units)
			for r := w; r < b; r += workers {
				clear(mult)
				rng := rand.New(rand.NewPCG(opt.Seed, uint64(r)))
				for range units {
					mult[rng.IntN(units)]++
				}
				values[r], defined[r] = stat(mult)
			}
		})
	}
	wg.Wait()
	kept := values[:0]
	for r, v := range values {
		if defined[r] {
			kept = append(kept, v)
		}
	}
	iv.Undefined = b - len(kept)
	if len(kept) < 2 {
		return iv, nil
	}
	slices.Sort(kept)
	tail := (1 - level) / 2
	iv.Lower, iv.Upper = quantile(kept, tail), quantile(kept, 1-tail)
	iv.OK = true
	return iv, nil
}

// quantile of sorted xs by linear interpolation between order statistics
// (Hyndman & Fan type 7, R's default; common practice).
func quantile(xs []float64, p float64) float64 {
	h := p * float64(len(xs)-1)
	lo := int(math.Floor(h))
	if lo >= len(xs)-1 {
		return xs[len(xs)-1]
	}
	return xs[lo] + (h-float64(lo))*(xs[lo+1]-xs[lo])
}
