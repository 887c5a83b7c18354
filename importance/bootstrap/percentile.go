package bootstrap

import (
	"math"
	"slices"
)

// MaxUndefinedShare is the largest share of NaN replicates that
// PercentileInterval tolerates. A replicate is NaN when its statistic is
// undefined on that resample (an AUC whose resample drew no positive row, a
// mean NDCG whose resample drew no rankable group). Dropping a few such
// replicates conditions the interval on the statistic being defined, a
// small bias; when they are more than this share the interval would
// describe a different population, so it is NaN instead (common practice).
const MaxUndefinedShare = 0.05

// Percentile returns the q-th percentile (q in [0, 100]) of values with
// linear interpolation between order statistics (Hyndman and Fan 1996,
// definition 7), computed with the same arithmetic as numpy.percentile's
// default method so results agree to the bit. values is not modified (it
// is copied and sorted). Empty input, a NaN in values (as numpy), or q NaN
// or outside [0, 100] give NaN.
func Percentile(values []float64, q float64) float64 {
	if len(values) == 0 || !(q >= 0 && q <= 100) {
		return math.NaN()
	}
	for _, v := range values {
		if v != v {
			return math.NaN()
		}
	}
	sorted := slices.Clone(values)
	slices.Sort(sorted)
	return percentileSorted(sorted, q)
}

// percentileSorted is Percentile on ascending values without NaN, with q
// already checked. It follows numpy 1.24's _quantile: the virtual index
// (n−1)·q/100, its floor and the next index clamped to the array, and the
// two-sided lerp that is exact at both ends.
func percentileSorted(sorted []float64, q float64) float64 {
	n := len(sorted)
	virtual := float64(n-1) * (q / 100)
	lo := int(math.Floor(virtual))
	if virtual >= float64(n-1) {
		return sorted[n-1]
	}
	a, b := sorted[lo], sorted[lo+1]
	t := virtual - float64(lo)
	d := b - a
	if t >= 0.5 {
		return b - d*(1-t)
	}
	return a + d*t
}

// PercentileInterval returns the percentile bootstrap interval at the given
// confidence (for example 0.95) from the replicate statistics: the
// percentiles 100·(1−c)/2 and 100·(1+c)/2 of the replicates, computed with
// the arithmetic of scipy.stats.bootstrap(method="percentile") in SciPy
// 1.10.1 (α = (1−c)/2, percentiles 100·α and 100·(1−α)).
//
// NaN replicates are dropped when they are at most MaxUndefinedShare of
// all replicates; beyond that share, with no replicate left, with empty
// input, or with confidence NaN or outside (0, 1), both bounds are NaN.
// replicates is not modified.
func PercentileInterval(replicates []float64, confidence float64) (lo, hi float64) {
	nan := math.NaN()
	if len(replicates) == 0 || !(confidence > 0 && confidence < 1) {
		return nan, nan
	}
	defined := make([]float64, 0, len(replicates))
	for _, v := range replicates {
		if v == v {
			defined = append(defined, v)
		}
	}
	undefined := len(replicates) - len(defined)
	if len(defined) == 0 || float64(undefined) > MaxUndefinedShare*float64(len(replicates)) {
		return nan, nan
	}
	slices.Sort(defined)
	alpha := (1 - confidence) / 2
	return percentileSorted(defined, alpha*100), percentileSorted(defined, (1-alpha)*100)
}
