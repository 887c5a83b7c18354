package importance

import (
	"math"
	"math/rand/v2"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
)

// The coverage model: three features drawn independently from Uniform(0, 1)
// and three trees (XGBoost rule x < t; every threshold is a dyadic number,
// exact in float32):
//
//	T0: x0 < 0.25 (missing right)  -> -1.2 | 0.4
//	T1: x1 < 0.625 (missing left)  ->  0.8 | -0.6
//	T2: x2 < 0.375 (missing right) -> [x0 < 0.75 (missing left) -> 0.9 | -0.5] | -0.1
//
// plus a base margin of 0.1. The model only sees which interval each value
// falls in, so every population quantity is a finite sum over the cells
// below (probabilities are interval lengths).
var (
	coverageCells = [3][]struct{ p, v float64 }{
		{{0.25, 0.1}, {0.5, 0.5}, {0.25, 0.9}}, // x0: [0, .25), [.25, .75), [.75, 1)
		{{0.625, 0.3}, {0.375, 0.8}},           // x1: [0, .625), [.625, 1)
		{{0.375, 0.2}, {0.625, 0.7}},           // x2: [0, .375), [.375, 1)
	}
	coverageBase = 0.1
)

// coverageMargin is the model above written out by hand (NaN is missing).
func coverageMargin(x0, x1, x2 float64) float64 {
	m := coverageBase
	if x0 < 0.25 {
		m += -1.2
	} else {
		m += 0.4 // includes missing (default right)
	}
	if x1 < 0.625 || x1 != x1 {
		m += 0.8
	} else {
		m += -0.6
	}
	if x2 < 0.375 {
		if x0 < 0.75 || x0 != x0 {
			m += 0.9
		} else {
			m += -0.5
		}
	} else {
		m += -0.1
	}
	return m
}

func coverageEnsemble(link forest.Link, task forest.Task) *forest.Ensemble {
	t0 := forest.Tree{Nodes: []forest.Node{handSplit(0, 0.25, 1, 2, false), handLeaf(), handLeaf()}, Value: []float64{0, -1.2, 0.4}}
	t1 := forest.Tree{Nodes: []forest.Node{handSplit(1, 0.625, 1, 2, true), handLeaf(), handLeaf()}, Value: []float64{0, 0.8, -0.6}}
	t2 := forest.Tree{
		Nodes: []forest.Node{handSplit(2, 0.375, 1, 2, false), handSplit(0, 0.75, 3, 4, true), handLeaf(), handLeaf(), handLeaf()},
		Value: []float64{0, 0, -0.1, 0.9, -0.5},
	}
	e := &forest.Ensemble{
		Format: "hand", Task: task, Link: link, Rule: forest.LessThanFloat32,
		NumClass: 1, BaseMargin: []float64{coverageBase}, FeatureNames: []string{"x0", "x1", "x2"},
		Trees: []forest.Tree{t0, t1, t2},
	}
	e.Index()
	return e
}

const coverageSigma = 0.5 // noise of the regression label

func sigmoid(m float64) float64 { return 1 / (1 + math.Exp(-m)) }

// coverageTruth returns the population permutation drop and missing-break
// drop of feature j for the metric, from the definitions over an infinite
// sample: x' is an independent copy of the feature (permutation) or NaN
// (missing-break), and the rest of the row and its label are kept.
//
//   - mean_abs_delta: E|f(x with x_j') − f(x)|.
//   - rmse, label y = f(x) + ε with ε ~ N(0, σ²) independent of x: the
//     unperturbed MSE is σ² and the perturbed one σ² + E[(f' − f)²], so
//     the drop is sqrt(σ² + E[(f' − f)²]) − σ.
//   - logloss, label y ~ Bernoulli(p), p = sigmoid(f(x)): the expected loss
//     of a row predicting q is −(p ln q + (1 − p) ln(1 − q)); the drop is its
//     mean at q = sigmoid(f') minus its mean at q = p.
//
// Cells are evaluated at a representative value inside each interval.
func coverageTruth(metric Metric, j int, missing bool) float64 {
	type alt struct{ p, v float64 }
	var num, base float64
	for _, a := range coverageCells[0] {
		for _, b := range coverageCells[1] {
			for _, c := range coverageCells[2] {
				w := a.p * b.p * c.p
				x := [3]float64{a.v, b.v, c.v}
				f := coverageMargin(x[0], x[1], x[2])
				alts := []alt{{1, math.NaN()}}
				if !missing {
					alts = alts[:0]
					for _, d := range coverageCells[j] {
						alts = append(alts, alt{d.p, d.v})
					}
				}
				p := sigmoid(f)
				for _, d := range alts {
					xp := x
					xp[j] = d.v
					fp := coverageMargin(xp[0], xp[1], xp[2])
					switch metric {
					case MetricMeanAbsDelta:
						num += w * d.p * math.Abs(fp-f)
					case MetricRMSE:
						num += w * d.p * (fp - f) * (fp - f)
					case MetricLogLoss:
						q := sigmoid(fp)
						num += w * d.p * -(p*math.Log(q) + (1-p)*math.Log(1-q))
					}
				}
				if metric == MetricLogLoss {
					base += w * -(p*math.Log(p) + (1-p)*math.Log(1-p))
				}
			}
		}
	}
	switch metric {
	case MetricRMSE:
		s2 := coverageSigma * coverageSigma
		return math.Sqrt(s2+num) - coverageSigma
	case MetricLogLoss:
		return num - base
	default:
		return num
	}
}

