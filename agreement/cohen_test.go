package agreement

import (
	"math"
	"math/rand/v2"
	"testing"
)

// cohenTables reads cohen_kappa_tables.csv: one contingency table per
// example, plus the disagreement weights where the file gives them.
func cohenTables(t *testing.T) (map[string]*Contingency, map[string][]float64) {
	t.Helper()
	r := loadReference(t, "cohen_kappa_tables.csv")
	type cell struct {
		a, b      int
		n, weight float64
	}
	cells := map[string][]cell{}
	size := map[string]int{}
	for i, row := range r.rows {
		ex := row[r.column(t, "example")]
		c := cell{r.integer(t, i, "row_category") - 1, r.integer(t, i, "col_category") - 1, r.number(t, i, "count"), r.number(t, i, "disagreement_weight")}
		cells[ex] = append(cells[ex], c)
		size[ex] = max(size[ex], c.a+1, c.b+1)
	}
	tables, weights := map[string]*Contingency{}, map[string][]float64{}
	for ex, cs := range cells {
		k := size[ex]
		tables[ex] = NewContingency(k)
		w := make([]float64, k*k)
		hasWeights := true
		for _, c := range cs {
			tables[ex].Add(c.a, c.b, c.n)
			w[c.a*k+c.b] = c.weight
			hasWeights = hasWeights && !math.IsNaN(c.weight)
		}
		if hasWeights {
			weights[ex] = w
		}
	}
	return tables, weights
}

func mustKappa(t *testing.T, tab *Contingency, w Weights) Kappa {
	t.Helper()
	k, err := CohenKappa(tab, w)
	if err != nil {
		t.Fatal(err)
	}
	if !k.Defined() {
		t.Fatalf("kappa undefined for %v", tab.Counts)
	}
	return k
}

