package importance

import (
	"fmt"
	"strconv"
	"strings"

	"splitledger/importance/forest"
	"splitledger/importance/metrics"
)

// Metric is the quality measure whose drop the perturbation measures report.
type Metric uint8

const (
	// MetricNDCG is NDCG@k averaged over query groups (higher is better).
	MetricNDCG Metric = iota + 1
	// MetricLogLoss is the mean log loss of the predicted probabilities.
	MetricLogLoss
	// MetricAUC is the ROC AUC of the raw margins (binary labels).
	MetricAUC
	// MetricRMSE is the root mean squared error of the prediction. Drops
	// take the root of the perturbed mean squared error (for permutation,
	// of its exact expectation over all shuffles) minus the unperturbed RMSE.
	MetricRMSE
	// MetricMeanAbsDelta is the label-free mean |Δ raw margin| against the
	// unperturbed score (summed over classes for multi-class models).
	MetricMeanAbsDelta
)

// String gives the metric's report name, e.g. "ndcg@10".
func (m Metric) String() string {
	switch m {
	case MetricNDCG:
		return "ndcg"
	case MetricLogLoss:
		return "logloss"
	case MetricAUC:
		return "auc"
	case MetricRMSE:
		return "rmse"
	case MetricMeanAbsDelta:
		return "mean_abs_delta"
	default:
		return fmt.Sprintf("metric(%d)", uint8(m))
	}
}

// HigherIsBetter reports whether larger values of the metric mean a better
// model (NDCG, AUC).
func (m Metric) HigherIsBetter() bool { return m == MetricNDCG || m == MetricAUC }

// additive reports whether the metric is a mean of per-row terms, so the
// permutation expectation can be computed exactly.
func (m Metric) additive() bool {
	return m == MetricLogLoss || m == MetricRMSE || m == MetricMeanAbsDelta
}

// ParseMetric reads a metric name: "ndcg", "ndcg@K", "logloss", "auc",
// "rmse", "mean_abs_delta". It returns the metric and k (0 when not given).
func ParseMetric(s string) (Metric, int, error) {
	s = strings.ToLower(strings.TrimSpace(s))
	if rest, ok := strings.CutPrefix(s, "ndcg"); ok {
		if rest == "" {
			return MetricNDCG, 0, nil
		}
		k, err := strconv.Atoi(strings.TrimPrefix(rest, "@"))
		if err != nil || !strings.HasPrefix(rest, "@") || k <= 0 {
			return 0, 0, fmt.Errorf("metric %q: want ndcg@K with K a positive integer", s)
		}
		return MetricNDCG, k, nil
	}
	switch s {
	case "logloss", "log_loss":
		return MetricLogLoss, 0, nil
	case "auc":
		return MetricAUC, 0, nil
	case "rmse":
		return MetricRMSE, 0, nil
	case "mean_abs_delta", "mad":
		return MetricMeanAbsDelta, 0, nil
	}
	return 0, 0, fmt.Errorf("unknown metric %q (want ndcg@K, logloss, auc, rmse or mean_abs_delta)", s)
}

// Config sets how the traffic measures are computed. The zero value is
// usable: every field has a documented default.
type Config struct {
	// Metric names the quality metric ("" = from the objective: ranking ->
	// ndcg@10, binary and multi-class -> logloss, regression -> rmse;
	// mean_abs_delta when the sample has no label).
	Metric string
	// K is the NDCG cut-off (default 10; "ndcg@K" in Metric overrides).
	K int
	// Gain is the NDCG gain (default exponential 2^rel − 1).
	Gain metrics.Gain
	// NoRelevant is how groups without a relevant item count (default:
	// left out of the mean).
	NoRelevant metrics.NoRelevant
	// Repeats is the number of shuffles for metrics that are not a mean of
	// per-row terms (NDCG, AUC); default 10. Additive metrics use the exact
	// expectation over all permutations instead.
	Repeats int
	// Replicates is the number of Poisson bootstrap replicates (default
	// 200); Confidence the central interval's level (default 0.95).
	Replicates int
	Confidence float64
	// Seed fixes the shuffles and the bootstrap weights (default 1).
	Seed uint64
	// Workers bounds the goroutines (<= 0: every core). Results do not
	// depend on it.
	Workers int
	// SHAP turns on mean |SHAP|; SHAPRows caps the rows it is computed on
	// (whole bootstrap units are taken in a fixed stride; default 20000).
	SHAP     bool
	SHAPRows int
}

func (c Config) withDefaults() Config {
	if c.K <= 0 {
		c.K = 10
	}
	if c.Repeats <= 0 {
		c.Repeats = 10
	}
	if c.Replicates <= 0 {
		c.Replicates = 200
	}
	if !(c.Confidence > 0 && c.Confidence < 1) {
		c.Confidence = 0.95
	}
	if c.Seed == 0 {
		c.Seed = 1
	}
	if c.SHAPRows <= 0 {
		c.SHAPRows = 20000
	}
	return c
}

// ResolveMetric picks the metric for a model task and label presence.
func ResolveMetric(name string, k int, task forest.Task, hasLabel bool) (Metric, int, error) {
	if name != "" {
		m, mk, err := ParseMetric(name)
		if err != nil {
			return 0, 0, err
		}
		if mk > 0 {
			k = mk
		}
		if !hasLabel && m != MetricMeanAbsDelta {
			return 0, 0, fmt.Errorf("metric %s needs a label column; without labels only mean_abs_delta is available", m)
		}
		return m, k, nil
	}
	if !hasLabel {
		return MetricMeanAbsDelta, k, nil
	}
	switch task {
	case forest.TaskRanking:
		return MetricNDCG, k, nil
	case forest.TaskBinary, forest.TaskMulticlass:
		return MetricLogLoss, k, nil
	default:
		return MetricRMSE, k, nil
	}
}
