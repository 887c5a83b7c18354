package importance

import "splitledger/importance/forest"

// Structure holds the measures read from the model file alone, per feature,
// defined as the training libraries define them:
//
//   - SplitCount: internal nodes that test the feature (XGBoost
//     get_score "weight", LightGBM feature_importance "split", which
//     counts only splits with positive gain).
//   - TotalGain: sum of the split gain (loss reduction) of those nodes
//     (XGBoost "total_gain", LightGBM "gain").
//   - MeanGain: TotalGain / SplitCount (XGBoost "gain"); 0 when unused.
//   - TotalCover: sum of the node cover (XGBoost sum_hessian "total_cover";
//     LightGBM internal_count).
//   - MeanCover: TotalCover / SplitCount (XGBoost "cover"); 0 when unused.
//
// Unused features are present with zeros (XGBoost's get_score omits them).
// Gain and cover are NaN for every feature when the file carries no
// statistics.
type Structure struct {
	SplitCount []int
	TotalGain  []float64
	MeanGain   []float64
	TotalCover []float64
	MeanCover  []float64
}

// MeasureStructure computes the structure measures of e, indexed by feature.
func MeasureStructure(e *forest.Ensemble) Structure {
	f := e.NumFeatures()
	s := Structure{
		SplitCount: make([]int, f),
		TotalGain:  make([]float64, f),
		MeanGain:   make([]float64, f),
		TotalCover: make([]float64, f),
		MeanCover:  make([]float64, f),
	}
	hasGain, hasCover := true, true
	for ti := range e.Trees {
		t := &e.Trees[ti]
		if t.Gain == nil {
			hasGain = false
		}
		if t.Cover == nil {
			hasCover = false
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsLeaf() {
				continue
			}
			if e.Format == "lightgbm-text" && t.Gain != nil && !(t.Gain[i] > 0) {
				continue // LightGBM's feature importance skips splits without positive gain
			}
			s.SplitCount[n.Feature]++
			if t.Gain != nil {
				s.TotalGain[n.Feature] += t.Gain[i]
			}
			if t.Cover != nil {
				s.TotalCover[n.Feature] += t.Cover[i]
			}
		}
	}
	for j := 0; j < f; j++ {
		if c := s.SplitCount[j]; c > 0 {
			s.MeanGain[j] = s.TotalGain[j] / float64(c)
			s.MeanCover[j] = s.TotalCover[j] / float64(c)
		}
		if !hasGain {
			s.TotalGain[j], s.MeanGain[j] = nan, nan
		}
		if !hasCover {
			s.TotalCover[j], s.MeanCover[j] = nan, nan
		}
	}
	return s
}
