package treeshap

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"splitledger/importance/forest"
)

// leaf and split build forest nodes for hand-made trees.
func leaf() forest.Node {
	return forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
}

func split(f int32, t float64, l, r int32, defaultLeft bool) forest.Node {
	n := forest.Node{Feature: f, Threshold: t, Left: l, Right: r, CatSet: -1}
	if defaultLeft {
		n.Flags |= forest.FlagDefaultLeft
	}
	return n
}

// ensemble wraps trees into a one-class XGBoost-rule ensemble over nf
// features with base margin base.
func ensemble(nf int, base float64, trees ...forest.Tree) *forest.Ensemble {
	names := make([]string, nf)
	for i := range names {
		names[i] = fmt.Sprintf("f%d", i)
	}
	e := &forest.Ensemble{
		Format: "hand", Task: forest.TaskRegression, Link: forest.LinkIdentity,
		Rule: forest.LessThanFloat32, NumClass: 1, BaseMargin: []float64{base},
		FeatureNames: names, Trees: trees,
	}
	return e
}

func within(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// TestHandWorked checks trees whose SHAP values were worked out by hand
// from the Shapley definition (Shapley 1953) with the path-dependent value
// function of Lundberg, Erion & Lee (2018): f(S) follows the row at
// features in S and averages the children by cover elsewhere.
func TestHandWorked(t *testing.T) {
	// Stump on f0 (x < 0.5): covers 10 -> 4 | 6, leaves 1 | -2.
	// E = (4·1 + 6·(-2))/10 = -0.8. A row going left: φ0 = 1 - (-0.8) = 1.8.
	// A missing f0 takes the default (right): φ0 = -2 - (-0.8) = -1.2.
	stump := forest.Tree{
		Nodes: []forest.Node{split(0, 0.5, 1, 2, false), leaf(), leaf()},
		Value: []float64{0, 1, -2},
		Cover: []float64{10, 4, 6},
	}
	// Two features: f0 < 0 (10 -> 4 | 6); left: f1 < 0 (4 -> 1 | 3) with
	// leaves a=5 (cover 1), b=1 (cover 3); right leaf c=-1 (cover 6).
	// Row (-1, -1) reaches a.
	// f(∅) = (1·5 + 3·1 + 6·(-1))/10 = 0.2; f({0}) = (5 + 3)/4 = 2;
	// f({1}) = 0.4·5 + 0.6·(-1) = 1.4; f({0,1}) = 5.
	// φ0 = ½[(2-0.2) + (5-1.4)] = 2.7; φ1 = ½[(1.4-0.2) + (5-2)] = 2.1.
	two := forest.Tree{
		Nodes: []forest.Node{split(0, 0, 1, 2, false), split(1, 0, 3, 4, false), leaf(), leaf(), leaf()},
		Value: []float64{0, 0, -1, 5, 1},
		Cover: []float64{10, 4, 6, 1, 3},
	}
	// f0 tested twice on one path: f0 < 1 (10 -> 6 | 4); left: f1 < 0
	// (6 -> 3 | 3); left-left: f0 < 0 (3 -> 1 | 2) with leaves a=4 (cover 1),
	// b=0 (cover 2); left-right leaf c=-2 (cover 3); right leaf d=1 (cover 4).
	// Row (0.5, -1) reaches b.
	// f(∅) = (4 + 0 - 6 + 4)/10 = 0.2;
	// f({0}) = ½·0 + ½·(-2) = -1 (f0 followed at both tests);
	// f({1}) = 0.6·(⅓·4 + ⅔·0) + 0.4·1 = 1.2; f({0,1}) = 0.
	// φ0 = ½[(-1-0.2) + (0-1.2)] = -1.2; φ1 = ½[(1.2-0.2) + (0+1)] = 1.0.
	twice := forest.Tree{
		Nodes: []forest.Node{
			split(0, 1, 1, 2, false), split(1, 0, 3, 4, false), leaf(),
			split(0, 0, 5, 6, false), leaf(), leaf(), leaf(),
		},
		Value: []float64{0, 0, 1, 0, -2, 4, 0},
		Cover: []float64{10, 6, 4, 3, 3, 1, 2},
	}
	nan := math.NaN()
	cases := []struct {
		name string
		e    *forest.Ensemble
		row  []float64
		want []float64 // φ per feature, then bias
	}{
		{"stump left", ensemble(2, 0.5, stump), []float64{0, 7}, []float64{1.8, 0, 0.5 - 0.8}},
		{"stump missing default right", ensemble(2, 0.5, stump), []float64{nan, 7}, []float64{-1.2, 0, 0.5 - 0.8}},
		{"two features", ensemble(3, 0, two), []float64{-1, -1, 9}, []float64{2.7, 2.1, 0, 0.2}},
		{"feature tested twice", ensemble(2, 0, twice), []float64{0.5, -1}, []float64{-1.2, 1.0, 0.2}},
		// Sum of trees: SHAP values add (additivity, Shapley 1953).
		{"two trees add", ensemble(3, 0, two, stump), []float64{-1, -1, 0}, []float64{2.7 + 1.8, 2.1, 0, 0.2 - 0.8}},
	}
	for _, tc := range cases {
		for _, direct := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s/direct=%v", tc.name, direct), func(t *testing.T) {
				x := newExplainer(t, tc.e, direct)
				got := make([]float64, x.RowLen())
				x.Row(got, tc.row)
				for j, w := range tc.want {
					if !within(got[j], w, 1e-12) {
						t.Errorf("φ[%d] = %v, want %v", j, got[j], w)
					}
				}
			})
		}
	}
}

