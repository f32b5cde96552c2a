package agreement

import (
	"fmt"
	"math"
)

// Metric is the difference function of Krippendorff's alpha: how far apart
// two values are, which decides how much a disagreement costs.
type Metric int

const (
	// Nominal: any two different classes are equally far apart.
	Nominal Metric = iota
	// Ordinal: classes are ranked in id order 0 < 1 < ...; the distance
	// between two ranks grows with how many values lie between them
	// (Krippendorff's ordinal metric, built from the value frequencies).
	Ordinal
	// Interval: squared difference of the classes' numeric values.
	Interval
	// Ratio: squared difference over squared sum; values must be >= 0.
	Ratio
)

func (m Metric) String() string {
	switch m {
	case Nominal:
		return "nominal"
	case Ordinal:
		return "ordinal"
	case Interval:
		return "interval"
	case Ratio:
		return "ratio"
	}
	return fmt.Sprintf("Metric(%d)", int(m))
}

// AlphaOptions chooses the metric. Values[c] is the number class c stands
// for; Interval uses the class id when Values is nil, Ratio requires it, and
// Nominal and Ordinal ignore it.
type AlphaOptions struct {
	Metric Metric
	Values []float64
}

// AlphaResult is Krippendorff's alpha with its parts. Alpha is NaN exactly
// when OK is false: fewer than two pairable values, or no expected
// disagreement (every pairable value the same).
type AlphaResult struct {
	Alpha    float64
	Observed float64 // D_o, observed disagreement
	Expected float64 // D_e, disagreement expected by chance
	Units    int     // units (items) with two or more values, the ones used
	Skipped  int     // units with fewer than two values, left out
	Pairable int     // n, number of pairable values
	OK       bool
}

// Defined reports whether Alpha is a number.
func (r AlphaResult) Defined() bool { return r.OK }

// Alpha computes Krippendorff's alpha from votes. See AlphaCounts.
func Alpha(v *Votes, opt AlphaOptions) (AlphaResult, error) {
	c, err := CountVotes(v)
	if err != nil {
		return AlphaResult{}, fmt.Errorf("krippendorff's alpha: %w", err)
	}
	return AlphaCounts(c, opt)
}

// AlphaCounts computes Krippendorff's alpha through the coincidence matrix
// (Krippendorff 2011, Computing Krippendorff's Alpha-Reliability):
//
//	o_ck  = sum over units u of n_uc (n_uk - [c=k]) / (m_u - 1)
//	n_c   = sum_k o_ck,   n = sum_c n_c
//	alpha = 1 - (n-1) sum_ck o_ck d2_ck / sum_ck n_c n_k d2_ck
//
// where m_u is the number of values in unit u. Units with m_u < 2 cannot
// form a pair and drop out, which is how missing votes are handled.
func AlphaCounts(c *ItemCounts, opt AlphaOptions) (AlphaResult, error) {
	d2, err := newDistance(c.NumClasses, opt)
	if err != nil {
		return AlphaResult{}, err
	}
	k := c.NumClasses
	o := make([]float64, k*k)
	nc := make([]float64, k)
	r := AlphaResult{}
	for u := 0; u < c.NumItems; u++ {
		if addCoincidences(c, u, 1, o, nc) {
			r.Units++
		} else {
			r.Skipped++
		}
	}
	r.Observed, r.Expected, r.Alpha, r.Pairable, r.OK = alphaFromCoincidences(o, nc, d2)
	return r, nil
}

// addCoincidences adds weight times unit u's coincidences to o and its
// values to nc, and reports whether the unit was pairable.
func addCoincidences(c *ItemCounts, u int, weight float64, o, nc []float64) bool {
	lo, hi := c.Start[u], c.Start[u+1]
	m := 0.0
	for e := lo; e < hi; e++ {
		m += float64(c.Count[e])
	}
	if m < 2 {
		return false
	}
	k := c.NumClasses
	w := weight / (m - 1)
	for e := lo; e < hi; e++ {
		ce, ne := int(c.Class[e]), float64(c.Count[e])
		nc[ce] += weight * ne
		for f := lo; f < hi; f++ {
			nf := float64(c.Count[f])
			if e == f {
				nf--
			}
			o[ce*k+int(c.Class[f])] += w * ne * nf
		}
	}
	return true
}

