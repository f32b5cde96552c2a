package agreement

import (
	"math"
	"testing"
)

func mustAlpha(t *testing.T, v *Votes, opt AlphaOptions) AlphaResult {
	t.Helper()
	r, err := Alpha(v, opt)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Defined() {
		t.Fatalf("alpha undefined: %+v", r)
	}
	return r
}

// ratioValues maps class c to the value c+1, the numbers in the files.
func ratioValues(k int) []float64 {
	vs := make([]float64, k)
	for c := range vs {
		vs[c] = float64(c + 1)
	}
	return vs
}

// Krippendorff (2011), Computing Krippendorff's Alpha-Reliability, the
// 4 observers x 12 units example with missing values. Reference README
// section 4: nominal 0.743 quoted (exact 113/152, D_o 1/5, D_e 152/195
// recomputed), ordinal 0.815 and interval 0.849 quoted from a third-party
// test that says the paper prints them (exact interval 951/1120), ratio
// 0.797 quoted only by the python krippendorff tests (source unknown).
func TestAlphaKrippendorff2011(t *testing.T) {
	v, _ := longVotes(t, "krippendorff2011_long.csv", "unit", "observer", "value", 5)

	nom := mustAlpha(t, v, AlphaOptions{Metric: Nominal})
	if nom.Units != 11 || nom.Skipped != 1 || nom.Pairable != 40 {
		t.Errorf("got %d units, %d skipped, %d pairable; want 11, 1, 40", nom.Units, nom.Skipped, nom.Pairable)
	}
	near(t, "nominal", nom.Alpha, 0.743, 5e-4)
	near(t, "nominal exact", nom.Alpha, 113.0/152, 1e-12)
	near(t, "nominal D_o", nom.Observed, 1.0/5, 1e-12)
	near(t, "nominal D_e", nom.Expected, 152.0/195, 1e-12)

	ord := mustAlpha(t, v, AlphaOptions{Metric: Ordinal})
	near(t, "ordinal", ord.Alpha, 0.815, 5e-4)
	near(t, "ordinal recomputed", ord.Alpha, 0.8153875038, 1e-9)

	iv := mustAlpha(t, v, AlphaOptions{Metric: Interval})
	near(t, "interval", iv.Alpha, 0.849, 5e-4)
	near(t, "interval exact", iv.Alpha, 951.0/1120, 1e-12)
	near(t, "interval D_o", iv.Observed, 13.0/30, 1e-12)
	near(t, "interval D_e", iv.Expected, 112.0/39, 1e-12)

	rt := mustAlpha(t, v, AlphaOptions{Metric: Ratio, Values: ratioValues(5)})
	near(t, "ratio", rt.Alpha, 0.797, 5e-4)
	near(t, "ratio recomputed", rt.Alpha, 0.7974027747, 1e-9)
}

// The worked example of Wikipedia's "Krippendorff's alpha" page (from
// Krippendorff's Content Analysis): nominal 0.691 and interval 0.811 are
// from memory of the page, matching fast-krippendorff's tests; exact
// 56/81 and 643/793, ordinal and ratio recomputed only (reference README
// section 4).
func TestAlphaWikipedia3x15(t *testing.T) {
	v, _ := longVotes(t, "krippendorff_wikipedia_3x15_long.csv", "unit", "coder", "value", 4)
	nom := mustAlpha(t, v, AlphaOptions{Metric: Nominal})
	if nom.Units != 12 || nom.Skipped != 3 || nom.Pairable != 26 {
		t.Errorf("got %d units, %d skipped, %d pairable; want 12, 3, 26", nom.Units, nom.Skipped, nom.Pairable)
	}
	near(t, "nominal", nom.Alpha, 0.691, 5e-4)
	near(t, "nominal exact", nom.Alpha, 56.0/81, 1e-12)
	near(t, "interval", mustAlpha(t, v, AlphaOptions{Metric: Interval}).Alpha, 0.811, 5e-4)
	near(t, "interval exact", mustAlpha(t, v, AlphaOptions{Metric: Interval}).Alpha, 643.0/793, 1e-12)
	near(t, "ordinal recomputed", mustAlpha(t, v, AlphaOptions{Metric: Ordinal}).Alpha, 0.8067214199, 1e-9)
	near(t, "ratio recomputed", mustAlpha(t, v, AlphaOptions{Metric: Ratio, Values: ratioValues(4)}).Alpha, 0.8089436708, 1e-9)
}

