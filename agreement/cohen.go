package agreement

import (
	"cmp"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
)

// Contingency is a K x K table of two raters' joint labels: Counts[a*K+b]
// items got class a from rater A and class b from rater B.
type Contingency struct {
	K      int
	Counts []float64
}

// NewContingency returns an empty K x K table.
func NewContingency(k int) *Contingency {
	return &Contingency{K: k, Counts: make([]float64, k*k)}
}

// Add counts n items labelled a by rater A and b by rater B.
func (t *Contingency) Add(a, b int, n float64) { t.Counts[a*t.K+b] += n }

// Weights are agreement weights for weighted kappa: W[a*K+b] is the credit,
// from 0 to 1, for rater A saying a while rater B says b, with 1 on the
// diagonal. The zero value means unweighted kappa (credit only for exact
// agreement).
//
// Linear and quadratic weights span the declared scale, all K classes of
// the label set, whether or not a class occurs in the data. R's irr builds
// them over the levels that occur instead, which treats the classes either
// side of an unused one as neighbours; Concord's scale is the taxonomy's, so
// a rating two steps off the scale stays two steps off.
type Weights struct {
	K int
	W []float64
}

// LinearWeights gives credit 1 - |a-b|/(K-1) (Cicchetti-Allison weights).
func LinearWeights(k int) Weights { return scaleWeights(k, 1) }

// QuadraticWeights gives credit 1 - (a-b)^2/(K-1)^2 (Fleiss-Cohen weights).
func QuadraticWeights(k int) Weights { return scaleWeights(k, 2) }

func scaleWeights(k int, power float64) Weights {
	w := Weights{K: k, W: make([]float64, k*k)}
	for a := 0; a < k; a++ {
		for b := 0; b < k; b++ {
			if k == 1 {
				w.W[a*k+b] = 1
				continue
			}
			w.W[a*k+b] = 1 - math.Pow(math.Abs(float64(a-b))/float64(k-1), power)
		}
	}
	return w
}

// DisagreementWeights converts Cohen's (1968) disagreement weights v (K x K,
// row-major, 0 on the diagonal, >= 0 elsewhere, not all 0) to agreement
// weights 1 - v/max(v). Kappa is unchanged by rescaling v, so the result
// equals Cohen's 1 - sum v p_o / sum v p_e. Asymmetric weights are allowed;
// then which rater is A matters.
func DisagreementWeights(k int, v []float64) (Weights, error) {
	if len(v) != k*k {
		return Weights{}, fmt.Errorf("disagreement weights: %d entries for %d classes, want %d", len(v), k, k*k)
	}
	top := 0.0
	for i, x := range v {
		a, b := i/k, i%k
		if a == b && x != 0 {
			return Weights{}, fmt.Errorf("disagreement weights: diagonal entry (%d,%d) is %v, want 0", a, b, x)
		}
		if x < 0 || math.IsNaN(x) || math.IsInf(x, 0) {
			return Weights{}, fmt.Errorf("disagreement weights: entry (%d,%d) is %v, want a finite value >= 0", a, b, x)
		}
		top = max(top, x)
	}
	if top == 0 {
		return Weights{}, fmt.Errorf("disagreement weights: all zero")
	}
	w := Weights{K: k, W: make([]float64, k*k)}
	for i, x := range v {
		w.W[i] = 1 - x/top
	}
	return w, nil
}

// Kappa is Cohen's kappa for two raters with its standard errors. Kappa, SE
// and SE0 are NaN exactly when OK is false: no items, or chance agreement 1
// (both raters used one and the same class throughout).
type Kappa struct {
	Kappa    float64
	SE       float64 // asymptotic standard error (SAS "ASE")
	SE0      float64 // standard error under H0: kappa = 0, for the z test
	Observed float64 // P_o, (weighted) observed agreement
	Chance   float64 // P_e, (weighted) agreement expected by chance
	N        float64 // items
	OK       bool
}

// Defined reports whether Kappa is a number.
func (k Kappa) Defined() bool { return k.OK }

// Z is the test statistic kappa / SE0 for H0: kappa = 0. It is NaN when
// kappa is undefined or SE0 is 0.
func (k Kappa) Z() float64 {
	if !k.OK || k.SE0 == 0 {
		return math.NaN()
	}
	return k.Kappa / k.SE0
}

