package metrics

import (
	"fmt"
	"math"
)

// LogLossEpsilon is the clip bound for probabilities in the log losses:
// p is replaced by min(max(p, ε), 1−ε) before the logarithm, which caps a
// row's loss at −ln ε ≈ 36.04 nats. It is float64's machine epsilon
// (2^−52), the bound scikit-learn 1.2.1's log_loss uses by default
// (eps="auto" is numpy.finfo(float64).eps; versions before 1.2 used 1e-15).
const LogLossEpsilon = 0x1p-52

func clipProbability(p float64) float64 {
	return min(max(p, LogLossEpsilon), 1-LogLossEpsilon)
}

// LogLossRow returns the binary cross-entropy of one row in nats:
// −(y·ln p + (1−y)·ln(1−p)) with p clipped by LogLossEpsilon and the pair
// (1−p, p) renormalised to sum 1, exactly as scikit-learn 1.2.1 log_loss
// treats each row. label is normally 0 or 1; a soft label in [0, 1] is
// accepted. A NaN probability, or a label that is NaN or outside [0, 1],
// gives NaN.
func LogLossRow(label, prob float64) float64 {
	if prob != prob {
		return math.NaN()
	}
	p := clipProbability(prob)
	q := 1 - p
	s := q + p // not always exactly 1 in floating point
	switch {
	case label == 1:
		return -math.Log(p / s)
	case label == 0:
		return -math.Log(q / s)
	case label > 0 && label < 1:
		return -(label*math.Log(p/s) + (1-label)*math.Log(q/s))
	default:
		return math.NaN()
	}
}

// LogLoss returns the weighted mean of LogLossRow over rows (weights nil
// means uniform), in nats: scikit-learn 1.2.1 log_loss with sample_weight.
// Empty input or a zero total weight gives NaN; any NaN row loss gives NaN.
// labels, probs and (when not nil) weights must have equal lengths.
func LogLoss(labels, probs, weights []float64) float64 {
	sameLength("LogLoss", len(labels), len(probs))
	if weights != nil {
		sameLength("LogLoss", len(labels), len(weights))
	}
	return weightedMean(len(labels), weights, func(i int) float64 { return LogLossRow(labels[i], probs[i]) })
}

// MulticlassLogLossRow returns −ln(p_y / Σ_c p_c) for one row in nats,
// where probs holds the row's class probabilities (softmax output), y is
// the class index given as a float64 label, and every p_c is first clipped
// by LogLossEpsilon, as scikit-learn 1.2.1 log_loss does (the
// renormalisation matters only when the row does not sum to 1). A label
// that is not an integer in [0, len(probs)), a NaN probability or an empty
// row gives NaN.
func MulticlassLogLossRow(label float64, probs []float64) float64 {
	if !(label >= 0 && label < float64(len(probs))) || label != math.Trunc(label) {
		return math.NaN()
	}
	var s float64
	for _, p := range probs {
		if p != p {
			return math.NaN()
		}
		s += clipProbability(p)
	}
	return -math.Log(clipProbability(probs[int(label)]) / s)
}

// MulticlassLogLoss returns the weighted mean of MulticlassLogLossRow over
// rows (weights nil means uniform), in nats: scikit-learn 1.2.1 log_loss
// with sample_weight and labels = 0..classes−1. probs is row-major with
// classes values per row (probs[r*classes+c]), the layout of the ensemble's
// margins. Empty input or a zero total weight gives NaN; any NaN row loss
// gives NaN. It panics when classes < 1 or the lengths do not match.
func MulticlassLogLoss(labels, probs []float64, classes int, weights []float64) float64 {
	if classes < 1 {
		panic(fmt.Sprintf("metrics: MulticlassLogLoss: %d classes", classes))
	}
	sameLength("MulticlassLogLoss", len(labels)*classes, len(probs))
	if weights != nil {
		sameLength("MulticlassLogLoss", len(labels), len(weights))
	}
	return weightedMean(len(labels), weights, func(i int) float64 {
		return MulticlassLogLossRow(labels[i], probs[i*classes:(i+1)*classes])
	})
}
