package bootstrap

import (
	"math/rand/v2"
	"testing"
)

// BenchmarkWeightedSums is the hot path: per-unit values of n = 100k units
// summed under B = 200 replicates.
func BenchmarkWeightedSums(b *testing.B) {
	const n, replicates = 100_000, 200
	w := Poisson(n, replicates, rand.NewPCG(1, 2))
	values := make([]float64, n)
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range values {
		values[i] = rng.ExpFloat64()
	}
	dst := make([]float64, replicates)
	b.SetBytes(int64(n * replicates)) // count bytes read
	for b.Loop() {
		WeightedSums(values, w, dst)
	}
}

// BenchmarkWeightedSumsOneAtATime is the plain loop, one replicate at a
// time, kept as the baseline for the four-replicate blocking.
func BenchmarkWeightedSumsOneAtATime(b *testing.B) {
	const n, replicates = 100_000, 200
	w := Poisson(n, replicates, rand.NewPCG(1, 2))
	values := make([]float64, n)
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range values {
		values[i] = rng.ExpFloat64()
	}
	dst := make([]float64, replicates)
	b.SetBytes(int64(n * replicates))
	for b.Loop() {
		for r := 0; r < replicates; r++ {
			var s float64
			for i, c := range w.Replicate(r) {
				s += float64(c) * values[i]
			}
			dst[r] = s
		}
	}
}

// BenchmarkPoisson draws the counts of 100k units for 200 replicates.
func BenchmarkPoisson(b *testing.B) {
	for b.Loop() {
		Poisson(100_000, 200, rand.NewPCG(1, 2))
	}
}

// BenchmarkPercentileInterval is the interval from 200 replicates.
func BenchmarkPercentileInterval(b *testing.B) {
	rng := rand.New(rand.NewPCG(5, 6))
	r := make([]float64, 200)
	for i := range r {
		r[i] = rng.NormFloat64()
	}
	for b.Loop() {
		PercentileInterval(r, 0.95)
	}
}