// Interval is the Wald interval kappa -/+ z SE (z = 1.959964 for 95%), the
// interval SAS prints next to ASE.
func (k Kappa) Interval(z float64) (lo, hi float64) {
	return k.Kappa - z*k.SE, k.Kappa + z*k.SE
}

// CohenKappa computes Cohen's kappa, weighted if w is set, from a table.
//
//	kappa = (P_o - P_e) / (1 - P_e),  P_o = sum w_ab p_ab,  P_e = sum w_ab p_a. p_.b
//
// SE is the large-sample standard error of Fleiss, Cohen & Everitt (1969,
// Psychological Bulletin 72(5):323-327) in the form SAS PROC FREQ prints as
// ASE; SE0 is their variance under kappa = 0. With wa_a = sum_b p_.b w_ab
// and wb_b = sum_a p_a. w_ab:
//
//	var  = [sum p_ab (w_ab - (wa_a + wb_b)(1-kappa))^2 - (kappa - P_e(1-kappa))^2] / (N (1-P_e)^2)
//	var0 = [sum p_a. p_.b (w_ab - (wa_a + wb_b))^2 - P_e^2] / (N (1-P_e)^2)
//
// Unweighted kappa is the case w = identity.
func CohenKappa(t *Contingency, w Weights) (Kappa, error) {
	if len(t.Counts) != t.K*t.K {
		return Kappa{}, fmt.Errorf("cohen's kappa: table has %d cells for %d classes", len(t.Counts), t.K)
	}
	if w.W != nil && (w.K != t.K || len(w.W) != t.K*t.K) {
		return Kappa{}, fmt.Errorf("cohen's kappa: weights for %d classes, table has %d", w.K, t.K)
	}
	for i, x := range t.Counts {
		if x < 0 || math.IsNaN(x) || math.IsInf(x, 0) {
			return Kappa{}, fmt.Errorf("cohen's kappa: cell (%d,%d) is %v, want a finite count >= 0", i/t.K, i%t.K, x)
		}
	}
	s := newCohenScratch(t.K, w)
	return s.kappa(t.Counts), nil
}

// cohenScratch holds the buffers one kappa needs, so that PairwiseCohen can
// compute thousands of them without allocating.
type cohenScratch struct {
	k          int
	w          []float64
	row, col   []float64 // margins as shares
	wrow, wcol []float64
	rows, cols []int // classes with a nonzero row / column margin
}

func newCohenScratch(k int, w Weights) *cohenScratch {
	s := &cohenScratch{k: k, w: w.W, row: make([]float64, k), col: make([]float64, k), wrow: make([]float64, k), wcol: make([]float64, k)}
	if s.w == nil {
		s.w = make([]float64, k*k)
		for a := 0; a < k; a++ {
			s.w[a*k+a] = 1
		}
	}
	return s
}

// kappa computes kappa for a full K x K table.
func (s *cohenScratch) kappa(counts []float64) Kappa {
	k := s.k
	clear(s.row)
	clear(s.col)
	for a := 0; a < k; a++ {
		for b := 0; b < k; b++ {
			s.row[a] += counts[a*k+b]
			s.col[b] += counts[a*k+b]
		}
	}
	s.rows, s.cols = s.rows[:0], s.cols[:0]
	for c := 0; c < k; c++ {
		if s.row[c] > 0 {
			s.rows = append(s.rows, c)
		}
		if s.col[c] > 0 {
			s.cols = append(s.cols, c)
		}
	}
	return s.kappaActive(counts)
}

