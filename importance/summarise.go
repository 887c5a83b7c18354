package importance

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"splitledger/importance/bootstrap"
	"splitledger/importance/metrics"
)

// replicateSums returns the B x cols matrix of Poisson-weighted column sums
// of r.sums (row b = replicate b), plus the unweighted sums. Units are
// processed in blocks so the weight matrix never exceeds one block.
func (r *run) replicateSums() (rep []float64, point []float64) {
	B := r.cfg.Replicates
	cols := r.lay.cols
	U := len(r.units)
	rep = make([]float64, B*cols)
	point = make([]float64, cols)
	for u := 0; u < U; u++ {
		row := r.sums[u*cols : (u+1)*cols]
		for c, v := range row {
			point[c] += v
		}
	}
	w := r.weights()
	const block = 4096
	wf := make([]float64, B*block)
	for lo := 0; lo < U; lo += block {
		hi := min(lo+block, U)
		n := hi - lo
		for b := 0; b < B; b++ {
			wb := w.Replicate(b)
			for i := 0; i < n; i++ {
				wf[b*n+i] = float64(wb[lo+i])
			}
		}
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1,
			blas64.General{Rows: B, Cols: n, Stride: n, Data: wf[:B*n]},
			blas64.General{Rows: n, Cols: cols, Stride: cols, Data: r.sums[lo*cols : hi*cols]},
			1, blas64.General{Rows: B, Cols: cols, Stride: cols, Data: rep})
	}
	return rep, point
}

// summarise turns the per-unit sums into the table's estimates.
func (r *run) summarise(t *Table) {
	lay := r.lay
	nf := lay.nf
	B := r.cfg.Replicates
	rep, point := r.replicateSums()
	g := func(v float64) float64 {
		if r.metric == MetricRMSE {
			return math.Sqrt(v)
		}
		return v
	}
	sign := 1.0
	if r.metric.HigherIsBetter() {
		sign = -1
	}
	// quality and drops, point and replicates
	get := func(col, den int, transform bool) vals {
		v := vals{reps: make([]float64, B)}
		f := func(num, d float64) float64 {
			if !(d > 0) {
				return math.NaN()
			}
			if transform {
				return g(num / d)
			}
			return num / d
		}
		v.point = f(point[col], point[den])
		for b := 0; b < B; b++ {
			v.reps[b] = f(rep[b*lay.cols+col], rep[b*lay.cols+den])
		}
		return v
	}
	var quality vals
	aucDrops := map[[2]int]vals{}
	if r.metric == MetricAUC {
		quality, aucDrops = r.aucValues()
	} else {
		quality = get(lay.base, lay.denMetric, true)
	}
	t.Quality = r.estimate(quality.point, quality.reps)
	measures := make([][]vals, NumTrafficMeasures)
	for m := range measures {
		measures[m] = make([]vals, nf)
	}
	for j := 0; j < nf; j++ {
		for p, m := range []TrafficMeasure{PermutationDrop, MissingBreakDrop, FreezeDrop} {
			var pv vals
			if r.metric == MetricAUC {
				pv = aucDrops[[2]int{j, p}]
			} else {
				pv = get(lay.drop+3*j+p, lay.denMetric, true)
			}
			d := vals{point: noiseFloor(sign*(pv.point-quality.point), quality.point), reps: make([]float64, B)}
			for b := range d.reps {
				d.reps[b] = noiseFloor(sign*(pv.reps[b]-quality.reps[b]), quality.reps[b])
			}
			measures[m][j] = d
		}
		measures[PathShare][j] = get(lay.path+j, lay.denRows, false)
		measures[TestsPerRow][j] = get(lay.tests+j, lay.denRows, false)
		if r.shapAt != nil {
			measures[MeanAbsSHAP][j] = get(lay.shap+j, lay.denSHAP, false)
		} else {
			measures[MeanAbsSHAP][j] = vals{point: math.NaN()}
		}
	}
	for j := range t.Features {
		t.Features[j].Traffic = make([]Estimate, NumTrafficMeasures)
	}
	for m := range measures {
		vs := measures[m]
		// shares: positive part over the positive total, per replicate
		pointTot := 0.0
		for _, v := range vs {
			pointTot += math.Max(v.point, 0)
		}
		repTot := make([]float64, B)
		for _, v := range vs {
			for b, x := range v.reps {
				repTot[b] += math.Max(x, 0)
			}
		}
		for j, v := range vs {
			est := r.estimate(v.point, v.reps)
			if v.reps != nil {
				est.Share = ratio(math.Max(v.point, 0), pointTot)
				sr := make([]float64, B)
				for b, x := range v.reps {
					sr[b] = ratio(math.Max(x, 0), repTot[b])
				}
				est.ShareReplicates = sr
				est.ShareLo, est.ShareHi = bootstrap.PercentileInterval(sr, r.cfg.Confidence)
			} else {
				est.Share, est.ShareLo, est.ShareHi = math.NaN(), math.NaN(), math.NaN()
			}
			t.Features[j].Traffic[m] = est
		}
	}
}

