package treefile

import (
	"fmt"
	"math"
	"strings"

	"splitledger/importance/forest"
)

// xgbObjective is what an XGBoost objective string means for scoring.
type xgbObjective struct {
	task forest.Task
	link forest.Link
	// scale turns base_score (prediction scale) into the base margin.
	scale baseScale
}

// baseScale is the inverse link XGBoost applies to base_score
// (ObjFunction::ProbToMargin).
type baseScale uint8

const (
	baseIdentity baseScale = iota + 1 // margin = base_score
	baseLogit                         // margin = log(p / (1 - p)), 0 < p < 1
	baseLog                           // margin = log(p), p > 0
)

// xgbObjectiveOf maps an XGBoost objective name (1.6 to 2.x) to its task,
// link and base-score scale. Following XGBoost's ProbToMargin: the logistic
// objectives (binary:logistic, reg:logistic, binary:logitraw) store
// base_score as a probability, the log-link ones (count:poisson, reg:gamma,
// reg:tweedie, survival:cox, survival:aft) as a mean, the rest as a margin.
// reg:logistic is treated as a binary task (labels in [0, 1], log loss).
// binary:logitraw keeps the identity link (its predictions are raw margins).
// binary:hinge (0/1 predictions with no smooth link) and unknown objectives
// are ErrUnsupported rather than guessed: a wrong link would silently change
// every quality metric.
func xgbObjectiveOf(name string) (xgbObjective, error) {
	switch name {
	case "reg:squarederror", "reg:linear", "reg:squaredlogerror", "reg:pseudohubererror",
		"reg:absoluteerror", "reg:quantileerror":
		return xgbObjective{forest.TaskRegression, forest.LinkIdentity, baseIdentity}, nil
	case "binary:logistic", "reg:logistic":
		return xgbObjective{forest.TaskBinary, forest.LinkLogistic, baseLogit}, nil
	case "binary:logitraw":
		return xgbObjective{forest.TaskBinary, forest.LinkIdentity, baseLogit}, nil
	case "count:poisson", "reg:gamma", "reg:tweedie", "survival:cox", "survival:aft":
		return xgbObjective{forest.TaskRegression, forest.LinkExp, baseLog}, nil
	case "multi:softprob", "multi:softmax":
		return xgbObjective{forest.TaskMulticlass, forest.LinkSoftmax, baseIdentity}, nil
	}
	if strings.HasPrefix(name, "rank:") {
		return xgbObjective{forest.TaskRanking, forest.LinkIdentity, baseIdentity}, nil
	}
	if name == "" {
		return xgbObjective{}, fmt.Errorf("%w: no objective", ErrUnsupported)
	}
	return xgbObjective{}, fmt.Errorf("%w: objective %q", ErrUnsupported, name)
}

// baseMargin converts base_score to the margin XGBoost starts every row
// from. XGBoost computes it in float32; so does this, so margins agree to
// the last bit of the base. Out-of-domain scores (p outside (0, 1) for the
// logit, p <= 0 for the log, non-finite) are an error.
func (o xgbObjective) baseMargin(score float64) (float64, error) {
	if math.IsNaN(score) || math.IsInf(score, 0) {
		return 0, fmt.Errorf("base_score %v is not finite", score)
	}
	p := float32(score)
	switch o.scale {
	case baseLogit:
		if !(p > 0 && p < 1) {
			return 0, fmt.Errorf("base_score %v outside (0, 1) for a logistic objective", score)
		}
		return float64(float32(-math.Log(float64(1/p - 1)))), nil
	case baseLog:
		if !(p > 0) {
			return 0, fmt.Errorf("base_score %v not positive for a log-link objective", score)
		}
		return float64(float32(math.Log(float64(p)))), nil
	}
	return float64(p), nil
}