// newExplainer builds an Explainer; direct forces the per-row O(d²)
// evaluation instead of the leaf tables.
func newExplainer(t testing.TB, e *forest.Ensemble, direct bool) *Explainer {
	t.Helper()
	if direct {
		old := tableMaxFeatures
		tableMaxFeatures = -1
		defer func() { tableMaxFeatures = old }()
	}
	x, err := New(e)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

// randomEnsemble builds trees with repeated features, unequal covers, NaN
// defaults both ways and several classes.
func randomEnsemble(rng *rand.Rand, nf, classes, trees, depth int) *forest.Ensemble {
	e := ensemble(nf, 0)
	e.NumClass = classes
	e.BaseMargin = make([]float64, classes)
	for c := range e.BaseMargin {
		e.BaseMargin[c] = rng.NormFloat64()
	}
	for ti := 0; ti < trees; ti++ {
		var tr forest.Tree
		tr.Class = ti % classes
		var grow func(d int, cover float64) int32
		grow = func(d int, cover float64) int32 {
			i := int32(len(tr.Nodes))
			tr.Nodes = append(tr.Nodes, leaf())
			tr.Value = append(tr.Value, rng.NormFloat64())
			tr.Cover = append(tr.Cover, cover)
			if d == depth || (d > 0 && rng.IntN(4) == 0) {
				return i
			}
			share := 0.05 + 0.9*rng.Float64()
			l := grow(d+1, cover*share)
			r := grow(d+1, cover*(1-share))
			tr.Nodes[i] = split(int32(rng.IntN(nf)), float64(rng.IntN(5)), l, r, rng.IntN(2) == 0)
			tr.Value[i] = 0
			return i
		}
		grow(0, 100)
		e.Trees = append(e.Trees, tr)
	}
	e.Index()
	return e
}

// bruteForce computes SHAP values from the Shapley definition by enumerating
// every coalition of the nf features, with the path-dependent value function
// of Lundberg, Erion & Lee (2018): O(2^nf) and independent of the leaf
// tables.
func bruteForce(e *forest.Ensemble, row []float64) []float64 {
	nf := e.NumFeatures()
	k := e.NumClass
	out := make([]float64, k*(nf+1))
	value := func(class int, set uint) float64 {
		s := 0.0
		for ti := range e.Trees {
			tr := &e.Trees[ti]
			if tr.Class != class {
				continue
			}
			var rec func(i int32) float64
			rec = func(i int32) float64 {
				n := &tr.Nodes[i]
				if n.IsLeaf() {
					return tr.Value[i]
				}
				if set>>uint(n.Feature)&1 != 0 {
					return rec(forest.Next(tr, n, row[n.Feature], e.Rule))
				}
				return (tr.Cover[n.Left]*rec(n.Left) + tr.Cover[n.Right]*rec(n.Right)) / tr.Cover[i]
			}
			s += rec(0)
		}
		return s
	}
	fact := func(n int) float64 {
		f := 1.0
		for i := 2; i <= n; i++ {
			f *= float64(i)
		}
		return f
	}
	for c := 0; c < k; c++ {
		vals := make([]float64, 1<<nf)
		for s := range vals {
			vals[s] = value(c, uint(s))
		}
		for i := 0; i < nf; i++ {
			phi := 0.0
			for s := 0; s < 1<<nf; s++ {
				if s>>i&1 != 0 {
					continue
				}
				size := 0
				for b := s; b != 0; b &= b - 1 {
					size++
				}
				w := fact(size) * fact(nf-size-1) / fact(nf)
				phi += w * (vals[s|1<<i] - vals[s])
			}
			out[c*(nf+1)+i] = phi
		}
		out[c*(nf+1)+nf] = e.BaseMargin[c] + vals[0]
	}
	return out
}

// TestAgainstShapleyDefinition compares random trees (repeated features,
// missing values, several classes) with the brute-force Shapley values
// (Shapley 1953; value function of Lundberg, Erion & Lee 2018), through the
// leaf tables and through the per-row evaluation.
func TestAgainstShapleyDefinition(t *testing.T) {
	cases := []struct {
		name                      string
		nf, classes, trees, depth int
		seed                      uint64
	}{
		{"shallow", 3, 1, 4, 2, 1},
		{"deep repeated", 4, 1, 6, 6, 2},
		{"multiclass", 5, 3, 9, 4, 3},
		{"deeper than tables", 7, 1, 3, 10, 4},
	}
	for _, tc := range cases {
		rng := rand.New(rand.NewPCG(tc.seed, 7))
		e := randomEnsemble(rng, tc.nf, tc.classes, tc.trees, tc.depth)
		for _, direct := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s/direct=%v", tc.name, direct), func(t *testing.T) {
				x := newExplainer(t, e, direct)
				got := make([]float64, x.RowLen())
				for r := 0; r < 30; r++ {
					row := make([]float64, tc.nf)
					for j := range row {
						row[j] = float64(rng.IntN(6)) - 0.5
						if rng.IntN(8) == 0 {
							row[j] = math.NaN()
						}
					}
					want := bruteForce(e, row)
					x.Row(got, row)
					for j := range want {
						if !within(got[j], want[j], 1e-10*(1+math.Abs(want[j]))) {
							t.Fatalf("row %v: φ[%d] = %v, want %v", row, j, got[j], want[j])
						}
					}
				}
			})
		}
	}
}