// Interval alpha depends on differences only, so shifting the values
// changes nothing; Values = class id + 1 equals the default class ids.
func TestAlphaIntervalShift(t *testing.T) {
	v, _ := longVotes(t, "krippendorff2011_long.csv", "unit", "observer", "value", 5)
	a := mustAlpha(t, v, AlphaOptions{Metric: Interval})
	b := mustAlpha(t, v, AlphaOptions{Metric: Interval, Values: ratioValues(5)})
	near(t, "shifted interval", b.Alpha, a.Alpha, 1e-12)
}

func TestAlphaProperties(t *testing.T) {
	v := randomVotes(5, 150, 10, 4, 5)
	same := *v
	same.Label = make([]int32, len(v.Label))
	for i := range same.Label {
		same.Label[i] = v.Item[i] % 5
	}
	for _, m := range []Metric{Nominal, Ordinal, Interval} {
		near(t, "identical raters "+m.String(), mustAlpha(t, &same, AlphaOptions{Metric: m}).Alpha, 1, 1e-12)
	}

	before := mustAlpha(t, v, AlphaOptions{Metric: Nominal})
	perm := []int32{4, 2, 0, 1, 3}
	relabelled := *v
	relabelled.Label = make([]int32, len(v.Label))
	for i, l := range v.Label {
		relabelled.Label[i] = perm[l]
	}
	after := mustAlpha(t, &relabelled, AlphaOptions{Metric: Nominal})
	near(t, "relabelled nominal alpha", after.Alpha, before.Alpha, 1e-12)

}

// With the same number of votes on every item, nominal alpha's D_o is
// 1 - PBar and its D_e is n/(n-1) PBarE's complement, so alpha = 1 -
// (n-1)/n (1 - kappa) exactly (algebra of the two definitions; it links
// the Fleiss 1971 checks to the alpha code).
func TestAlphaNominalMatchesFleissOnEqualVotes(t *testing.T) {
	v, _ := longVotes(t, "fleiss1971_diagnoses_long.csv", "subject", "rater", "category", 5)
	a := mustAlpha(t, v, AlphaOptions{Metric: Nominal})
	f, _ := Fleiss(v)
	n := float64(a.Pairable)
	near(t, "alpha from kappa", a.Alpha, 1-(n-1)/n*(1-f.Kappa), 1e-12)
}

func TestAlphaUndefinedAndErrors(t *testing.T) {
	one := &Votes{NumItems: 2, NumLabellers: 2, NumClasses: 3,
		Item: []int32{0, 0, 1, 1}, Labeller: []int32{0, 1, 0, 1}, Label: []int32{2, 2, 2, 2}}
	r, err := Alpha(one, AlphaOptions{Metric: Nominal})
	if err != nil {
		t.Fatal(err)
	}
	if r.Defined() || !math.IsNaN(r.Alpha) {
		t.Errorf("all values equal: got %+v, want undefined", r)
	}
	lonely := &Votes{NumItems: 2, NumLabellers: 1, NumClasses: 3,
		Item: []int32{0, 1}, Labeller: []int32{0, 0}, Label: []int32{0, 1}}
	if r, _ := Alpha(lonely, AlphaOptions{}); r.Defined() || r.Skipped != 2 {
		t.Errorf("no pairable unit: got %+v, want undefined with 2 skipped", r)
	}
	if _, err := Alpha(one, AlphaOptions{Metric: Ratio}); err == nil {
		t.Error("ratio without values accepted")
	}
	if _, err := Alpha(one, AlphaOptions{Metric: Ratio, Values: []float64{-1, 0, 1}}); err == nil {
		t.Error("negative ratio value accepted")
	}
	if _, err := Alpha(one, AlphaOptions{Metric: Interval, Values: []float64{1}}); err == nil {
		t.Error("wrong number of values accepted")
	}
	if _, err := Alpha(one, AlphaOptions{Metric: Metric(9)}); err == nil {
		t.Error("unknown metric accepted")
	}
}
