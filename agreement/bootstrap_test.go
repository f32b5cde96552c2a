package agreement

import (
	"math"
	"math/rand/v2"
	"testing"
)

// expand builds the resampled data itself: unit units[i] repeated mult[i]
// times. The resamplers must agree with the plain estimators on it.
func expand(c *ItemCounts, units []int32, mult []int32) *ItemCounts {
	var rows [][]int
	for i, m := range mult {
		row := make([]int, c.NumClasses)
		u := units[i]
		for e := c.Start[u]; e < c.Start[u+1]; e++ {
			row[c.Class[e]] = int(c.Count[e])
		}
		for range m {
			rows = append(rows, row)
		}
	}
	out, err := CountsFromTable(rows)
	if err != nil {
		panic(err)
	}
	return out
}

// The per-item shortcuts inside the bootstrap must give exactly what the
// estimators give on the resampled data (Krippendorff 2011 and Fleiss 1971
// data, random multiplicities).
func TestResamplersMatchEstimators(t *testing.T) {
	v, _ := longVotes(t, "krippendorff2011_long.csv", "unit", "observer", "value", 5)
	kc, err := CountVotes(v)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(9, 9))
	draw := func(n int) []int32 {
		mult := make([]int32, n)
		for range n {
			mult[rng.IntN(n)]++
		}
		return mult
	}
	for _, opt := range []AlphaOptions{{Metric: Nominal}, {Metric: Ordinal}, {Metric: Interval}, {Metric: Ratio, Values: ratioValues(5)}} {
		d, err := newDistance(5, opt)
		if err != nil {
			t.Fatal(err)
		}
		units, newStat := alphaResampler(kc, d)
		stat := newStat()
		for range 20 {
			mult := draw(len(units))
			got, ok := stat(mult)
			want, err := AlphaCounts(expand(kc, units, mult), opt)
			if err != nil {
				t.Fatal(err)
			}
			if ok != want.OK || ok && math.Abs(got-want.Alpha) > 1e-12 {
				t.Fatalf("%v: resampled alpha %v (ok %v), estimator %v (ok %v)", opt.Metric, got, ok, want.Alpha, want.OK)
			}
		}
	}
	fc := fleiss1971(t)
	units, newStat := fleissResampler(fc)
	stat := newStat()
	for range 20 {
		mult := draw(len(units))
		got, _ := stat(mult)
		near(t, "resampled Fleiss' kappa", got, FleissCounts(expand(fc, units, mult)).Kappa, 1e-12)
	}
}

func TestBootstrapFleissDeterministic(t *testing.T) {
	c := fleiss1971(t)
	a, err := BootstrapFleiss(c, BootstrapOptions{Seed: 1, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, _ := BootstrapFleiss(c, BootstrapOptions{Seed: 1, Workers: 3})
	if a != b {
		t.Errorf("same seed, different workers: %+v vs %+v", a, b)
	}
	other, _ := BootstrapFleiss(c, BootstrapOptions{Seed: 2})
	if other.Lower == a.Lower && other.Upper == a.Upper {
		t.Errorf("seeds 1 and 2 gave the same interval %+v", a)
	}
	if a.Resamples != DefaultResamples || a.Level != DefaultLevel || a.Undefined != 0 {
		t.Errorf("defaults not applied: %+v", a)
	}
}

// On Fleiss' (1971) data the interval holds the point estimate 0.430 and
// is plausibly wide for 30 subjects; copying the subjects 4 times (120
// items) narrows it by about half, as 1/sqrt(n) says.
func TestBootstrapFleissContainsEstimateAndNarrows(t *testing.T) {
	c := fleiss1971(t)
	iv, err := BootstrapFleiss(c, BootstrapOptions{Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	if !iv.Defined() || !(iv.Lower < iv.Estimate && iv.Estimate < iv.Upper) {
		t.Fatalf("interval %+v does not contain the estimate", iv)
	}
	near(t, "estimate", iv.Estimate, 5437.0/12637, 1e-12)
	width := iv.Upper - iv.Lower
	if width < 0.05 || width > 0.5 {
		t.Errorf("width %v for 30 items, want between 0.05 and 0.5", width)
	}

	units := make([]int32, c.NumItems)
	mult := make([]int32, c.NumItems)
	for i := range units {
		units[i], mult[i] = int32(i), 4
	}
	big := expand(c, units, mult)
	iv4, _ := BootstrapFleiss(big, BootstrapOptions{Seed: 7})
	near(t, "estimate on copies", iv4.Estimate, iv.Estimate, 1e-12)
	if ratio := (iv4.Upper - iv4.Lower) / width; ratio < 0.35 || ratio > 0.7 {
		t.Errorf("4x the items: width ratio %v, want about 0.5", ratio)
	}
}

func TestBootstrapAlpha(t *testing.T) {
	v, _ := longVotes(t, "krippendorff2011_long.csv", "unit", "observer", "value", 5)
	c, _ := CountVotes(v)
	for _, m := range []Metric{Nominal, Ordinal, Interval} {
		iv, err := BootstrapAlpha(c, AlphaOptions{Metric: m}, BootstrapOptions{Seed: 3, Resamples: 500})
		if err != nil {
			t.Fatal(err)
		}
		if !iv.Defined() || !(iv.Lower <= iv.Estimate && iv.Estimate <= iv.Upper) {
			t.Errorf("%v: interval %+v does not contain the estimate", m, iv)
		}
		again, _ := BootstrapAlpha(c, AlphaOptions{Metric: m}, BootstrapOptions{Seed: 3, Resamples: 500, Workers: 1})
		if again != iv {
			t.Errorf("%v: not deterministic: %+v vs %+v", m, iv, again)
		}
	}
}

func TestBootstrapUndefinedAndErrors(t *testing.T) {
	c, _ := CountsFromTable([][]int{{3, 0}, {2, 0}})
	iv, err := BootstrapFleiss(c, BootstrapOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if iv.Defined() || !math.IsNaN(iv.Lower) {
		t.Errorf("one-class data: got %+v, want undefined", iv)
	}
	// Two items, one of them all one class: some resamples draw it twice
	// and are undefined; they are counted and left out.
	c, _ = CountsFromTable([][]int{{3, 0}, {1, 1}})
	iv, _ = BootstrapFleiss(c, BootstrapOptions{Seed: 1, Resamples: 200})
	if iv.Undefined == 0 || iv.Undefined == 200 {
		t.Errorf("expected some undefined resamples, got %d of 200", iv.Undefined)
	}
	if _, err := BootstrapFleiss(c, BootstrapOptions{Level: 1.5}); err == nil {
		t.Error("level 1.5 accepted")
	}
	if _, err := BootstrapFleiss(c, BootstrapOptions{Resamples: -1}); err == nil {
		t.Error("negative resamples accepted")
	}
}