// coverageSample draws n rows of the coverage model with their label for
// the metric (none for mean_abs_delta).
func coverageSample(metric Metric, n int, rng *rand.Rand) *frame.Frame {
	cols := [][]float64{make([]float64, n), make([]float64, n), make([]float64, n)}
	var label []float64
	if metric != MetricMeanAbsDelta {
		label = make([]float64, n)
	}
	for r := 0; r < n; r++ {
		for j := range cols {
			cols[j][r] = rng.Float64()
		}
		f := coverageMargin(cols[0][r], cols[1][r], cols[2][r])
		switch metric {
		case MetricRMSE:
			label[r] = f + coverageSigma*rng.NormFloat64()
		case MetricLogLoss:
			if rng.Float64() < sigmoid(f) {
				label[r] = 1
			}
		}
	}
	return &frame.Frame{
		Names: []string{"x0", "x1", "x2"}, Columns: cols, Label: label, Rows: n,
		Missing: make([]int, 3), SampleFraction: 1,
	}
}

// TestPermutationIntervalCoverage draws 200 samples of 400 rows from the
// coverage model (seeds 1..200) and counts how often the 95% Poisson
// bootstrap percentile interval (200 replicates; percentile interval as in
// Efron & Tibshirani 1993, ch. 13) covers the population drop, for the
// permutation drop and the missing-break drop, under three metrics.
//
// The band 90–99% is asserted on the coverage pooled over the three
// features of a metric (600 intervals, binomial sd about 0.9 points at
// 95%): a single feature's count over 200 seeds has sd 3.1–3.6 intervals,
// so a feature whose interval really covers 93% falls below 180 in about
// one run in fifteen. Per-feature counts are logged. Measured with 1000
// seeds at 500 rows (mean |Δ score|): bootstrap sd within 1–3% of the
// spread of the estimates, coverage 92.4–93.6% for the permutation drop
// and 93.6–94.0% for the missing-break drop, a plain mean (common
// practice: percentile intervals run a point or two under nominal at a few
// hundred rows). The permutation drop's misses lean to the interval lying
// above the truth (about 5% against 2%): its replicates are linearised
// (see linearizePermutation), so they are symmetric about the estimate
// while the V-statistic itself is skewed.
func TestPermutationIntervalCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("coverage simulation: 600 measurements with 200 bootstrap replicates each")
	}
	const (
		seeds = 200
		rows  = 400
	)
	measures := []TrafficMeasure{PermutationDrop, MissingBreakDrop}
	for _, tc := range []struct {
		metric Metric
		link   forest.Link
		task   forest.Task
	}{
		{MetricMeanAbsDelta, forest.LinkIdentity, forest.TaskRegression},
		{MetricRMSE, forest.LinkIdentity, forest.TaskRegression},
		{MetricLogLoss, forest.LinkLogistic, forest.TaskBinary},
	} {
		t.Run(tc.metric.String(), func(t *testing.T) {
			e := coverageEnsemble(tc.link, tc.task)
			nf := e.NumFeatures()
			truth := make([][]float64, len(measures))
			covered := make([][]int, len(measures))
			mean := make([][]float64, len(measures))
			for k := range measures {
				truth[k] = make([]float64, nf)
				covered[k] = make([]int, nf)
				mean[k] = make([]float64, nf)
				for j := range truth[k] {
					truth[k][j] = coverageTruth(tc.metric, j, measures[k] == MissingBreakDrop)
				}
			}
			for seed := uint64(1); seed <= seeds; seed++ {
				f := coverageSample(tc.metric, rows, rand.New(rand.NewPCG(seed, 0xc0de)))
				tab, err := MeasureModel(e, "coverage", f, Config{Metric: tc.metric.String(), Replicates: 200, Seed: seed, Workers: 1})
				if err != nil {
					t.Fatal(err)
				}
				for k, m := range measures {
					for j := 0; j < nf; j++ {
						est := tab.Features[j].Traffic[m]
						if est.Lo <= truth[k][j] && truth[k][j] <= est.Hi {
							covered[k][j]++
						}
						mean[k][j] += est.Value / seeds
					}
				}
			}
			for k, m := range measures {
				pooled := 0
				for j := 0; j < nf; j++ {
					pooled += covered[k][j]
					t.Logf("%s %s: truth %.5f, mean estimate %.5f, coverage %d/%d", m, e.FeatureNames[j], truth[k][j], mean[k][j], covered[k][j], seeds)
				}
				share := float64(pooled) / float64(seeds*nf)
				t.Logf("%s: pooled coverage %.1f%%", m, 100*share)
				if !(share >= 0.90 && share <= 0.99) {
					t.Errorf("%s: 95%% intervals cover the truth in %.1f%% of %d, want 90–99%%", m, 100*share, seeds*nf)
				}
			}
		})
	}
}
