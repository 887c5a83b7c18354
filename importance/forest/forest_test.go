package forest

import (
	"math"
	"math/rand/v2"
	"testing"
)

// leaf returns a leaf node.
func leaf() Node { return Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: FlagLeaf} }

// split returns a numeric split node.
func split(feature int32, threshold float64, left, right int32, flags uint8) Node {
	return Node{Feature: feature, Threshold: threshold, Left: left, Right: right, CatSet: -1, Flags: flags}
}

// stump is a one-split tree: feature f < t goes to a leaf worth lo, else hi.
func stump(f int32, t, lo, hi float64, flags uint8) Tree {
	return Tree{
		Nodes: []Node{split(f, t, 1, 2, flags), leaf(), leaf()},
		Value: []float64{0, lo, hi},
	}
}

// smallEnsemble is a hand-made XGBoost-style model over three features:
// tree 0 splits a < 0.5 (missing left), then b < 2 (missing right);
// tree 1 is a stump on c < -1 (missing right).
func smallEnsemble() *Ensemble {
	t0 := Tree{
		Nodes: []Node{
			split(0, 0.5, 1, 2, FlagDefaultLeft),
			leaf(),
			split(1, 2, 3, 4, 0),
			leaf(),
			leaf(),
		},
		Value: []float64{0, 1, 0, 10, 100},
		Gain:  []float64{5, 0, 3, 0, 0},
		Cover: []float64{10, 4, 6, 2, 4},
	}
	t1 := stump(2, -1, 0.25, -0.25, 0)
	return &Ensemble{
		Format: "test", Objective: "reg:squarederror",
		Task: TaskRegression, Link: LinkIdentity, Rule: LessThanFloat32,
		NumClass: 1, BaseMargin: []float64{0.5},
		FeatureNames: []string{"a", "b", "c"},
		Trees:        []Tree{t0, t1},
	}
}

func TestNextXGBoost(t *testing.T) {
	nan := math.NaN()
	tr := stump(0, float64(float32(0.1)), 1, 2, 0)
	trDL := stump(0, 0.5, 1, 2, FlagDefaultLeft)
	for _, c := range []struct {
		name string
		tree *Tree
		x    float64
		want int32
	}{
		// XGBoost 1.7 predictor: float32(x) < float32(threshold) goes left.
		{"below", &tr, 0.05, 1},
		{"above", &tr, 0.2, 2},
		// 0.1 < float32(0.1) = 0.10000000149 in float64, but float32(0.1) is
		// not < itself: XGBoost sends the row right (DESIGN "facts that bite").
		{"on threshold after float32 rounding", &tr, 0.1, 2},
		{"equal goes right", &tr, float64(float32(0.1)), 2},
		// XGBoost: missing follows default_left.
		{"missing default right", &tr, nan, 2},
		{"missing default left", &trDL, nan, 1},
		{"minus infinity", &tr, math.Inf(-1), 1},
		{"plus infinity", &tr, math.Inf(1), 2},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := Next(c.tree, &c.tree.Nodes[0], c.x, LessThanFloat32); got != c.want {
				t.Errorf("Next(%v) = %d, want %d", c.x, got, c.want)
			}
		})
	}
}

func TestNextCategorical(t *testing.T) {
	// Set {1, 4, 33}: bit c of word c/32.
	set := []uint32{1<<1 | 1<<4, 1 << 1}
	mk := func(flags uint8) Tree {
		return Tree{
			Nodes:   []Node{{Feature: 0, Left: 1, Right: 2, CatSet: 0, Flags: FlagCategorical | flags}, leaf(), leaf()},
			Value:   []float64{0, 1, 2},
			CatSets: [][]uint32{set},
		}
	}
	xgb, lgb := mk(0), mk(FlagInSetLeft)
	for _, c := range []struct {
		name      string
		x         float64
		xgb, lgbm int32
	}{
		// XGBoost 1.7: categories in the set go right, others left
		// (checked against XGBoost 1.7.4 in storage/treefile's
		// categorical fixtures). FlagInSetLeft mirrors it.
		{"in set", 4, 2, 1},
		{"in second word", 33, 2, 1},
		{"not in set", 2, 1, 2},
		{"beyond the bitset", 64, 1, 2},
		{"negative", -1, 1, 2},
		{"fraction truncated", 4.7, 2, 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := Next(&xgb, &xgb.Nodes[0], c.x, LessThanFloat32); got != c.xgb {
				t.Errorf("in-set right: Next(%v) = %d, want %d", c.x, got, c.xgb)
			}
			if got := Next(&lgb, &lgb.Nodes[0], c.x, LessEqualFloat64); got != c.lgbm {
				t.Errorf("in-set left: Next(%v) = %d, want %d", c.x, got, c.lgbm)
			}
		})
	}
}