// kappaActive computes kappa once row/col hold the count margins and
// rows/cols list the classes where they are nonzero. Every term of the
// formulas for a class with a zero margin is zero (w only meets p_ab or
// p_a. p_.b), so skipping them is exact, and a pair of labellers who use a
// handful of a large taxonomy's classes costs that handful squared.
func (s *cohenScratch) kappaActive(counts []float64) Kappa {
	k := s.k
	n := 0.0
	for _, a := range s.rows {
		n += s.row[a]
	}
	r := Kappa{N: n, Kappa: math.NaN(), SE: math.NaN(), SE0: math.NaN(), Observed: math.NaN(), Chance: math.NaN()}
	if n == 0 {
		return r
	}
	for _, a := range s.rows {
		s.row[a] /= n
		s.wrow[a] = 0
	}
	for _, b := range s.cols {
		s.col[b] /= n
		s.wcol[b] = 0
	}
	po, pe := 0.0, 0.0
	for _, a := range s.rows {
		for _, b := range s.cols {
			w := s.w[a*k+b]
			po += w * counts[a*k+b] / n
			pe += w * s.row[a] * s.col[b]
			s.wrow[a] += s.col[b] * w
			s.wcol[b] += s.row[a] * w
		}
	}
	r.Observed, r.Chance = po, pe
	if 1-pe <= 1e-15 {
		return r
	}
	kappa := (po - pe) / (1 - pe)
	sum, sum0 := 0.0, 0.0
	for _, a := range s.rows {
		for _, b := range s.cols {
			w, both := s.w[a*k+b], s.wrow[a]+s.wcol[b]
			if p := counts[a*k+b] / n; p > 0 {
				d := w - both*(1-kappa)
				sum += p * d * d
			}
			d0 := w - both
			sum0 += s.row[a] * s.col[b] * d0 * d0
		}
	}
	den := n * (1 - pe) * (1 - pe)
	c := kappa - pe*(1-kappa)
	r.Kappa = kappa
	r.SE = math.Sqrt(max(0, (sum-c*c)/den))
	r.SE0 = math.Sqrt(max(0, (sum0-pe*pe)/den))
	r.OK = true
	return r
}

// pairKappa fills the scratch table and margins from one pair's label run
// (a, b, a, b, ...), computes kappa and clears what it touched.
func (s *cohenScratch) pairKappa(run []int32, table []float64) Kappa {
	k := s.k
	s.rows, s.cols = s.rows[:0], s.cols[:0]
	for j := 0; j < len(run); j += 2 {
		a, b := int(run[j]), int(run[j+1])
		if s.row[a] == 0 {
			s.rows = append(s.rows, a)
		}
		if s.col[b] == 0 {
			s.cols = append(s.cols, b)
		}
		s.row[a]++
		s.col[b]++
		table[a*k+b]++
	}
	kp := s.kappaActive(table)
	for j := 0; j < len(run); j += 2 {
		table[int(run[j])*k+int(run[j+1])] = 0
	}
	for _, a := range s.rows {
		s.row[a] = 0
	}
	for _, b := range s.cols {
		s.col[b] = 0
	}
	return kp
}

// DefaultMinShared is the number of shared items a pair of labellers needs
// before PairwiseCohen reports its kappa. It is Concord's choice: below
// about ten items a kappa's standard error is commonly above 0.2, too wide
// to say anything about a pair.
const DefaultMinShared = 10

// PairOptions tunes PairwiseCohen. MinShared 0 means DefaultMinShared; the
// zero Weights mean unweighted kappa.
type PairOptions struct {
	MinShared int
	Weights   Weights
}

// PairKappa is Cohen's kappa between labellers A < B over the Items they
// both labelled. Kappa and SE are NaN exactly when OK is false.
type PairKappa struct {
	A, B  int32
	Items int
	Kappa float64
	SE    float64
	OK    bool
}

