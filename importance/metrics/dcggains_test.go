package metrics

import (
	"math"
	"math/rand/v2"
	"sort"
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

// The top-k path of DCGGains (k below the group size) against the
// definition written out: sort every item by descending score, give each
// run of tied scores the mean gain of the run at each of its positions,
// and sum gain x 1/log2(position+2) over the first k positions (Järvelin
// and Kekäläinen 2002; ties averaged as McSherry and Najork, ECIR 2008,
// which scikit-learn's ndcg_score follows). Few distinct scores and NaN
// force ties at the cut.
func TestDCGGainsTopKAgainstDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for trial := 0; trial < 500; trial++ {
		n := 1 + rng.IntN(30)
		scores, gains := make([]float64, n), make([]float64, n)
		for i := range scores {
			scores[i] = float64(rng.IntN(1 + trial%8))
			if rng.IntN(10) == 0 {
				scores[i] = math.NaN()
			}
			gains[i] = float64(rng.IntN(4))
		}
		for k := 1; k <= n; k++ {
			want := dcgByDefinition(scores, gains, k)
			got := DCGGains(scores, gains, k, nil)
			if !(math.Abs(got-want) <= 1e-12*math.Max(1, want)) {
				t.Fatalf("scores %v gains %v k=%d: %v, want %v", scores, gains, k, got, want)
			}
		}
	}
}

func dcgByDefinition(scores, gains []float64, k int) float64 {
	n := len(scores)
	idx := make([]int, n)
	key := func(i int) float64 {
		if math.IsNaN(scores[i]) {
			return math.Inf(-1)
		}
		return scores[i]
	}
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return key(idx[a]) > key(idx[b]) })
	mean := make([]float64, n) // per position, the mean gain of its tie run
	for p := 0; p < n; {
		e, sum := p, 0.0
		for e < n && key(idx[e]) == key(idx[p]) {
			sum += gains[idx[e]]
			e++
		}
		for q := p; q < e; q++ {
			mean[q] = sum / float64(e-p)
		}
		p = e
	}
	dcg := 0.0
	for p := 0; p < k && p < n; p++ {
		dcg += mean[p] / math.Log2(float64(p+2))
	}
	return dcg
}
