package history

import (
	"math"
	"slices"
	"sort"
	"strconv"
	"time"
)

// TrendPoint is one run's value of a feature's measure.
type TrendPoint struct {
	RunID string
	Time  time.Time
	// Recorded is false when the run has no row for the feature, measure and
	// version (the feature was absent, or the run measured other things);
	// the numbers are then NaN and Flags nil, so a Sparkline shows a gap.
	Recorded             bool
	Value, Lo, Hi, Share float64
	// Flags fired for the feature in that run, as recorded on the row.
	Flags []string
}

// FeatureTrend returns one point per run, in time order (then by ID), for
// the row matching feature, measure and version exactly. runs need not be
// sorted and are not modified; the caller picks which runs belong to one
// series (for example, by candidate name). Empty runs give nil.
func FeatureTrend(runs []Run, feature, measure, version string) []TrendPoint {
	if len(runs) == 0 {
		return nil
	}
	points := make([]TrendPoint, 0, len(runs))
	for _, i := range timeOrder(runs) {
		run := &runs[i]
		p := TrendPoint{RunID: run.ID, Time: run.Time, Value: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), Share: math.NaN()}
		for _, row := range run.Rows {
			if row.Feature == feature && row.Measure == measure && row.Version == version {
				p.Recorded = true
				p.Value, p.Lo, p.Hi, p.Share = row.Value, row.Lo, row.Hi, row.Share
				p.Flags = slices.Clone(row.Flags)
				break
			}
		}
		points = append(points, p)
	}
	return points
}

// Streak counts how many consecutive runs, going back from the most recent
// one in runs, fired flag for feature (on any of its rows, either version).
// It is 0 when the most recent run did not fire it or runs is empty; a run
// without the feature breaks the streak. Streak counts the current run only
// if it is in runs: call it after Append and Load, or pass the loaded runs
// with the current run added. runs need not be sorted and are not modified.
func Streak(runs []Run, feature, flag string) int {
	order := timeOrder(runs)
	n := 0
	for k := len(order) - 1; k >= 0; k-- {
		if !fired(&runs[order[k]], feature, flag) {
			break
		}
		n++
	}
	return n
}

func fired(run *Run, feature, flag string) bool {
	for _, row := range run.Rows {
		if row.Feature == feature && slices.Contains(row.Flags, flag) {
			return true
		}
	}
	return false
}

// StreakLabel words a Streak count for reports: "new" for 1, "2nd run in a
// row", "3rd run in a row", "11th run in a row", "21st run in a row" and so
// on, and "" for 0 or less. It says "run" rather than "week" because
// nothing forces runs to be weekly.
func StreakLabel(n int) string {
	switch {
	case n <= 0:
		return ""
	case n == 1:
		return "new"
	}
	return ordinal(n) + " run in a row"
}

// ordinal writes 1st, 2nd, 3rd, 4th, ..., 11th, 12th, 13th, ..., 21st.
func ordinal(n int) string {
	suffix := "th"
	switch n % 100 {
	case 11, 12, 13:
	default:
		switch n % 10 {
		case 1:
			suffix = "st"
		case 2:
			suffix = "nd"
		case 3:
			suffix = "rd"
		}
	}
	return strconv.Itoa(n) + suffix
}

// timeOrder returns the indexes of runs sorted by Time, then ID.
func timeOrder(runs []Run) []int {
	order := make([]int, len(runs))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool {
		ra, rb := &runs[order[a]], &runs[order[b]]
		if !ra.Time.Equal(rb.Time) {
			return ra.Time.Before(rb.Time)
		}
		return ra.ID < rb.ID
	})
	return order
}
