package importance

import (
	"math"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
)

// handLeaf and handSplit build nodes of hand-made trees.
func handLeaf() forest.Node {
	return forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
}

func handSplit(f int32, threshold float64, left, right int32, defaultLeft bool) forest.Node {
	n := forest.Node{Feature: f, Threshold: threshold, Left: left, Right: right, CatSet: -1}
	if defaultLeft {
		n.Flags |= forest.FlagDefaultLeft
	}
	return n
}

// handEnsemble is the two-tree model worked out below, under the given
// split rule:
//
//	tree A: f0 < 1.5 (missing left)  -> 1.0 | -1.0
//	tree B: f1 < 0   (missing right) -> [f0 < 2.0 (missing right) -> 0.5 | 0.0] | -0.5
//
// (with LessEqualFloat64 read "<" as "<=").
func handEnsemble(rule forest.Rule) *forest.Ensemble {
	a := forest.Tree{
		Nodes: []forest.Node{handSplit(0, 1.5, 1, 2, true), handLeaf(), handLeaf()},
		Value: []float64{0, 1.0, -1.0},
	}
	b := forest.Tree{
		Nodes: []forest.Node{handSplit(1, 0, 1, 2, false), handSplit(0, 2.0, 3, 4, false), handLeaf(), handLeaf(), handLeaf()},
		Value: []float64{0, 0, -0.5, 0.5, 0.0},
	}
	e := &forest.Ensemble{
		Format: "hand", Task: forest.TaskRegression, Link: forest.LinkIdentity, Rule: rule,
		NumClass: 1, BaseMargin: []float64{0}, FeatureNames: []string{"f0", "f1"},
		Trees: []forest.Tree{a, b},
	}
	e.Index()
	return e
}

// handFrame holds the four rows (f0, f1, label):
//
//	r0 (0.5, -1, 1)   r1 (1.5, -2, 0)   r2 (2.5, 1, -1)   r3 (NaN, -3, 2)
//
// Medians over the present values: f0 1.5 (of 0.5 1.5 2.5), f1 -1.5 (mean
// of -2 and -1).
func handFrame() *frame.Frame {
	nan := math.NaN()
	return &frame.Frame{
		Names:          []string{"f0", "f1"},
		Columns:        [][]float64{{0.5, 1.5, 2.5, nan}, {-1, -2, 1, -3}},
		Label:          []float64{1, 0, -1, 2},
		Rows:           4,
		Missing:        []int{1, 0},
		SampleFraction: 1,
	}
}

