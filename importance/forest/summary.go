package forest

import (
	"math"
	"sort"
)

// Summary describes an ensemble's shape for the inspect command. Counts
// cover the nodes reachable from each root (XGBoost keeps pruned nodes in its
// arrays; they are not part of the model).
type Summary struct {
	// Format, Objective, Task, Link and Rule are copied from the ensemble.
	Format    string
	Objective string
	Task      Task
	Link      Link
	Rule      Rule
	// NumClass is the number of outputs per row.
	NumClass int
	// Trees is the number of trees.
	Trees int
	// TreesPerClass counts the trees adding to each output (len NumClass).
	TreesPerClass []int
	// Leaves and Splits count reachable leaves and internal nodes over all
	// trees; CategoricalSplits counts the category-set splits among Splits.
	Leaves            int
	Splits            int
	CategoricalSplits int
	// DepthMin, DepthMedian and DepthMax summarise tree depth, the number of
	// edges on the longest root-to-leaf path (a single-leaf tree has depth
	// 0). DepthMedian is the mean of the two middle depths for an even
	// number of trees. With no trees the three are NaN.
	DepthMin, DepthMedian, DepthMax float64
	// FeaturesDeclared is the number of declared features; FeaturesUsed the
	// number with at least one split.
	FeaturesDeclared int
	FeaturesUsed     int
	// FeatureNames is a copy of the declared names (len FeaturesDeclared).
	FeatureNames []string
	// SplitCount is the number of splits on each declared feature, zeros
	// included (len FeaturesDeclared); XGBoost calls it "weight".
	SplitCount []int
	// TopFeatures lists the used features by decreasing split count, ties
	// broken by feature index; unused features are left out.
	TopFeatures []FeatureSplits
	// HasStatistics reports whether every tree carries gain and cover.
	HasStatistics bool
}

// FeatureSplits is one feature's split count.
type FeatureSplits struct {
	// Feature is the feature index; Name its declared name.
	Feature int
	Name    string
	// Splits is the number of internal nodes testing the feature.
	Splits int
}

// Summarize describes e. It walks each tree from its root, so unreachable
// nodes are ignored; e must have passed Validate (Summarize panics on child
// indexes out of range, as any walk would). e is not modified.
func Summarize(e *Ensemble) Summary {
	nf := e.NumFeatures()
	s := Summary{
		Format:           e.Format,
		Objective:        e.Objective,
		Task:             e.Task,
		Link:             e.Link,
		Rule:             e.Rule,
		NumClass:         e.NumClass,
		Trees:            len(e.Trees),
		TreesPerClass:    make([]int, max(e.NumClass, 0)),
		FeaturesDeclared: nf,
		FeatureNames:     append([]string(nil), e.FeatureNames...),
		SplitCount:       make([]int, nf),
		HasStatistics:    len(e.Trees) > 0,
	}
	depths := make([]int, len(e.Trees))
	var stack []nodeDepth
	for ti := range e.Trees {
		t := &e.Trees[ti]
		if t.Class >= 0 && t.Class < len(s.TreesPerClass) {
			s.TreesPerClass[t.Class]++
		}
		if t.Gain == nil || t.Cover == nil {
			s.HasStatistics = false
		}
		if len(t.Nodes) == 0 {
			continue
		}
		stack = append(stack[:0], nodeDepth{0, 0})
		for len(stack) > 0 {
			top := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			n := &t.Nodes[top.node]
			if n.IsLeaf() {
				s.Leaves++
				depths[ti] = max(depths[ti], top.depth)
				continue
			}
			s.Splits++
			if n.Flags&FlagCategorical != 0 {
				s.CategoricalSplits++
			}
			if n.Feature >= 0 && int(n.Feature) < nf {
				s.SplitCount[n.Feature]++
			}
			stack = append(stack, nodeDepth{n.Left, top.depth + 1}, nodeDepth{n.Right, top.depth + 1})
		}
	}
	s.DepthMin, s.DepthMedian, s.DepthMax = depthSummary(depths)
	for j, c := range s.SplitCount {
		if c > 0 {
			s.FeaturesUsed++
			s.TopFeatures = append(s.TopFeatures, FeatureSplits{Feature: j, Name: e.FeatureNames[j], Splits: c})
		}
	}
	sort.SliceStable(s.TopFeatures, func(a, b int) bool {
		return s.TopFeatures[a].Splits > s.TopFeatures[b].Splits
	})
	return s
}

// depthSummary returns the minimum, median and maximum of depths (NaN for
// none). It sorts depths in place.
func depthSummary(depths []int) (lo, med, hi float64) {
	if len(depths) == 0 {
		return math.NaN(), math.NaN(), math.NaN()
	}
	sort.Ints(depths)
	m := len(depths) / 2
	med = float64(depths[m])
	if len(depths)%2 == 0 {
		med = float64(depths[m-1]+depths[m]) / 2
	}
	return float64(depths[0]), med, float64(depths[len(depths)-1])
}
