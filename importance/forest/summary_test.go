package forest

import (
	"math"
	"reflect"
	"testing"
)

func TestSummarize(t *testing.T) {
	// Hand-counted on smallEnsemble (common practice): tree 0 has splits on
	// a and b, three leaves, depth 2; tree 1 one split on c, two leaves,
	// depth 1. XGBoost 1.7.4's get_score("weight") counts splits the same
	// way; storage/treefile checks that on the reference fixtures.
	e := smallEnsemble()
	s := Summarize(e)
	if s.Trees != 2 || s.Leaves != 5 || s.Splits != 3 || s.CategoricalSplits != 0 {
		t.Errorf("trees %d leaves %d splits %d categorical %d, want 2 5 3 0", s.Trees, s.Leaves, s.Splits, s.CategoricalSplits)
	}
	if s.DepthMin != 1 || s.DepthMedian != 1.5 || s.DepthMax != 2 {
		t.Errorf("depth min/median/max %v/%v/%v, want 1/1.5/2", s.DepthMin, s.DepthMedian, s.DepthMax)
	}
	if !reflect.DeepEqual(s.TreesPerClass, []int{2}) {
		t.Errorf("trees per class %v, want [2]", s.TreesPerClass)
	}
	if s.FeaturesDeclared != 3 || s.FeaturesUsed != 3 {
		t.Errorf("features declared %d used %d, want 3 3", s.FeaturesDeclared, s.FeaturesUsed)
	}
	if !reflect.DeepEqual(s.SplitCount, []int{1, 1, 1}) {
		t.Errorf("split count %v, want [1 1 1]", s.SplitCount)
	}
	if s.HasStatistics {
		t.Errorf("tree 1 has no gain or cover; HasStatistics should be false")
	}
	if s.Task != TaskRegression || s.Link != LinkIdentity || s.Rule != LessThanFloat32 || s.Objective != "reg:squarederror" {
		t.Errorf("semantics not copied: %+v", s)
	}
}

func TestSummarizeTopFeatures(t *testing.T) {
	e := smallEnsemble()
	e.FeatureNames = append(e.FeatureNames, "unused")
	// A third tree splitting on c twice and a categorical split on b.
	e.Trees = append(e.Trees, Tree{
		Nodes: []Node{
			split(2, 0, 1, 2, 0),
			split(2, -1, 3, 4, 0),
			{Feature: 1, Left: 5, Right: 6, CatSet: 0, Flags: FlagCategorical},
			leaf(), leaf(), leaf(), leaf(),
			split(0, 0, 0, 0, 0), // unreachable: not counted
		},
		Value:   make([]float64, 8),
		CatSets: [][]uint32{{1}},
	})
	s := Summarize(e)
	// Hand-counted: c 1+2 = 3, b 1+1 = 2, a 1; ties by index.
	want := []FeatureSplits{{2, "c", 3}, {1, "b", 2}, {0, "a", 1}}
	if !reflect.DeepEqual(s.TopFeatures, want) {
		t.Errorf("top features %v, want %v", s.TopFeatures, want)
	}
	if !reflect.DeepEqual(s.SplitCount, []int{1, 2, 3, 0}) {
		t.Errorf("split count %v, want [1 2 3 0] (unused feature included)", s.SplitCount)
	}
	if s.FeaturesUsed != 3 || s.FeaturesDeclared != 4 || s.CategoricalSplits != 1 {
		t.Errorf("used %d declared %d categorical %d, want 3 4 1", s.FeaturesUsed, s.FeaturesDeclared, s.CategoricalSplits)
	}
	if s.DepthMin != 1 || s.DepthMedian != 2 || s.DepthMax != 2 {
		t.Errorf("depth %v/%v/%v, want 1/2/2", s.DepthMin, s.DepthMedian, s.DepthMax)
	}
}

func TestSummarizeEmpty(t *testing.T) {
	// No trees: counts are zero and depths are undefined (NaN).
	e := &Ensemble{NumClass: 2, FeatureNames: []string{"a"}}
	s := Summarize(e)
	if s.Trees != 0 || s.Leaves != 0 || !reflect.DeepEqual(s.TreesPerClass, []int{0, 0}) || s.HasStatistics {
		t.Errorf("empty summary %+v", s)
	}
	if !math.IsNaN(s.DepthMin) || !math.IsNaN(s.DepthMedian) || !math.IsNaN(s.DepthMax) {
		t.Errorf("depths %v/%v/%v, want NaN", s.DepthMin, s.DepthMedian, s.DepthMax)
	}
	if len(s.TopFeatures) != 0 || !reflect.DeepEqual(s.SplitCount, []int{0}) {
		t.Errorf("top %v split count %v", s.TopFeatures, s.SplitCount)
	}
}
