package importance

import (
	"math"
	"slices"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/importance/metrics"
)

// The fast path (free walks, step functions, exact expectations) must agree
// with the definitions evaluated the slow way: rescoring every perturbed row
// with the whole ensemble. These are the definitions in DESIGN.md: the
// permutation expectation over all shuffles of a column equals the mean over
// rows s of the loss with x_rj replaced by x_sj.

func scoreRows(e *forest.Ensemble, cols [][]float64, n int) []float64 {
	m := make([]float64, n*e.NumClass)
	e.Margins(m, cols, n, 1)
	return m
}

func meanLoss(t *testing.T, e *forest.Ensemble, metric Metric, m []float64, base []float64, y []float64) float64 {
	l := newRowLoss(metric, e)
	k := e.NumClass
	s := 0.0
	d := make([]float64, k)
	zero := make([]float64, k)
	for r := range y {
		if metric == MetricMeanAbsDelta {
			for c := 0; c < k; c++ {
				d[c] = m[r*k+c] - base[r*k+c]
			}
			s += l.eval(base[r*k:(r+1)*k], d, y[r])
			continue
		}
		s += l.eval(m[r*k:(r+1)*k], zero, y[r])
	}
	v := s / float64(len(y))
	if metric == MetricRMSE {
		return math.Sqrt(v)
	}
	return v
}

func withColumn(cols [][]float64, j int, c []float64) [][]float64 {
	out := slices.Clone(cols)
	out[j] = c
	return out
}

func TestDropsMatchBruteForceAdditive(t *testing.T) {
	cases := []struct {
		fixture string
		metric  string
	}{
		{"binary", "logloss"},
		{"missing", "logloss"},
		{"regression", "rmse"},
		{"multiclass", "logloss"},
		{"categorical", "logloss"},
		{"binary", "mean_abs_delta"},
	}
	for _, tc := range cases {
		t.Run(tc.fixture+"/"+tc.metric, func(t *testing.T) {
			e, f := loadFixture(t, tc.fixture)
			f = headRows(f, 120)
			tab, err := MeasureModel(e, tc.fixture, f, Config{Metric: tc.metric, Replicates: 20, SHAP: false})
			if err != nil {
				t.Fatal(err)
			}
			metric, _, _ := ParseMetric(tc.metric)
			cols, _ := columnsFor(e, f)
			n := f.Rows
			base := scoreRows(e, cols, n)
			q0 := meanLoss(t, e, metric, base, base, f.Label)
			if !within(tab.Quality.Value, q0, 1e-9) {
				t.Errorf("quality %v, brute force %v", tab.Quality.Value, q0)
			}
			for j := range e.FeatureNames {
				// missing-break
				nanCol := make([]float64, n)
				for r := range nanCol {
					nanCol[r] = math.NaN()
				}
				miss := meanLoss(t, e, metric, scoreRows(e, withColumn(cols, j, nanCol), n), base, f.Label) - q0
				// freeze at the median
				med := medianOf(cols[j])
				fz := make([]float64, n)
				for r := range fz {
					fz[r] = med
				}
				freeze := meanLoss(t, e, metric, scoreRows(e, withColumn(cols, j, fz), n), base, f.Label) - q0
				// permutation expectation: every row takes every other row's value
				perm := 0.0
				if len(e.ByFeature[j]) > 0 {
					// For RMSE the expectation is taken of the mean squared
					// error, then the root (documented on MetricRMSE).
					inner := metric
					if metric == MetricRMSE {
						inner = squaredErrorOnly
					}
					for s := 0; s < n; s++ {
						c := make([]float64, n)
						for r := range c {
							c[r] = cols[j][s]
						}
						perm += meanLoss(t, e, inner, scoreRows(e, withColumn(cols, j, c), n), base, f.Label)
					}
					perm /= float64(n)
					if metric == MetricRMSE {
						perm = math.Sqrt(perm)
					}
					perm -= q0
				}
				got := tab.Features[j].Traffic
				for _, chk := range []struct {
					name      string
					got, want float64
				}{
					{"permutation", got[PermutationDrop].Value, perm},
					{"missing-break", got[MissingBreakDrop].Value, miss},
					{"freeze", got[FreezeDrop].Value, freeze},
				} {
					if !within(chk.got, chk.want, 1e-9*(1+math.Abs(chk.want))) {
						t.Errorf("%s %s: fast path %.12g, brute force %.12g", e.FeatureNames[j], chk.name, chk.got, chk.want)
					}
				}
			}
		})
	}
}

// NDCG drops use shuffles; with the same permutations the slow way must give
// the same numbers.
func TestDropsMatchBruteForceNDCG(t *testing.T) {
	e, f := loadFixture(t, "ranking")
	cfg := Config{Replicates: 10, Repeats: 3}
	tab, err := MeasureModel(e, "ranking", f, cfg)
	if err != nil {
		t.Fatal(err)
	}
	cfg = cfg.withDefaults()
	r, err := newRun(e, f, cfg, MetricNDCG, 10)
	if err != nil {
		t.Fatal(err)
	}
	cols := r.cols
	n := f.Rows
	groups := f.Groups()
	ndcg := func(m []float64) float64 {
		s, c := 0.0, 0
		var sc metrics.NDCGScratch
		for _, g := range groups {
			ss := make([]float64, len(g))
			ll := make([]float64, len(g))
			for i, row := range g {
				ss[i], ll[i] = m[row], f.Label[row]
			}
			v := metrics.NDCG(ss, ll, 10, metrics.GainExponential, &sc)
			if v == v {
				s += v
				c++
			}
		}
		return s / float64(c)
	}
	q0 := ndcg(scoreRows(e, cols, n))
	if !within(tab.Quality.Value, q0, 1e-12) {
		t.Fatalf("quality %v, brute force %v", tab.Quality.Value, q0)
	}
	for j := range e.FeatureNames {
		perm := shuffledDrop(e, cols, n, j, r.perms, ndcg, q0)
		if got := tab.Features[j].Traffic[PermutationDrop].Value; !within(got, perm, 1e-12) {
			t.Errorf("%s: permutation drop %v, brute force %v", e.FeatureNames[j], got, perm)
		}
	}
}