// distance holds squared distances d2[c*k+k'] for the fixed metrics, or the
// recipe to build them from the marginals for the ordinal one.
type distance struct {
	k      int
	metric Metric
	d2     []float64 // nil for Ordinal: it depends on n_c
}

func newDistance(k int, opt AlphaOptions) (*distance, error) {
	d := &distance{k: k, metric: opt.Metric}
	if opt.Values != nil && len(opt.Values) != k {
		return nil, fmt.Errorf("krippendorff's alpha: %d values for %d classes", len(opt.Values), k)
	}
	value := func(c int) float64 {
		if opt.Values == nil {
			return float64(c)
		}
		return opt.Values[c]
	}
	switch opt.Metric {
	case Nominal, Interval:
		d.d2 = make([]float64, k*k)
		for a := 0; a < k; a++ {
			for b := 0; b < k; b++ {
				switch {
				case a == b:
				case opt.Metric == Nominal:
					d.d2[a*k+b] = 1
				default:
					diff := value(a) - value(b)
					d.d2[a*k+b] = diff * diff
				}
			}
		}
	case Ratio:
		if opt.Values == nil {
			return nil, fmt.Errorf("krippendorff's alpha: ratio metric needs the classes' values (a true zero)")
		}
		for c, x := range opt.Values {
			if x < 0 || math.IsNaN(x) {
				return nil, fmt.Errorf("krippendorff's alpha: ratio metric: class %d has value %v, want >= 0", c, x)
			}
		}
		d.d2 = make([]float64, k*k)
		for a := 0; a < k; a++ {
			for b := 0; b < k; b++ {
				if s := value(a) + value(b); s > 0 {
					q := (value(a) - value(b)) / s
					d.d2[a*k+b] = q * q
				}
			}
		}
	case Ordinal:
	default:
		return nil, fmt.Errorf("krippendorff's alpha: unknown metric %d", int(opt.Metric))
	}
	return d, nil
}

// matrix returns the squared distances for marginals nc. Krippendorff's
// ordinal distance between ranks c < k is (sum_{g=c..k} n_g - (n_c+n_k)/2)^2.
func (d *distance) matrix(nc []float64) []float64 {
	if d.d2 != nil {
		return d.d2
	}
	k := d.k
	m := make([]float64, k*k)
	for a := 0; a < k; a++ {
		run := nc[a]
		for b := a + 1; b < k; b++ {
			run += nc[b]
			x := run - (nc[a]+nc[b])/2
			m[a*k+b], m[b*k+a] = x*x, x*x
		}
	}
	return m
}

// alphaFromCoincidences turns a coincidence matrix and its marginals into
// D_o, D_e and alpha.
func alphaFromCoincidences(o, nc []float64, d *distance) (do, de, alpha float64, n int, ok bool) {
	total := 0.0
	for _, x := range nc {
		total += x
	}
	n = int(math.Round(total))
	if total < 2 {
		return math.NaN(), math.NaN(), math.NaN(), n, false
	}
	d2 := d.matrix(nc)
	k := d.k
	obs, exp := 0.0, 0.0
	for a := 0; a < k; a++ {
		for b := 0; b < k; b++ {
			if w := d2[a*k+b]; w != 0 {
				obs += o[a*k+b] * w
				exp += nc[a] * nc[b] * w
			}
		}
	}
	do = obs / total
	de = exp / (total * (total - 1))
	if de <= 0 {
		return do, de, math.NaN(), n, false
	}
	return do, de, 1 - do/de, n, true
}
