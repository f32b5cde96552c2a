package agreement

import (
	"math"
	"testing"
)

func fleiss1971(t *testing.T) *ItemCounts {
	return countsTable(t, "fleiss1971_diagnoses_counts.csv", "depression", "personality_disorder", "schizophrenia", "neurosis", "other")
}

// Fleiss (1971), Psychological Bulletin 76(5):378-382, Table 1: 30
// patients, 6 diagnoses each. Expected values per the reference README
// section 1: kappa 0.430 (the paper's figure, from memory; exact 5437/12637
// recomputed by irr, statsmodels and by hand), PBar 5/9 and PBarE
// 3563/16200 (recomputed), per-category exact fractions recomputed by irr
// kappam.fleiss(detail=TRUE).
func TestFleiss1971Diagnoses(t *testing.T) {
	r := FleissCounts(fleiss1971(t))
	if !r.Defined() || r.Items != 30 || r.Skipped != 0 || r.Votes != 180 {
		t.Fatalf("got ok %v, %d items, %d skipped, %d votes; want true, 30, 0, 180", r.OK, r.Items, r.Skipped, r.Votes)
	}
	near(t, "kappa", r.Kappa, 0.430, 5e-4)
	near(t, "kappa exact", r.Kappa, 5437.0/12637, 1e-12)
	near(t, "PBar", r.PBar, 5.0/9, 1e-12)
	near(t, "PBarE", r.PBarE, 3563.0/16200, 1e-12)
	for j, want := range []float64{.1444, .1444, .1667, .3056, .2389} {
		near(t, "p_j", r.Share[j], want, 5e-5)
	}
	printed := []float64{0.245, 0.245, 0.520, 0.471, 0.566}
	exact := []float64{35.0 / 143, 35.0 / 143, 13.0 / 25, 3239.0 / 6875, 3335.0 / 5891}
	for j := range exact {
		if !r.CategoryOK[j] {
			t.Fatalf("category %d undefined", j)
		}
		near(t, "per-category kappa", r.PerCategory[j], printed[j], 5e-4)
		near(t, "per-category kappa exact", r.PerCategory[j], exact[j], 1e-12)
	}

	// The same data as long votes (R irr's diagnoses) gives the same result.
	v, _ := longVotes(t, "fleiss1971_diagnoses_long.csv", "subject", "rater", "category", 5)
	fromVotes, err := Fleiss(v)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "kappa from votes", fromVotes.Kappa, r.Kappa, 1e-15)
}

// Wikipedia's "Fleiss' kappa" worked example as copied into statsmodels'
// test_inter_rater.py (reference README section 2): kappa 0.210 and P_i per
// subject quoted; PBar, PBarE and p_j recomputed.
func TestFleissWikipedia10x14(t *testing.T) {
	c := countsTable(t, "fleiss_wikipedia_10x14_counts.csv", "cat1", "cat2", "cat3", "cat4", "cat5")
	r := FleissCounts(c)
	near(t, "kappa", r.Kappa, 0.210, 5e-4)
	near(t, "kappa recomputed", r.Kappa, 0.2099307044, 1e-9)
	near(t, "PBar", r.PBar, 0.3780219780, 1e-9)
	near(t, "PBarE", r.PBarE, 0.2127551020, 1e-9)
	for j, want := range []float64{0.143, 0.200, 0.279, 0.150, 0.229} {
		near(t, "p_j", r.Share[j], want, 5e-4)
	}
	ref := loadReference(t, "fleiss_wikipedia_10x14_counts.csv")
	for i := range ref.rows {
		near(t, "P_i", c.ItemAgreement(i), ref.number(t, i, "p_i_published"), 5e-4)
	}
}

// Items with different numbers of votes: checked against the formula in
// FleissCounts' comment worked by hand, and items with one vote skipped.
func TestFleissVaryingVotes(t *testing.T) {
	// Item 0: 3 votes {A,A,B}; item 1: 2 votes {B,B}; item 2: 1 vote (left
	// out); item 3: no votes (left out).
	c, err := CountsFromTable([][]int{{2, 1}, {0, 2}, {1, 0}, {0, 0}})
	if err != nil {
		t.Fatal(err)
	}
	r := FleissCounts(c)
	if r.Items != 2 || r.Skipped != 2 || r.Votes != 5 {
		t.Fatalf("got %d items, %d skipped, %d votes; want 2, 2, 5", r.Items, r.Skipped, r.Votes)
	}
	// P_0 = 2/6, P_1 = 2/2, PBar = 2/3; p = (2/5, 3/5), PBarE = 13/25.
	near(t, "PBar", r.PBar, 2.0/3, 1e-15)
	near(t, "PBarE", r.PBarE, 13.0/25, 1e-15)
	near(t, "kappa", r.Kappa, (2.0/3-13.0/25)/(1-13.0/25), 1e-15)
	// Category A: mean[2*1/6, 0] = 1/6 over p q = 6/25.
	near(t, "kappa_A", r.PerCategory[0], 1-(1.0/6)/(6.0/25), 1e-15)
	// The p_j q_j-weighted mean of the per-category kappas is kappa.
	num, den := 0.0, 0.0
	for j := range r.PerCategory {
		pq := r.Share[j] * (1 - r.Share[j])
		num += pq * r.PerCategory[j]
		den += pq
	}
	near(t, "weighted mean of kappa_j", num/den, r.Kappa, 1e-15)
	if !math.IsNaN(c.ItemAgreement(2)) {
		t.Error("P_i of a one-vote item should be undefined")
	}
}

func TestFleissUndefined(t *testing.T) {
	for name, rows := range map[string][][]int{
		"no item with two votes": {{1, 0}, {0, 1}},
		"one class only":         {{3, 0}, {2, 0}},
	} {
		c, _ := CountsFromTable(rows)
		r := FleissCounts(c)
		if r.Defined() || !math.IsNaN(r.Kappa) {
			t.Errorf("%s: got %+v, want undefined", name, r)
		}
		if r.CategoryOK[1] || !math.IsNaN(r.PerCategory[1]) {
			t.Errorf("%s: unused class should be undefined, got %v", name, r.PerCategory[1])
		}
	}
}

// Identical votes on every item give kappa 1; renaming classes changes
// nothing.
func TestFleissProperties(t *testing.T) {
	v := randomVotes(3, 200, 15, 5, 4)
	for i := range v.Label {
		v.Label[i] = v.Item[i] % 4
	}
	r, err := Fleiss(v)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "identical raters", r.Kappa, 1, 1e-12)

	v = randomVotes(4, 200, 15, 5, 4)
	before, _ := Fleiss(v)
	perm := []int32{3, 1, 0, 2}
	for i, l := range v.Label {
		v.Label[i] = perm[l]
	}
	after, _ := Fleiss(v)
	near(t, "relabelled kappa", after.Kappa, before.Kappa, 1e-12)
	for j := range perm {
		near(t, "relabelled per-category", after.PerCategory[perm[j]], before.PerCategory[j], 1e-12)
	}
}

func TestCountsFromTableErrors(t *testing.T) {
	if _, err := CountsFromTable([][]int{{1, 2}, {1}}); err == nil {
		t.Error("ragged table accepted")
	}
	if _, err := CountsFromTable([][]int{{1, -2}}); err == nil {
		t.Error("negative count accepted")
	}
	if _, err := CountsFromTable(nil); err == nil {
		t.Error("empty table accepted")
	}
}