func TestCohenKappaReferenceTables(t *testing.T) {
	tables, weights := cohenTables(t)

	t.Run("cohen1968_table1", func(t *testing.T) {
		// Cohen (1968), Psychological Bulletin 70(4):213-220, Table 1:
		// kappa .492, weighted kappa .348 with the file's disagreement
		// weights (quoted in R psych's cohen.kappa docs; exact 29/59, 8/23
		// recomputed per the reference README section 3).
		tab := tables["cohen1968_table1"]
		near(t, "kappa", mustKappa(t, tab, Weights{}).Kappa, 29.0/59, 1e-12)
		w, err := DisagreementWeights(3, weights["cohen1968_table1"])
		if err != nil {
			t.Fatal(err)
		}
		near(t, "weighted kappa", mustKappa(t, tab, w).Kappa, 8.0/23, 1e-12)
		near(t, "weighted kappa (printed)", mustKappa(t, tab, w).Kappa, 0.348, 5e-4)

		// Cohen's asymmetric weights on the same table: psych docs quote
		// "Cohen reports kw = .353"; recomputed 0.3533834586. Transposing
		// the table gives 0.4206 (recomputed), so orientation matters.
		asym, err := DisagreementWeights(3, []float64{0, 1, 4, 1, 0, 6, 2, 2, 0})
		if err != nil {
			t.Fatal(err)
		}
		near(t, "asymmetric weighted kappa", mustKappa(t, tab, asym).Kappa, 0.3533834586, 1e-9)
		tr := NewContingency(3)
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				tr.Add(b, a, tab.Counts[a*3+b])
			}
		}
		near(t, "asymmetric weighted kappa, transposed", mustKappa(t, tr, asym).Kappa, 0.4206, 5e-5)
	})

	t.Run("sas_3x3", func(t *testing.T) {
		// SAS PROC FREQ printout reproduced in statsmodels'
		// test_inter_rater.py (quoted at 4 dp, reference README section 3).
		tab := tables["sas_3x3"]
		checkSAS := func(t *testing.T, k Kappa, kappa, ase, lo, hi, ase0, z float64) {
			t.Helper()
			near(t, "kappa", k.Kappa, kappa, 5e-5)
			near(t, "ASE", k.SE, ase, 5e-5)
			l, h := k.Interval(1.959963984540054)
			near(t, "95% lower", l, lo, 5e-5)
			near(t, "95% upper", h, hi, 5e-5)
			near(t, "ASE under H0", k.SE0, ase0, 5e-5)
			near(t, "Z", k.Z(), z, 5e-5)
		}
		checkSAS(t, mustKappa(t, tab, Weights{}), 0.4842, 0.1380, 0.2137, 0.7547, 0.1484, 3.2626)
		checkSAS(t, mustKappa(t, tab, LinearWeights(3)), 0.4701, 0.1457, 0.1845, 0.7558, 0.1426, 3.2971)
		// Quadratic: recomputed only (sklearn, statsmodels, psych).
		near(t, "quadratic", mustKappa(t, tab, QuadraticWeights(3)).Kappa, 0.4501607717, 1e-9)
	})

	// Artstein & Poesio (2008), Computational Linguistics 34(4), Tables 1
	// and 4, as quoted by sklearn's test_cohen_kappa.
	t.Run("artstein_poesio", func(t *testing.T) {
		near(t, "table 1", mustKappa(t, tables["artstein_poesio_table1_2x2"], Weights{}).Kappa, 0.348, 5e-4)
		near(t, "table 1 exact", mustKappa(t, tables["artstein_poesio_table1_2x2"], Weights{}).Kappa, 8.0/23, 1e-12)
		near(t, "table 4", mustKappa(t, tables["artstein_poesio_table4_3x3"], Weights{}).Kappa, 0.8013, 5e-5)
	})

	// sklearn test_cohen_kappa library values (no paper).
	t.Run("sklearn_weighted_3x3", func(t *testing.T) {
		tab := tables["sklearn_weighted_3x3"]
		near(t, "unweighted", mustKappa(t, tab, Weights{}).Kappa, 0.9315, 5e-5)
		near(t, "linear", mustKappa(t, tab, LinearWeights(3)).Kappa, 0.9412, 5e-5)
		near(t, "quadratic", mustKappa(t, tab, QuadraticWeights(3)).Kappa, 0.9541, 5e-5)
	})
}

