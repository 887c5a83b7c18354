package metrics

import "math"

// RMSE returns the root of the weighted mean squared difference between
// predictions and labels (weights nil means uniform), in label units:
// sqrt(Σ w_i (p_i − y_i)² / Σ w_i), equal to scikit-learn 1.2.1
// mean_squared_error(squared=False) with sample_weight. Empty input or a
// zero total weight gives NaN; a NaN prediction or label gives NaN.
// predictions, labels and (when not nil) weights must have equal lengths.
func RMSE(predictions, labels, weights []float64) float64 {
	sameLength("RMSE", len(predictions), len(labels))
	if weights != nil {
		sameLength("RMSE", len(predictions), len(weights))
	}
	return math.Sqrt(weightedMean(len(predictions), weights, func(i int) float64 {
		d := predictions[i] - labels[i]
		return d * d
	}))
}

// MeanAbsDelta returns the weighted mean absolute difference Σ w_i |a_i −
// b_i| / Σ w_i (weights nil means uniform), in score units. It needs no
// label: with a the scores before and b the scores after a feature is
// disturbed, it measures how much the model's output moves. Equal to
// scikit-learn 1.2.1 mean_absolute_error with sample_weight. Empty input or
// a zero total weight gives NaN; a NaN in a or b gives NaN. a, b and (when
// not nil) weights must have equal lengths.
func MeanAbsDelta(a, b, weights []float64) float64 {
	sameLength("MeanAbsDelta", len(a), len(b))
	if weights != nil {
		sameLength("MeanAbsDelta", len(a), len(weights))
	}
	return weightedMean(len(a), weights, func(i int) float64 { return math.Abs(a[i] - b[i]) })
}