func TestNextLessEqualFloat64(t *testing.T) {
	tr := stump(0, 0.1, 1, 2, 0)
	zero := stump(0, 0.5, 1, 2, FlagNaNAsZero|FlagZeroIsMissing)
	none := stump(0, -0.5, 1, 2, FlagNaNAsZero)
	for _, c := range []struct {
		name string
		tree *Tree
		x    float64
		want int32
	}{
		// forest.Rule LessEqualFloat64: x <= threshold in float64, so the
		// float32 rounding of 0.1 does not apply (common practice, see the
		// package comment).
		{"equal goes left", &tr, 0.1, 1},
		{"just above", &tr, math.Nextafter(0.1, 1), 2},
		// NaN as zero, then zero is missing: default right.
		{"zero missing", &zero, 0, 2},
		{"nan as zero then missing", &zero, math.NaN(), 2},
		{"tiny counts as zero", &zero, 1e-36, 2},
		// NaN becomes 0, then 0 <= -0.5 is false.
		{"nan as zero", &none, math.NaN(), 2},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := Next(c.tree, &c.tree.Nodes[0], c.x, LessEqualFloat64); got != c.want {
				t.Errorf("Next(%v) = %d, want %d", c.x, got, c.want)
			}
		})
	}
}

func TestMarginRow(t *testing.T) {
	e := smallEnsemble()
	nan := math.NaN()
	for _, c := range []struct {
		name string
		x    []float64
		want float64
	}{
		// Hand-computed: base 0.5 + tree 0 leaf + tree 1 leaf.
		{"left then c right", []float64{0, 0, 0}, 0.5 + 1 - 0.25},
		{"b left", []float64{1, 1, -2}, 0.5 + 10 + 0.25},
		{"b right", []float64{1, 3, -2}, 0.5 + 100 + 0.25},
		{"all missing", []float64{nan, nan, nan}, 0.5 + 1 - 0.25},
		{"b missing goes right", []float64{1, nan, nan}, 0.5 + 100 - 0.25},
	} {
		t.Run(c.name, func(t *testing.T) {
			dst := []float64{0}
			e.MarginRow(dst, c.x)
			if !(math.Abs(dst[0]-c.want) <= 1e-12) {
				t.Errorf("margin %v, want %v", dst[0], c.want)
			}
		})
	}
}

// randomColumns returns n rows of nf features, column-major, with some NaN.
func randomColumns(rng *rand.Rand, nf, n int) [][]float64 {
	cols := make([][]float64, nf)
	for j := range cols {
		cols[j] = make([]float64, n)
		for r := range cols[j] {
			if rng.IntN(10) == 0 {
				cols[j][r] = math.NaN()
			} else {
				cols[j][r] = rng.NormFloat64()
			}
		}
	}
	return cols
}

// mixSplits turns some splits of e into categorical splits (half with
// in-set-left) and gives others LightGBM missing-value flags, so every path
// of Next is exercised; small integer values in the columns hit the sets.
func mixSplits(rng *rand.Rand, e *Ensemble) {
	for ti := range e.Trees {
		t := &e.Trees[ti]
		for i := range t.Nodes {
			nd := &t.Nodes[i]
			if nd.IsLeaf() {
				continue
			}
			switch rng.IntN(6) {
			case 0:
				nd.Flags |= FlagCategorical
				if rng.IntN(2) == 0 {
					nd.Flags |= FlagInSetLeft
				}
				nd.CatSet = int32(len(t.CatSets))
				t.CatSets = append(t.CatSets, []uint32{rng.Uint32()})
			case 1:
				nd.Flags |= FlagNaNAsZero
			case 2:
				nd.Flags |= FlagNaNAsZero | FlagZeroIsMissing
			}
		}
	}
}