// R irr's anxiety data (artificial, 20 subjects, 3 raters, scale 1-6).
// Raters 2 and 3 never use 5: weights over the declared 1..6 scale (what
// Concord does) and over the levels that occur (what irr does) differ, and
// both values are pinned here so the choice stays visible.
func TestPairwiseCohenAnxiety(t *testing.T) {
	v, names := longVotes(t, "irr_anxiety_long.csv", "subject", "rater", "rating", 6)
	if names[0] != "1" || names[1] != "2" || names[2] != "3" {
		t.Fatalf("rater ids %v, want 1, 2, 3 in order", names)
	}
	pairs := func(w Weights) map[[2]int32]PairKappa {
		ps, err := PairwiseCohen(v, PairOptions{Weights: w})
		if err != nil {
			t.Fatal(err)
		}
		out := map[[2]int32]PairKappa{}
		for _, p := range ps {
			if p.Items != 20 || !p.OK {
				t.Errorf("pair %d-%d: %d items, ok %v; want 20, true", p.A, p.B, p.Items, p.OK)
			}
			out[[2]int32{p.A, p.B}] = p
		}
		if len(out) != 3 {
			t.Fatalf("%d pairs, want 3", len(out))
		}
		return out
	}
	un, lin, quad := pairs(Weights{}), pairs(LinearWeights(6)), pairs(QuadraticWeights(6))
	// Raters 2 vs 3: unweighted quoted from irr kappa2 via statsmodels'
	// tests; full-scale weighted values recomputed with sklearn labels=1..6.
	near(t, "2v3 unweighted", un[[2]int32{1, 2}].Kappa, -0.0062893082, 1e-9)
	near(t, "2v3 linear, declared scale", lin[[2]int32{1, 2}].Kappa, 0.1262135922, 1e-9)
	near(t, "2v3 quadratic, declared scale", quad[[2]int32{1, 2}].Kappa, 0.2297979798, 1e-9)
	// Raters 1 vs 2 use all six levels, so irr and sklearn agree (recomputed).
	near(t, "1v2 unweighted", un[[2]int32{0, 1}].Kappa, 0.1194968553, 1e-9)
	near(t, "1v2 linear", lin[[2]int32{0, 1}].Kappa, 0.1891891892, 1e-9)
	near(t, "1v2 quadratic", quad[[2]int32{0, 1}].Kappa, 0.2967651195, 1e-9)

	// irr's choice, for contrast: squeeze the scale to the levels raters 2
	// and 3 use (1,2,3,4,6), so 6 sits next to 4. irr kappa2 prints
	// 0.1459075 (equal) and 0.2520325 (squared), quoted via statsmodels.
	squeeze := map[int32]int{0: 0, 1: 1, 2: 2, 3: 3, 5: 4}
	tab := NewContingency(5)
	for it := 0; it < v.NumItems; it++ {
		var a, b int32 = -1, -1
		for i := range v.Item {
			if int(v.Item[i]) == it && v.Labeller[i] == 1 {
				a = v.Label[i]
			}
			if int(v.Item[i]) == it && v.Labeller[i] == 2 {
				b = v.Label[i]
			}
		}
		tab.Add(squeeze[a], squeeze[b], 1)
	}
	near(t, "2v3 linear, irr's occurring levels", mustKappa(t, tab, LinearWeights(5)).Kappa, 0.1459075, 5e-8)
	near(t, "2v3 quadratic, irr's occurring levels", mustKappa(t, tab, QuadraticWeights(5)).Kappa, 0.2520325, 5e-8)

	ps, err := PairwiseCohen(v, PairOptions{MinShared: 21})
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 0 {
		t.Errorf("MinShared 21 on 20 shared items kept %d pairs", len(ps))
	}
}

// randomVotes draws votes with some agreement: each item has a hidden
// class and each labeller hits it with probability 0.6. Some labellers vote
// twice on an item, to exercise the first-vote rule.
func randomVotes(seed uint64, items, labellers, perItem, classes int) *Votes {
	rng := rand.New(rand.NewPCG(seed, 7))
	v := &Votes{NumItems: items, NumLabellers: labellers, NumClasses: classes}
	for it := 0; it < items; it++ {
		truth := int32(rng.IntN(classes))
		for _, l := range rng.Perm(labellers)[:perItem] {
			label := truth
			if rng.Float64() > 0.6 {
				label = int32(rng.IntN(classes))
			}
			v.Item = append(v.Item, int32(it))
			v.Labeller = append(v.Labeller, int32(l))
			v.Label = append(v.Label, label)
			if rng.IntN(20) == 0 {
				v.Item = append(v.Item, int32(it))
				v.Labeller = append(v.Labeller, int32(l))
				v.Label = append(v.Label, int32(rng.IntN(classes)))
			}
		}
	}
	return v
}

