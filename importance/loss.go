package importance

import (
	"math"

	"splitledger/importance/forest"
	"splitledger/importance/metrics"
)

// rowLoss evaluates an additive metric's per-row term for a perturbed
// margin m+d (K values each). It is not safe for concurrent use (scratch).
type rowLoss struct {
	metric Metric
	link   forest.Link
	k      int
	buf    []float64
}

func newRowLoss(metric Metric, e *forest.Ensemble) *rowLoss {
	return &rowLoss{metric: metric, link: e.Link, k: e.NumClass, buf: make([]float64, e.NumClass)}
}

// eval returns the per-row term at margin m + d for label y.
func (l *rowLoss) eval(m, d []float64, y float64) float64 {
	if l.k == 1 {
		return l.eval1(m[0], d[0], y)
	}
	switch l.metric {
	case MetricMeanAbsDelta:
		s := 0.0
		for _, v := range d {
			s += math.Abs(v)
		}
		return s
	case MetricLogLoss:
		mx := math.Inf(-1)
		for c := range l.buf {
			l.buf[c] = m[c] + d[c]
			mx = math.Max(mx, l.buf[c])
		}
		s := 0.0
		for c := range l.buf {
			l.buf[c] = math.Exp(l.buf[c] - mx)
			s += l.buf[c]
		}
		for c := range l.buf {
			l.buf[c] /= s
		}
		return metrics.MulticlassLogLossRow(y, l.buf)
	default: // squared error on the first output
		p := l.predict(m[0] + d[0])
		return (p - y) * (p - y)
	}
}

// eval1 is eval for single-output models.
func (l *rowLoss) eval1(m, d, y float64) float64 {
	switch l.metric {
	case MetricMeanAbsDelta:
		return math.Abs(d)
	case MetricLogLoss:
		return metrics.LogLossRow(y, 1/(1+math.Exp(-(m+d))))
	default:
		p := l.predict(m + d)
		return (p - y) * (p - y)
	}
}

func (l *rowLoss) predict(m float64) float64 {
	switch l.link {
	case forest.LinkLogistic:
		return 1 / (1 + math.Exp(-m))
	case forest.LinkExp:
		return math.Exp(m)
	default:
		return m
	}
}