// estimate builds an Estimate from a point value and replicates (nil: no
// interval).
func (r *run) estimate(point float64, reps []float64) Estimate {
	e := Estimate{Value: point, Lo: math.NaN(), Hi: math.NaN(), Share: math.NaN(), ShareLo: math.NaN(), ShareHi: math.NaN()}
	if reps != nil {
		e.Replicates = reps
		e.Lo, e.Hi = bootstrap.PercentileInterval(reps, r.cfg.Confidence)
	}
	return e
}

// weights returns the Poisson bootstrap weights of the units: B replicates
// from a PCG stream seeded by Config.Seed, so two tables measured on the
// same sample with the same seed share them (paired bootstrap).
func (r *run) weights() *bootstrap.Weights {
	if r.boot == nil {
		r.boot = bootstrap.Poisson(len(r.units), r.cfg.Replicates, rand.NewPCG(r.cfg.Seed, 0xb0075742))
	}
	return r.boot
}

// vals is a point value with its bootstrap replicates (nil: none).
type vals struct {
	point float64
	reps  []float64
}

// aucValues computes AUC (point and per replicate) for the unperturbed
// margins and for every (feature, perturbation): permutation (mean over
// repeats), missing-break, freeze. Each is one sort and then one linear pass
// per replicate with the units' Poisson weights (a group's weight applies to
// each of its rows). Cost: features x (repeats+2) x replicates x rows.
func (r *run) aucValues() (vals, map[[2]int]vals) {
	B := r.cfg.Replicates
	n := r.f.Rows
	w := r.weights()
	counts := make([][]uint8, B)
	for b := range counts {
		wb := w.Replicate(b)
		c := make([]uint8, n)
		for u, rows := range r.units {
			for _, row := range rows {
				c[row] = wb[u]
			}
		}
		counts[b] = c
	}
	var rk metrics.Ranking
	one := func(src []float64) vals {
		if err := rk.Rank(src, r.f.Label); err != nil {
			return vals{point: math.NaN(), reps: nanSlice(B)}
		}
		v := vals{point: rk.AUC(nil), reps: make([]float64, B)}
		for b := range v.reps {
			v.reps[b] = rk.AUCCounts(counts[b])
		}
		return v
	}
	base := one(r.aucBase)
	np := r.nPert()
	out := map[[2]int]vals{}
	for j := 0; j < r.lay.nf; j++ {
		perm := vals{reps: make([]float64, B)}
		for p := 2; p < np; p++ {
			v := one(r.aucScores[j*np+p])
			perm.point += v.point / float64(np-2)
			for b := range perm.reps {
				perm.reps[b] += v.reps[b] / float64(np-2)
			}
		}
		out[[2]int{j, 0}] = perm
		out[[2]int{j, 1}] = one(r.aucScores[j*np+0])
		out[[2]int{j, 2}] = one(r.aucScores[j*np+1])
	}
	return base, out
}

func nanSlice(n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = math.NaN()
	}
	return s
}

// noiseFloor returns 0 for a drop whose size is within floating-point
// rounding of the metric itself (|d| <= 1e-12 (1 + |q|)): such a drop is the
// difference of two sums that hold the same terms in another order, not a
// measured effect.
func noiseFloor(d, q float64) float64 {
	if math.Abs(d) <= 1e-12*(1+math.Abs(q)) {
		return 0
	}
	return d
}
