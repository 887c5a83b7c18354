// Package bootstrap gives the measures their sampling intervals with the
// Poisson bootstrap: every unit (a traffic row, or a query group for
// ranking) gets an independent Poisson(1) count per replicate, and a
// replicate's statistic is the count-weighted version of the statistic.
// Unlike resampling n units with replacement it needs no resampled copy of
// the data, and the weighted sums of separate shards simply add up, so a
// sample split across workers or machines is bootstrapped without moving
// rows (Hanley and MacGibbon 2006, "Creating non-parametric bootstrap
// samples using Poisson frequencies"; Chamandy et al. 2012, "Estimating
// uncertainty for massive data streams").
//
// Intervals are percentile intervals (Efron and Tibshirani 1993, ch. 13),
// as scipy.stats.bootstrap(method="percentile") computes them. For the
// launch gate the baseline and the candidate use the same Weights, so the
// interval is on the paired change.
package bootstrap

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// MaxCount is the largest count Poisson draws. The table of Poisson(1)
// probabilities is exact to 2^−64 per value, and P(X > 20) ≈ 7.5e−21 is
// below half of 2^−64, so it rounds to zero: no count is capped at a
// resolution the source can express. Counts fit a uint8 with room to
// spare.
const MaxCount = 20

// poissonThresholds[k] is round(P(X <= k) * 2^64) for X ~ Poisson(1),
// computed from the upper tail so that small tail probabilities keep their
// relative precision: a uniform 64-bit u gives count k when
// poissonThresholds[k-1] <= u < poissonThresholds[k].
var poissonThresholds = func() [MaxCount]uint64 {
	var t [MaxCount]uint64
	term := make([]float64, 60) // term[j] = e^−1 / j!
	term[0] = math.Exp(-1)
	for j := 1; j < len(term); j++ {
		term[j] = term[j-1] / float64(j)
	}
	for k := 0; k < MaxCount; k++ {
		var tail float64 // P(X > k), summed smallest first
		for j := len(term) - 1; j > k; j-- {
			tail += term[j]
		}
		// 2^64 − round(tail·2^64), in uint64 arithmetic modulo 2^64
		t[k] = -uint64(math.Round(math.Ldexp(tail, 64)))
	}
	return t
}()

// Weights holds the Poisson counts of every unit in every replicate, flat
// and replicate-major: counts[b*n+i] is unit i's count in replicate b, so a
// replicate is one contiguous slice. Memory is n·B bytes (1e6 units × 200
// replicates = 200 MB). Weights is read-only after creation and safe for
// concurrent readers.
type Weights struct {
	n, replicates int
	counts        []uint8
	totals        []float64
}

// Poisson draws replicates independent sets of Poisson(1) counts for n
// units from src. Draws are made replicate by replicate, unit by unit, one
// src.Uint64 per count by inversion of the exact table above, so the same
// seed gives the same Weights on every platform. n or replicates of 0 give
// empty Weights; negative values or a nil src panic.
func Poisson(n, replicates int, src rand.Source) *Weights {
	if n < 0 || replicates < 0 {
		panic(fmt.Sprintf("bootstrap: Poisson: negative size n=%d replicates=%d", n, replicates))
	}
	if src == nil {
		panic("bootstrap: Poisson: nil source")
	}
	w := &Weights{
		n:          n,
		replicates: replicates,
		counts:     make([]uint8, n*replicates),
		totals:     make([]float64, replicates),
	}
	t := &poissonThresholds
	for b := 0; b < replicates; b++ {
		row := w.counts[b*n : (b+1)*n]
		var total int
		for i := range row {
			u := src.Uint64()
			// Most draws end in the first two comparisons (P = 0.74).
			k := 0
			for k < MaxCount && u >= t[k] {
				k++
			}
			row[i] = uint8(k)
			total += k
		}
		w.totals[b] = float64(total)
	}
	return w
}

// Units returns n, the number of units (rows or query groups).
func (w *Weights) Units() int { return w.n }

// Replicates returns B, the number of replicates.
func (w *Weights) Replicates() int { return w.replicates }

// Replicate returns the counts of replicate b, one per unit. The slice
// shares the Weights' storage and must not be modified. It panics when b
// is out of range.
func (w *Weights) Replicate(b int) []uint8 {
	w.checkReplicate(b)
	return w.counts[b*w.n : (b+1)*w.n : (b+1)*w.n]
}

// Count returns unit i's count in replicate b.
func (w *Weights) Count(b, i int) uint8 {
	w.checkReplicate(b)
	if i < 0 || i >= w.n {
		panic(fmt.Sprintf("bootstrap: unit %d out of range [0, %d)", i, w.n))
	}
	return w.counts[b*w.n+i]
}

// Total returns the sum of replicate b's counts (the resample's size; its
// expectation is n).
func (w *Weights) Total(b int) float64 {
	w.checkReplicate(b)
	return w.totals[b]
}

// Totals writes every replicate's total count into dst, which must have
// Replicates entries. A replicate's weighted mean is its weighted sum
// divided by its total.
func (w *Weights) Totals(dst []float64) {
	if len(dst) != w.replicates {
		panic(fmt.Sprintf("bootstrap: Totals: dst has %d entries for %d replicates", len(dst), w.replicates))
	}
	copy(dst, w.totals)
}

func (w *Weights) checkReplicate(b int) {
	if b < 0 || b >= w.replicates {
		panic(fmt.Sprintf("bootstrap: replicate %d out of range [0, %d)", b, w.replicates))
	}
}
