package bootstrap_test

import (
	"fmt"
	"math/rand/v2"

	"splitledger/importance/bootstrap"
)

func ExamplePoisson() {
	// Per-row losses of a traffic sample (invented numbers).
	losses := []float64{0.21, 0.05, 1.30, 0.44, 0.09, 0.67, 0.12, 0.38, 0.95, 0.02}
	const replicates = 200
	w := bootstrap.Poisson(len(losses), replicates, rand.NewPCG(2026, 1))

	sums := make([]float64, replicates)
	bootstrap.WeightedSums(losses, w, sums)
	means := make([]float64, replicates)
	for b := range means {
		means[b] = sums[b] / w.Total(b)
	}
	lo, hi := bootstrap.PercentileInterval(means, 0.95)
	fmt.Printf("mean loss 95%% interval: [%.3f, %.3f]\n", lo, hi)
	// Output:
	// mean loss 95% interval: [0.168, 0.694]
}

func ExamplePercentile() {
	// Agrees with numpy.percentile's default linear method.
	values := []float64{7, 1, 3, 9}
	fmt.Println(bootstrap.Percentile(values, 50), bootstrap.Percentile(values, 90))
	// Output:
	// 5 8.4
}