// Path usage: share of rows whose paths test the feature, by walking.
func TestPathUsageBruteForce(t *testing.T) {
	e, f := loadFixture(t, "binary")
	tab, err := MeasureModel(e, "binary", f, Config{Replicates: 5})
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float64, e.NumFeatures())
	cols, _ := columnsFor(e, f)
	for j := range e.FeatureNames {
		hits, tests := 0, 0
		for r := 0; r < f.Rows; r++ {
			for k := range x {
				x[k] = cols[k][r]
			}
			hit := false
			for ti := range e.Trees {
				tr := &e.Trees[ti]
				i := int32(0)
				for !tr.Nodes[i].IsLeaf() {
					n := &tr.Nodes[i]
					if int(n.Feature) == j {
						hit = true
						tests++
					}
					i = forest.Next(tr, n, x[n.Feature], e.Rule)
				}
			}
			if hit {
				hits++
			}
		}
		got := tab.Features[j].Traffic
		if !within(got[PathShare].Value, float64(hits)/float64(f.Rows), 1e-12) ||
			!within(got[TestsPerRow].Value, float64(tests)/float64(f.Rows), 1e-12) {
			t.Errorf("%s: path share %v tests %v, want %v %v", e.FeatureNames[j], got[PathShare].Value, got[TestsPerRow].Value,
				float64(hits)/float64(f.Rows), float64(tests)/float64(f.Rows))
		}
	}
}

// headRows keeps the first n rows of f (a view, no copy of values).
func headRows(f *frame.Frame, n int) *frame.Frame {
	if f.Rows <= n {
		return f
	}
	g := *f
	g.Rows = n
	g.Columns = make([][]float64, len(f.Columns))
	for j, c := range f.Columns {
		g.Columns[j] = c[:n]
	}
	if f.Label != nil {
		g.Label = f.Label[:n]
	}
	if f.Group != nil {
		g.Group = f.Group[:n]
	}
	return &g
}

// squaredErrorOnly is not a public metric: rowLoss's default branch gives
// the squared error, and meanLoss takes no root for it.
const squaredErrorOnly = Metric(200)

// shuffledDrop is the mean over the shuffles perms of q0 minus the quality
// of the rows rescored with column j shuffled.
func shuffledDrop(e *forest.Ensemble, cols [][]float64, n, j int, perms [][]int32, quality func([]float64) float64, q0 float64) float64 {
	drop := 0.0
	for _, p := range perms {
		c := make([]float64, n)
		for row := range c {
			c[row] = cols[j][p[row]]
		}
		drop += q0 - quality(scoreRows(e, withColumn(cols, j, c), n))
	}
	return drop / float64(len(perms))
}

// AUC drops use the same shuffles as NDCG; missing-break and freeze are
// deterministic. All must equal the AUC of the rescored rows.
func TestDropsMatchBruteForceAUC(t *testing.T) {
	e, f := loadFixture(t, "binary")
	f = headRows(f, 400)
	cfg := Config{Metric: "auc", Replicates: 10, Repeats: 3}
	tab, err := MeasureModel(e, "binary", f, cfg)
	if err != nil {
		t.Fatal(err)
	}
	cfg = cfg.withDefaults()
	r, err := newRun(e, f, cfg, MetricAUC, 0)
	if err != nil {
		t.Fatal(err)
	}
	cols, n := r.cols, f.Rows
	auc := func(m []float64) float64 { return metrics.AUC(m, f.Label, nil) }
	q0 := auc(scoreRows(e, cols, n))
	if !within(tab.Quality.Value, q0, 1e-12) {
		t.Fatalf("quality %v, brute force %v", tab.Quality.Value, q0)
	}
	for j := range e.FeatureNames {
		nanCol, fz := make([]float64, n), make([]float64, n)
		med := medianOf(cols[j])
		for row := range nanCol {
			nanCol[row], fz[row] = math.NaN(), med
		}
		perm := shuffledDrop(e, cols, n, j, r.perms, auc, q0)
		got := tab.Features[j].Traffic
		for _, c := range []struct {
			m    TrafficMeasure
			want float64
		}{
			{PermutationDrop, perm},
			{MissingBreakDrop, q0 - auc(scoreRows(e, withColumn(cols, j, nanCol), n))},
			{FreezeDrop, q0 - auc(scoreRows(e, withColumn(cols, j, fz), n))},
		} {
			if !within(got[c.m].Value, c.want, 1e-12) {
				t.Errorf("%s measure %d: %v, brute force %v", e.FeatureNames[j], c.m, got[c.m].Value, c.want)
			}
		}
	}
}