func TestMarginsMatchesMarginRow(t *testing.T) {
	// Self-consistency (common practice): the chunked, lockstep column-major
	// scorer must equal the row scorer bit for bit, for any worker count,
	// both split rules and every kind of node.
	for _, c := range []struct {
		name  string
		rule  Rule
		mixed bool
		rows  int
	}{
		{"float32 numeric", LessThanFloat32, false, 1500},
		{"float32 mixed", LessThanFloat32, true, 1500},
		{"float64 mixed", LessEqualFloat64, true, 1500},
		{"fewer rows than a lane group", LessThanFloat32, true, 5},
		{"partial last group", LessEqualFloat64, true, 1029},
	} {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1, 2))
			e := syntheticEnsemble(rng, 20, 4, 6, 3)
			e.Rule = c.rule
			if c.mixed {
				mixSplits(rng, e)
			}
			if err := e.Validate(0); err != nil {
				t.Fatal(err)
			}
			n := c.rows
			cols := randomColumns(rng, 6, n)
			for r := 0; r < n; r += 3 {
				cols[r%6][r] = float64(rng.IntN(40) - 4) // category codes, zeros, negatives
			}
			want := make([]float64, n*e.NumClass)
			row := make([]float64, 6)
			for r := 0; r < n; r++ {
				for j := range row {
					row[j] = cols[j][r]
				}
				e.MarginRow(want[r*e.NumClass:(r+1)*e.NumClass], row)
			}
			for _, workers := range []int{1, 2, 0} {
				got := make([]float64, n*e.NumClass)
				e.Margins(got, cols, n, workers)
				for i := range got {
					if !(got[i] == want[i]) {
						t.Fatalf("workers %d: dst[%d] = %v, MarginRow %v", workers, i, got[i], want[i])
					}
				}
			}
		})
	}
}

func TestMarginsEmpty(t *testing.T) {
	e := smallEnsemble()
	e.Margins(nil, [][]float64{nil, nil, nil}, 0, 0) // no rows: nothing to do, no panic
}

func TestTransform(t *testing.T) {
	for _, c := range []struct {
		name string
		link Link
		k    int
		in   []float64
		want []float64
	}{
		// SciPy 1.10.1 scipy.special.expit.
		{"logistic", LinkLogistic, 1, []float64{-2, 0, 3.5}, []float64{0.11920292202211755, 0.5, 0.97068776924864364}},
		// NumPy exp (SciPy 1.10.1 stack).
		{"exp", LinkExp, 1, []float64{-1, 0.5}, []float64{0.36787944117144239, 1.6487212707001282}},
		// SciPy 1.10.1 scipy.special.softmax, per row; the second row would
		// overflow without subtracting the row maximum.
		{"softmax", LinkSoftmax, 3, []float64{1, 2, 3, 1000, 1000, -1000},
			[]float64{0.090030573170380435, 0.24472847105479767, 0.66524095577482178, 0.5, 0.5, 0}},
		{"identity", LinkIdentity, 1, []float64{-3, 7}, []float64{-3, 7}},
	} {
		t.Run(c.name, func(t *testing.T) {
			e := &Ensemble{Link: c.link, NumClass: c.k}
			m := append([]float64(nil), c.in...)
			e.Transform(m)
			for i := range m {
				if !(math.Abs(m[i]-c.want[i]) <= 1e-15) {
					t.Errorf("[%d] = %.17g, want %.17g", i, m[i], c.want[i])
				}
			}
		})
	}
}

func TestIndex(t *testing.T) {
	e := smallEnsemble()
	e.Index()
	want := [][]int32{{0}, {0}, {1}}
	for j := range want {
		if len(e.ByFeature[j]) != len(want[j]) || (len(want[j]) > 0 && e.ByFeature[j][0] != want[j][0]) {
			t.Errorf("ByFeature[%d] = %v, want %v", j, e.ByFeature[j], want[j])
		}
	}
}

func TestStrings(t *testing.T) {
	// Every named value has a name; unknown values print their number.
	for _, c := range []struct{ got, want string }{
		{LessThanFloat32.String(), "x < t (float32)"},
		{LessEqualFloat64.String(), "x <= t (float64)"},
		{Rule(9).String(), "rule(9)"},
		{TaskRegression.String(), "regression"},
		{TaskBinary.String(), "binary"},
		{TaskRanking.String(), "ranking"},
		{TaskMulticlass.String(), "multiclass"},
		{Task(0).String(), "task(0)"},
		{LinkIdentity.String(), "identity"},
		{LinkLogistic.String(), "logistic"},
		{LinkSoftmax.String(), "softmax"},
		{LinkExp.String(), "exp"},
		{Link(7).String(), "link(7)"},
	} {
		if c.got != c.want {
			t.Errorf("%q, want %q", c.got, c.want)
		}
	}
}