// PairwiseCohen computes Cohen's kappa for every pair of labellers sharing
// at least MinShared items, sorted by (A, B). Labeller A's classes are the
// table's rows. When a labeller voted more than once on an item, the first
// of those votes (in slice order) stands for the labeller.
//
// It walks each item's vote list, so the cost is the sum over items of the
// square of its votes, plus K^2 per reported pair; it never visits pairs of
// labellers that share nothing.
func PairwiseCohen(v *Votes, opt PairOptions) ([]PairKappa, error) {
	if err := v.Validate(); err != nil {
		return nil, fmt.Errorf("pairwise cohen's kappa: %w", err)
	}
	k := v.NumClasses
	if opt.Weights.W != nil && opt.Weights.K != k {
		return nil, fmt.Errorf("pairwise cohen's kappa: weights for %d classes, votes have %d", opt.Weights.K, k)
	}
	minShared := opt.MinShared
	if minShared <= 0 {
		minShared = DefaultMinShared
	}
	items := groupByItem(v)
	ids := newPairIDs(v.NumLabellers)

	// Pass 1 numbers the pairs and counts their shared items; pass 2 puts
	// each pair's label pairs in one run of a flat slice (a counting sort),
	// so no pair needs its own K x K table in memory at once.
	var shared []int32
	firstVotes := make([]int32, 0, 64)
	seen := make([]int32, v.NumLabellers)
	for i := range seen {
		seen[i] = -1
	}
	forEachPair := func(visit func(pair int32, a, b int32)) {
		for it := 0; it < v.NumItems; it++ {
			firstVotes = firstVotes[:0]
			for _, vi := range items.order[items.start[it]:items.start[it+1]] {
				l := v.Labeller[vi]
				if seen[l] != int32(it) {
					seen[l] = int32(it)
					firstVotes = append(firstVotes, vi)
				}
			}
			for x := 0; x < len(firstVotes); x++ {
				for y := x + 1; y < len(firstVotes); y++ {
					a, b := firstVotes[x], firstVotes[y]
					if v.Labeller[a] > v.Labeller[b] {
						a, b = b, a
					}
					visit(ids.id(v.Labeller[a], v.Labeller[b]), a, b)
				}
			}
		}
		for i := range seen {
			seen[i] = -1
		}
	}
	forEachPair(func(pair, _, _ int32) {
		if int(pair) == len(shared) {
			shared = append(shared, 0)
		}
		shared[pair]++
	})
	start := make([]int32, len(shared)+1)
	for p, n := range shared {
		start[p+1] = start[p] + n
	}
	labels := make([]int32, 2*int(start[len(shared)]))
	fill := slices.Clone(start[:len(shared)])
	forEachPair(func(pair, a, b int32) {
		at := 2 * fill[pair]
		labels[at], labels[at+1] = v.Label[a], v.Label[b]
		fill[pair]++
	})

	var keep []int32
	for p, n := range shared {
		if int(n) >= minShared {
			keep = append(keep, int32(p))
		}
	}
	out := make([]PairKappa, len(keep))
	// Each worker owns a contiguous block of pairs and writes only its own
	// slots, so the result does not depend on scheduling.
	workers := min(runtime.GOMAXPROCS(0), max(1, len(keep)/1024))
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		lo, hi := w*len(keep)/workers, (w+1)*len(keep)/workers
		wg.Go(func() {
			scratch := newCohenScratch(k, opt.Weights)
			table := make([]float64, k*k)
			for i := lo; i < hi; i++ {
				p := keep[i]
				kp := scratch.pairKappa(labels[2*start[p]:2*start[p+1]], table)
				a, b := ids.pair(p)
				out[i] = PairKappa{A: a, B: b, Items: int(shared[p]), Kappa: kp.Kappa, SE: kp.SE, OK: kp.OK}
			}
		})
	}
	wg.Wait()
	slices.SortFunc(out, func(x, y PairKappa) int {
		return cmp.Or(cmp.Compare(x.A, y.A), cmp.Compare(x.B, y.B))
	})
	return out, nil
}

// pairIDs numbers labeller pairs in order of first sight. A dense L x L
// index is fastest and is used while it stays small (up to 2048 labellers,
// 16 MiB); beyond that a map keeps memory proportional to the pairs seen.
type pairIDs struct {
	n     int
	dense []int32
	byKey map[uint64]int32
	pairs []uint64
}

const maxDenseLabellers = 2048

func newPairIDs(labellers int) *pairIDs {
	p := &pairIDs{n: labellers}
	if labellers <= maxDenseLabellers {
		p.dense = make([]int32, labellers*labellers)
		for i := range p.dense {
			p.dense[i] = -1
		}
	} else {
		p.byKey = make(map[uint64]int32)
	}
	return p
}

// id returns the number of pair (a, b), a < b, giving it the next number
// the first time it is asked.
func (p *pairIDs) id(a, b int32) int32 {
	key := uint64(a)<<32 | uint64(b)
	if p.dense != nil {
		slot := &p.dense[int(a)*p.n+int(b)]
		if *slot < 0 {
			*slot = int32(len(p.pairs))
			p.pairs = append(p.pairs, key)
		}
		return *slot
	}
	id, ok := p.byKey[key]
	if !ok {
		id = int32(len(p.pairs))
		p.byKey[key] = id
		p.pairs = append(p.pairs, key)
	}
	return id
}

func (p *pairIDs) pair(id int32) (a, b int32) {
	key := p.pairs[id]
	return int32(key >> 32), int32(key & 0xffffffff)
}