// TestLocalAccuracyAndUnusedFeature checks two properties from Lundberg,
// Erion & Lee (2018): bias + Σφ equals the raw margin (local accuracy), and
// a feature no tree tests gets exactly 0 (missingness). It also checks that
// Rows agrees bit for bit with Row for any worker count.
func TestLocalAccuracyAndUnusedFeature(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	const nf, n = 6, 300
	e := randomEnsemble(rng, nf-1, 2, 20, 5) // feature nf-1 is never tested
	e.FeatureNames = append(e.FeatureNames, "unused")
	e.Index()
	x, err := New(e)
	if err != nil {
		t.Fatal(err)
	}
	cols := make([][]float64, nf)
	for j := range cols {
		cols[j] = make([]float64, n)
		for r := range cols[j] {
			cols[j][r] = rng.Float64()*6 - 1
			if rng.IntN(10) == 0 {
				cols[j][r] = math.NaN()
			}
		}
	}
	margins := make([]float64, n*2)
	e.Margins(margins, cols, n, 1)
	rl := x.RowLen()
	ref := make([]float64, n*rl)
	x.Rows(ref, cols, n, 1)
	for _, workers := range []int{1, 2, 3} {
		t.Run(fmt.Sprintf("workers=%d", workers), func(t *testing.T) {
			got := make([]float64, n*rl)
			x.Rows(got, cols, n, workers)
			row := make([]float64, nf)
			one := make([]float64, rl)
			for r := 0; r < n; r++ {
				for j := range row {
					row[j] = cols[j][r]
				}
				x.Row(one, row)
				for i := range one {
					if math.Float64bits(one[i]) != math.Float64bits(got[r*rl+i]) {
						t.Fatalf("row %d entry %d: Rows %v, Row %v", r, i, got[r*rl+i], one[i])
					}
					if math.Float64bits(ref[r*rl+i]) != math.Float64bits(got[r*rl+i]) {
						t.Fatalf("row %d entry %d differs between 1 and %d workers", r, i, workers)
					}
				}
				for c := 0; c < 2; c++ {
					blk := got[r*rl+c*(nf+1) : r*rl+(c+1)*(nf+1)]
					if blk[nf-1] != 0 {
						t.Fatalf("row %d class %d: unused feature φ = %v, want exactly 0", r, c, blk[nf-1])
					}
					s := 0.0
					for _, v := range blk {
						s += v
					}
					if !within(s, margins[r*2+c], 1e-9) {
						t.Fatalf("row %d class %d: bias+Σφ = %v, margin %v", r, c, s, margins[r*2+c])
					}
				}
			}
		})
	}
}

// TestAbsRows checks AbsRows against |φ| summed over classes from Rows.
func TestAbsRows(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	const nf, n = 4, 150
	e := randomEnsemble(rng, nf, 3, 12, 4)
	x, err := New(e)
	if err != nil {
		t.Fatal(err)
	}
	cols := make([][]float64, nf)
	for j := range cols {
		cols[j] = make([]float64, n)
		for r := range cols[j] {
			cols[j][r] = rng.Float64() * 5
		}
	}
	rl := x.RowLen()
	all := make([]float64, n*rl)
	x.Rows(all, cols, n, 2)
	got := make([]float64, n*nf)
	x.AbsRows(got, cols, n, 2)
	for r := 0; r < n; r++ {
		for j := 0; j < nf; j++ {
			want := 0.0
			for c := 0; c < 3; c++ {
				want += math.Abs(all[r*rl+c*(nf+1)+j])
			}
			if !within(got[r*nf+j], want, 1e-12) {
				t.Fatalf("row %d feature %d: %v, want %v", r, j, got[r*nf+j], want)
			}
		}
	}
}