// Pairwise results must equal a table built the slow, obvious way.
func TestPairwiseCohenMatchesDirectTables(t *testing.T) {
	v := randomVotes(1, 300, 12, 4, 5)
	for _, w := range []Weights{{}, QuadraticWeights(5)} {
		ps, err := PairwiseCohen(v, PairOptions{MinShared: 5, Weights: w})
		if err != nil {
			t.Fatal(err)
		}
		if len(ps) == 0 {
			t.Fatal("no pairs")
		}
		for i, p := range ps {
			if i > 0 && (ps[i-1].A > p.A || ps[i-1].A == p.A && ps[i-1].B >= p.B) {
				t.Fatalf("pairs not sorted at %d", i)
			}
			first := func(l int32) map[int32]int32 {
				m := map[int32]int32{}
				for j := range v.Item {
					if _, ok := m[v.Item[j]]; v.Labeller[j] == l && !ok {
						m[v.Item[j]] = v.Label[j]
					}
				}
				return m
			}
			fa, fb := first(p.A), first(p.B)
			tab := NewContingency(5)
			n := 0
			for it, a := range fa {
				if b, ok := fb[it]; ok {
					tab.Add(int(a), int(b), 1)
					n++
				}
			}
			want := mustKappa(t, tab, w)
			if p.Items != n || math.Abs(p.Kappa-want.Kappa) > 1e-12 || math.Abs(p.SE-want.SE) > 1e-12 {
				t.Fatalf("pair %d-%d: got %d items kappa %v se %v; want %d, %v, %v", p.A, p.B, p.Items, p.Kappa, p.SE, n, want.Kappa, want.SE)
			}
		}
	}
}

func TestCohenKappaIdenticalRatersIsOne(t *testing.T) {
	tab := NewContingency(4)
	for c, n := range []float64{5, 0, 7, 2} {
		tab.Add(c, c, n)
	}
	for _, w := range []Weights{{}, LinearWeights(4), QuadraticWeights(4)} {
		k := mustKappa(t, tab, w)
		near(t, "kappa", k.Kappa, 1, 1e-12)
		near(t, "ASE", k.SE, 0, 1e-12)
	}
}

// Renaming classes consistently for both raters must not move unweighted
// kappa or its standard errors.
func TestCohenKappaRelabelInvariant(t *testing.T) {
	tables, _ := cohenTables(t)
	perm := []int{2, 0, 1}
	for name, tab := range tables {
		if tab.K != 3 {
			continue
		}
		p := NewContingency(3)
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				p.Add(perm[a], perm[b], tab.Counts[a*3+b])
			}
		}
		k0, k1 := mustKappa(t, tab, Weights{}), mustKappa(t, p, Weights{})
		near(t, name+" kappa", k1.Kappa, k0.Kappa, 1e-12)
		near(t, name+" ASE", k1.SE, k0.SE, 1e-12)
		near(t, name+" ASE0", k1.SE0, k0.SE0, 1e-12)
	}
}

func TestCohenKappaUndefined(t *testing.T) {
	// Both raters used one class throughout: chance agreement is 1.
	tab := NewContingency(2)
	tab.Add(1, 1, 10)
	k, err := CohenKappa(tab, Weights{})
	if err != nil {
		t.Fatal(err)
	}
	if k.Defined() || !math.IsNaN(k.Kappa) || !math.IsNaN(k.Z()) {
		t.Errorf("one-class table: got %+v, want undefined", k)
	}
	if k, _ := CohenKappa(NewContingency(3), Weights{}); k.Defined() {
		t.Errorf("empty table: got %+v, want undefined", k)
	}
}

func TestCohenKappaBadInput(t *testing.T) {
	if _, err := DisagreementWeights(2, []float64{1, 1, 1, 0}); err == nil {
		t.Error("nonzero diagonal accepted")
	}
	if _, err := DisagreementWeights(2, []float64{0, -1, 1, 0}); err == nil {
		t.Error("negative weight accepted")
	}
	if _, err := DisagreementWeights(2, []float64{0, 0, 0, 0}); err == nil {
		t.Error("all-zero weights accepted")
	}
	if _, err := CohenKappa(NewContingency(3), LinearWeights(4)); err == nil {
		t.Error("weights of the wrong size accepted")
	}
	bad := &Votes{NumItems: 1, NumLabellers: 1, NumClasses: 2, Item: []int32{0}, Labeller: []int32{0}, Label: []int32{2}}
	if _, err := PairwiseCohen(bad, PairOptions{}); err == nil {
		t.Error("out-of-range label accepted")
	}
}
