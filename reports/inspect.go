package reports

import (
	"fmt"
	"io"

	"splitledger/importance/forest"
)

// ModelSummary is one model's inspect result.
type ModelSummary struct {
	Path    string
	SHA256  string
	Summary forest.Summary
}

type inspectJSON struct {
	Path             string         `json:"path"`
	SHA256           string         `json:"sha256"`
	Format           string         `json:"format"`
	Objective        string         `json:"objective"`
	Task             string         `json:"task"`
	Link             string         `json:"link"`
	SplitRule        string         `json:"split_rule"`
	Classes          int            `json:"classes"`
	Trees            int            `json:"trees"`
	TreesPerClass    []int          `json:"trees_per_class"`
	Leaves           int            `json:"leaves"`
	Splits           int            `json:"splits"`
	CategoricalSplit int            `json:"categorical_splits"`
	DepthMin         Num            `json:"depth_min"`
	DepthMedian      Num            `json:"depth_median"`
	DepthMax         Num            `json:"depth_max"`
	FeaturesDeclared int            `json:"features_declared"`
	FeaturesUsed     int            `json:"features_used"`
	HasStatistics    bool           `json:"has_statistics"`
	SplitCount       map[string]int `json:"split_count"`
}

// InspectJSON writes the summaries as a JSON array
// (schema "splitledger/inspect/v1" wraps it).
func InspectJSON(w io.Writer, models []ModelSummary) error {
	out := struct {
		Schema string        `json:"schema"`
		Models []inspectJSON `json:"models"`
	}{Schema: "splitledger/inspect/v1"}
	for _, m := range models {
		s := m.Summary
		sc := map[string]int{}
		for i, n := range s.FeatureNames {
			sc[n] = s.SplitCount[i]
		}
		out.Models = append(out.Models, inspectJSON{
			Path: m.Path, SHA256: m.SHA256, Format: s.Format, Objective: s.Objective,
			Task: s.Task.String(), Link: s.Link.String(), SplitRule: s.Rule.String(),
			Classes: s.NumClass, Trees: s.Trees, TreesPerClass: s.TreesPerClass,
			Leaves: s.Leaves, Splits: s.Splits, CategoricalSplit: s.CategoricalSplits,
			DepthMin: Num(s.DepthMin), DepthMedian: Num(s.DepthMedian), DepthMax: Num(s.DepthMax),
			FeaturesDeclared: s.FeaturesDeclared, FeaturesUsed: s.FeaturesUsed,
			HasStatistics: s.HasStatistics, SplitCount: sc,
		})
	}
	return writeJSON(w, out)
}

// InspectText writes a human summary of each model; top lists that many
// features by split count.
func InspectText(w io.Writer, models []ModelSummary, top int) error {
	for i, m := range models {
		s := m.Summary
		if i > 0 {
			fmt.Fprintln(w)
		}
		fmt.Fprintf(w, "%s\n", m.Path)
		fmt.Fprintf(w, "  format      %s (sha256 %.12s)\n", s.Format, m.SHA256)
		fmt.Fprintf(w, "  objective   %s (task %s, link %s, split %s)\n", s.Objective, s.Task, s.Link, s.Rule)
		fmt.Fprintf(w, "  classes     %d\n", s.NumClass)
		fmt.Fprintf(w, "  trees       %d", s.Trees)
		if s.NumClass > 1 {
			fmt.Fprintf(w, " (per class %v)", s.TreesPerClass)
		}
		fmt.Fprintln(w)
		fmt.Fprintf(w, "  leaves      %d   splits %d", s.Leaves, s.Splits)
		if s.CategoricalSplits > 0 {
			fmt.Fprintf(w, " (%d categorical)", s.CategoricalSplits)
		}
		fmt.Fprintln(w)
		fmt.Fprintf(w, "  depth       min %s  median %s  max %s\n", fmtNum(s.DepthMin), fmtNum(s.DepthMedian), fmtNum(s.DepthMax))
		fmt.Fprintf(w, "  features    %d declared, %d used\n", s.FeaturesDeclared, s.FeaturesUsed)
		if !s.HasStatistics {
			fmt.Fprintln(w, "  statistics  none (no gain/cover: structure gain and SHAP unavailable)")
		}
		n := min(top, len(s.TopFeatures))
		if n > 0 {
			fmt.Fprintf(w, "  top %d features by split count:\n", n)
			for _, f := range s.TopFeatures[:n] {
				fmt.Fprintf(w, "    %-32s %6d\n", f.Name, f.Splits)
			}
		}
	}
	return nil
}