// TestNewErrors checks that malformed ensembles return errors, not panics.
func TestNewErrors(t *testing.T) {
	good := func() forest.Tree {
		return forest.Tree{
			Nodes: []forest.Node{split(0, 0.5, 1, 2, false), leaf(), leaf()},
			Value: []float64{0, 1, -2},
			Cover: []float64{10, 4, 6},
		}
	}
	cases := []struct {
		name  string
		edit  func(tr *forest.Tree)
		class int
		want  error
	}{
		{"no cover", func(tr *forest.Tree) { tr.Cover = nil }, 0, ErrNoCover},
		{"short cover", func(tr *forest.Tree) { tr.Cover = tr.Cover[:2] }, 0, ErrModel},
		{"zero split cover", func(tr *forest.Tree) { tr.Cover[0] = 0 }, 0, ErrModel},
		{"negative child cover", func(tr *forest.Tree) { tr.Cover[1] = -1 }, 0, ErrModel},
		{"NaN cover", func(tr *forest.Tree) { tr.Cover[2] = math.NaN() }, 0, ErrModel},
		{"child out of range", func(tr *forest.Tree) { tr.Nodes[0].Right = 9 }, 0, ErrModel},
		{"cycle", func(tr *forest.Tree) { tr.Nodes[0].Right = 0 }, 0, ErrModel},
		{"shared child", func(tr *forest.Tree) { tr.Nodes[0].Right = 1 }, 0, ErrModel},
		{"feature out of range", func(tr *forest.Tree) { tr.Nodes[0].Feature = 5 }, 0, ErrModel},
		{"category set out of range", func(tr *forest.Tree) { tr.Nodes[0].Flags |= forest.FlagCategorical }, 0, ErrModel},
		{"class out of range", func(tr *forest.Tree) { tr.Class = 1 }, 0, ErrModel},
		{"short values", func(tr *forest.Tree) { tr.Value = tr.Value[:1] }, 0, ErrModel},
		{"NaN leaf", func(tr *forest.Tree) { tr.Value[1] = math.NaN() }, 0, ErrModel},
		{"no nodes", func(tr *forest.Tree) { *tr = forest.Tree{} }, 0, ErrModel},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tr := good()
			tc.edit(&tr)
			e := ensemble(2, 0, tr)
			if _, err := New(e); !errors.Is(err, tc.want) {
				t.Fatalf("New: %v, want %v", err, tc.want)
			}
		})
	}
	t.Run("too deep", func(t *testing.T) {
		// A chain of MaxDepth+1 splits on one feature, each with a leaf on
		// the right.
		var tr forest.Tree
		for i := 0; i <= MaxDepth; i++ {
			n := int32(len(tr.Nodes))
			tr.Nodes = append(tr.Nodes, split(0, float64(-i), n+2, n+1, false), leaf())
			tr.Value = append(tr.Value, 0, 1)
			tr.Cover = append(tr.Cover, 2, 1)
		}
		tr.Nodes = append(tr.Nodes, leaf())
		tr.Value = append(tr.Value, 1)
		tr.Cover = append(tr.Cover, 1)
		if _, err := New(ensemble(1, 0, tr)); !errors.Is(err, ErrModel) {
			t.Fatalf("New: %v, want ErrModel", err)
		}
		tr.Nodes = tr.Nodes[:2*MaxDepth-1]
		tr.Nodes[2*MaxDepth-2] = leaf() // MaxDepth-1 splits: accepted
		tr.Value, tr.Cover = tr.Value[:2*MaxDepth-1], tr.Cover[:2*MaxDepth-1]
		if _, err := New(ensemble(1, 0, tr)); err != nil {
			t.Fatalf("New: %v", err)
		}
	})
	t.Run("leaf-only tree needs no cover", func(t *testing.T) {
		e := ensemble(1, 0.25, forest.Tree{Nodes: []forest.Node{leaf()}, Value: []float64{2}})
		x, err := New(e)
		if err != nil {
			t.Fatal(err)
		}
		// Bias = base margin + the single leaf value (common practice).
		if b := x.Bias(); !within(b[0], 2.25, 0) {
			t.Fatalf("bias %v, want 2.25", b[0])
		}
	})
	t.Run("nil ensemble", func(t *testing.T) {
		if _, err := New(nil); !errors.Is(err, ErrModel) {
			t.Fatalf("New(nil): %v", err)
		}
	})
}
