// Package metrics computes the quality measures that the importance engine
// compares before and after a feature is disturbed: NDCG@k per query group
// (ranking), log loss and ROC AUC (binary), multi-class log loss, RMSE
// (regression) and the label-free mean absolute score change.
//
// The engine calls these functions millions of times, so they allocate
// nothing when handed a scratch value, take weights as a parameter (nil
// means uniform) so that the Poisson bootstrap can pass its integer counts,
// and never modify their inputs. A value that is undefined is NaN, never a
// silent 0, and each doc comment says when that happens. Slices that must
// have equal lengths and do not are a programmer error and panic; bad data
// (a negative relevance, a label that is not 0 or 1, a negative weight) is
// reported by the Check functions with the row, so callers validate once
// and then run the hot loops unchecked.
package metrics

import (
	"errors"
	"fmt"
	"math"
)

// ErrLabel is wrapped by every error about an unusable label or relevance.
var ErrLabel = errors.New("metrics: invalid label")

// ErrWeight is wrapped by every error about an unusable weight.
var ErrWeight = errors.New("metrics: invalid weight")

// ErrScore is wrapped by every error about an unusable score.
var ErrScore = errors.New("metrics: invalid score")

// CheckWeights reports the first weight that is negative, NaN or infinite,
// with its row. A nil or empty slice is valid (uniform weights).
func CheckWeights(weights []float64) error {
	for i, w := range weights {
		if !(w >= 0) || math.IsInf(w, 1) {
			return fmt.Errorf("row %d: weight %v is not a finite non-negative number: %w", i, w, ErrWeight)
		}
	}
	return nil
}

// CheckBinary reports the first label that is not exactly 0 or 1, with its
// row. AUC and the binary log loss need such labels.
func CheckBinary(labels []float64) error {
	for i, y := range labels {
		if y != 0 && y != 1 {
			return fmt.Errorf("row %d: binary label %v is not 0 or 1: %w", i, y, ErrLabel)
		}
	}
	return nil
}

// CheckClasses reports the first label that is not an integer class index
// in [0, classes), with its row.
func CheckClasses(labels []float64, classes int) error {
	for i, y := range labels {
		if !(y >= 0 && y < float64(classes)) || y != math.Trunc(y) {
			return fmt.Errorf("row %d: class label %v is not an integer in [0, %d): %w", i, y, classes, ErrLabel)
		}
	}
	return nil
}

// WeightedMean returns sum(w_i*v_i) / sum(w_i), or the plain mean when
// weights is nil. It is the average that turns per-row losses into a
// metric. Empty input or a zero total weight gives NaN; a NaN value gives
// NaN whatever its weight (as numpy.average does). Weights must be finite
// and non-negative (see CheckWeights); they are not checked here.
func WeightedMean(values, weights []float64) float64 {
	if weights == nil {
		if len(values) == 0 {
			return math.NaN()
		}
		var s float64
		for _, v := range values {
			s += v
		}
		return s / float64(len(values))
	}
	sameLength("WeightedMean", len(values), len(weights))
	var s, t float64
	for i, v := range values {
		w := weights[i]
		s += w * v
		t += w
	}
	if t == 0 {
		return math.NaN()
	}
	return s / t
}

// sameLength panics when two slices that must match do not: that is a bug
// in the caller, not bad data.
func sameLength(fn string, a, b int) {
	if a != b {
		panic(fmt.Sprintf("metrics: %s: slice lengths %d and %d differ", fn, a, b))
	}
}

// weightedMean returns Σ w_i term(i) / Σ w_i over i < n, in index order
// (weights nil means uniform, else it has n entries). n == 0 or a zero total
// weight gives NaN; a NaN term gives NaN.
func weightedMean(n int, weights []float64, term func(i int) float64) float64 {
	if n == 0 {
		return math.NaN()
	}
	var s, t float64
	for i := 0; i < n; i++ {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		s += w * term(i)
		t += w
	}
	if t == 0 {
		return math.NaN()
	}
	return s / t
}
