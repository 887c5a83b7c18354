package metrics

import (
	"math"
	"testing"
)

// DCGGains with gains computed by Gain.Of equals DCG on the grades (the same
// formula, Järvelin and Kekäläinen 2002, with the tie rule of NDCG).
func TestDCGGainsEqualsDCG(t *testing.T) {
	scores := []float64{0.3, 0.9, 0.9, math.NaN(), 0.1, 0.5}
	labels := []float64{1, 0, 3, 2, 0, 1}
	for _, g := range []Gain{GainExponential, GainLinear} {
		gains := make([]float64, len(labels))
		for i, l := range labels {
			gains[i] = g.Of(l)
		}
		for _, k := range []int{0, 1, 2, 3, 10} {
			a := DCG(scores, labels, k, g, nil)
			b := DCGGains(scores, gains, k, nil)
			if !(math.Abs(a-b) <= 1e-15) {
				t.Errorf("%v k=%d: DCG %v, DCGGains %v", g, k, a, b)
			}
		}
	}
	if !math.IsNaN(DCGGains(nil, nil, 10, nil)) {
		t.Error("empty input must give NaN")
	}
}