// TestDropsHandWorked checks missing-break, freeze and permutation drops on
// a tiny model against values worked out by hand from the definitions in
// DESIGN.md (missing-break: every row takes the default branch; freeze: the
// feature set to its median; permutation: the exact expectation, each row
// taking every row's value with weight 1/4).
//
// Margins, XGBoost rule (x < t), rows r0..r3:
//
//	own:          1.5  -0.5  -1.5   1.0   (r3: f0 missing goes left in A, right in B)
//	f0 missing:   1.0   1.0   0.5   1.0   |Δ| 0.5 1.5 2.0 0   -> mean 1.0
//	f0 = 1.5:    -0.5  -0.5  -1.5  -0.5   |Δ| 2.0 0 0 1.5     -> mean 0.875 (1.5 < 1.5 is false)
//	f1 missing:   0.5  -1.5  -1.5   0.5   |Δ| 1.0 1.0 0 0.5   -> mean 0.625
//	f1 = -1.5:    1.5  -0.5  -1.0   1.0   |Δ| 0 0 0.5 0       -> mean 0.125
//
// Permutation, mean |Δ|: f0's value classes [<1.5], [1.5, 2), [>=2],
// missing, one row each. Rows with f1 < 0 score 1.5, -0.5, -1.0, 1.0 over
// those classes, r2 (f1 >= 0) scores 0.5, -1.5, -1.5, 0.5:
// r0 (0+2+2.5+0.5)/4 = 1.25, r1 (2+0+0.5+1.5)/4 = 1, r2 (2+0+0+2)/4 = 1,
// r3 (0.5+1.5+2+0)/4 = 1 -> mean 1.0625. f1 < 0 for three rows: a row
// going left moves by tree B's -0.5 minus its left value with chance 1/4
// (r0, r1: 1.0; r3: 0.5), r2 moves by +0.5 with chance 3/4:
// (0.25 + 0.25 + 0.375 + 0.125)/4 = 0.25.
//
// RMSE (labels 1, 0, -1, 2): own squared errors 0.25 0.25 0.25 1 -> MSE
// 0.4375. f0 missing: 0 1 2.25 1 -> 1.0625. f0 = 1.5: 2.25 0.25 0.25 6.25
// -> 2.25. f1 missing: 0.25 2.25 0.25 2.25 -> 1.25. f1 = -1.5: 0.25 0.25
// 0 1 -> 0.375 (freezing f1 helps on these rows: a negative drop).
//
// LightGBM rule (x <= t): own 1.5 1.5 -1.5 1.0 (r1: 1.5 <= 1.5 goes left).
// f0 missing: 1.0 1.0 0.5 1.0, |Δ| 0.5 0.5 2.0 0 -> 0.75. f0 = 1.5:
// 1.5 1.5 0.5 1.5, |Δ| 0 0 2.0 0.5 -> 0.625.
func TestDropsHandWorked(t *testing.T) {
	mse0 := 0.4375
	cases := []struct {
		name    string
		rule    forest.Rule
		metric  string
		feature int
		measure TrafficMeasure
		want    float64 // worked out by hand above
	}{
		{"xgboost/mad/f0/missing-break", forest.LessThanFloat32, "mean_abs_delta", 0, MissingBreakDrop, 1.0},
		{"xgboost/mad/f0/freeze on threshold", forest.LessThanFloat32, "mean_abs_delta", 0, FreezeDrop, 0.875},
		{"xgboost/mad/f0/permutation", forest.LessThanFloat32, "mean_abs_delta", 0, PermutationDrop, 1.0625},
		{"xgboost/mad/f1/missing-break", forest.LessThanFloat32, "mean_abs_delta", 1, MissingBreakDrop, 0.625},
		{"xgboost/mad/f1/freeze", forest.LessThanFloat32, "mean_abs_delta", 1, FreezeDrop, 0.125},
		{"xgboost/mad/f1/permutation", forest.LessThanFloat32, "mean_abs_delta", 1, PermutationDrop, 0.25},
		{"xgboost/rmse/f0/missing-break", forest.LessThanFloat32, "rmse", 0, MissingBreakDrop, math.Sqrt(1.0625) - math.Sqrt(mse0)},
		{"xgboost/rmse/f0/freeze", forest.LessThanFloat32, "rmse", 0, FreezeDrop, 1.5 - math.Sqrt(mse0)},
		{"xgboost/rmse/f1/missing-break", forest.LessThanFloat32, "rmse", 1, MissingBreakDrop, math.Sqrt(1.25) - math.Sqrt(mse0)},
		{"xgboost/rmse/f1/freeze helps", forest.LessThanFloat32, "rmse", 1, FreezeDrop, math.Sqrt(0.375) - math.Sqrt(mse0)},
		{"lightgbm/mad/f0/missing-break", forest.LessEqualFloat64, "mean_abs_delta", 0, MissingBreakDrop, 0.75},
		{"lightgbm/mad/f0/freeze on threshold", forest.LessEqualFloat64, "mean_abs_delta", 0, FreezeDrop, 0.625},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			e := handEnsemble(tc.rule)
			f := handFrame()
			tab, err := MeasureModel(e, "hand", f, Config{Metric: tc.metric, Replicates: 5})
			if err != nil {
				t.Fatal(err)
			}
			if tc.metric == "rmse" && !within(tab.Quality.Value, math.Sqrt(mse0), 1e-12) {
				t.Errorf("RMSE %.12g, want sqrt(0.4375)", tab.Quality.Value)
			}
			got := tab.Features[tc.feature].Traffic[tc.measure].Value
			if !within(got, tc.want, 1e-12) {
				t.Errorf("%s of %s: %.12g, worked by hand %.12g", tc.measure, e.FeatureNames[tc.feature], got, tc.want)
			}
			// The input must not be touched.
			if g := handFrame(); f.Columns[0][0] != g.Columns[0][0] || f.Columns[1][2] != g.Columns[1][2] || !math.IsNaN(f.Columns[0][3]) {
				t.Errorf("frame changed")
			}
		})
	}
}
