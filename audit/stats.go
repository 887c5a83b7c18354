package audit

import (
	"math"
	"slices"
	"sort"
)

// PSI returns the population stability index between a baseline and a
// candidate sample over the given bins: sum over bins of
// (c_i − b_i) · ln(c_i / b_i), with b_i and c_i the bins' shares. Empty
// bins take the share floor eps (1e-4, common practice) so the sum stays
// finite. Both count slices must have the same length; NaN when either
// sample is empty.
func PSI(baseline, candidate []float64, eps float64) float64 {
	tb, tc := 0.0, 0.0
	for i := range baseline {
		tb += baseline[i]
		tc += candidate[i]
	}
	if !(tb > 0) || !(tc > 0) {
		return math.NaN()
	}
	s := 0.0
	for i := range baseline {
		b := math.Max(baseline[i]/tb, eps)
		c := math.Max(candidate[i]/tc, eps)
		s += (c - b) * math.Log(c/b)
	}
	return s
}

// KS returns the two-sample Kolmogorov–Smirnov statistic, the largest
// distance between the two empirical distribution functions, over the
// non-missing values of a and b (NaN are left out). NaN when either has no
// value. Inputs are not modified.
func KS(a, b []float64) float64 {
	x := finiteSorted(a)
	y := finiteSorted(b)
	if len(x) == 0 || len(y) == 0 {
		return math.NaN()
	}
	i, j := 0, 0
	d := 0.0
	nx, ny := float64(len(x)), float64(len(y))
	for i < len(x) && j < len(y) {
		v := math.Min(x[i], y[j])
		for i < len(x) && x[i] <= v {
			i++
		}
		for j < len(y) && y[j] <= v {
			j++
		}
		d = math.Max(d, math.Abs(float64(i)/nx-float64(j)/ny))
	}
	return d
}

func finiteSorted(a []float64) []float64 {
	out := make([]float64, 0, len(a))
	for _, v := range a {
		if v == v {
			out = append(out, v)
		}
	}
	sort.Float64s(out)
	return out
}

// psiEdges picks at most bins-1 bin edges from the model's thresholds: the
// thresholds nearest to the baseline sample's quantiles, so every bin is a
// region the model treats alike and no bin is tiny. thresholds must be
// sorted; baseline holds the sample's sorted non-missing values.
func psiEdges(thresholds, baseline []float64, bins int) []float64 {
	if len(thresholds) <= bins-1 || len(baseline) == 0 {
		return slices.Clone(thresholds)
	}
	var out []float64
	for q := 1; q < bins; q++ {
		v := baseline[min(len(baseline)-1, q*len(baseline)/bins)]
		i := sort.SearchFloat64s(thresholds, v)
		best := -1
		for _, k := range []int{i - 1, i} {
			if k >= 0 && k < len(thresholds) && (best < 0 || math.Abs(thresholds[k]-v) < math.Abs(thresholds[best]-v)) {
				best = k
			}
		}
		t := thresholds[best]
		if len(out) == 0 || t > out[len(out)-1] {
			out = append(out, t)
		}
	}
	return out
}

// binCounts counts values into len(edges)+1 bins (value < edge goes below
// it, as XGBoost splits) plus a last bin for missing values.
func binCounts(values, edges []float64) []float64 {
	return binCountsRule(values, edges, false)
}

// binCountsRule is binCounts with LightGBM's rule when lessEqual (value <=
// edge goes below it).
func binCountsRule(values, edges []float64, lessEqual bool) []float64 {
	if lessEqual {
		c := make([]float64, len(edges)+2)
		for _, v := range values {
			if v != v {
				c[len(edges)+1]++
				continue
			}
			c[sort.SearchFloat64s(edges, v)]++
		}
		return c
	}
	c := make([]float64, len(edges)+2)
	for _, v := range values {
		if v != v {
			c[len(edges)+1]++
			continue
		}
		c[sort.Search(len(edges), func(i int) bool { return edges[i] > v })]++
	}
	return c
}
