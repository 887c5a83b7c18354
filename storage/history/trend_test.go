package history

import (
	"fmt"
	"math"
	"slices"
	"testing"
	"time"
)

// flagRun is a small run on day d (days after an invented Monday) where
// each listed feature has one candidate row carrying the given flags.
func flagRun(d int, flags map[string][]string) Run {
	run := Run{
		ID:      fmt.Sprintf("day%03d", d),
		Time:    time.Date(2031, 1, 6, 6, 0, 0, 0, time.UTC).AddDate(0, 0, d),
		Verdict: VerdictWarn,
	}
	for _, f := range sampleFeatures[:4] {
		run.Rows = append(run.Rows, FeatureRow{Feature: f, Version: VersionCandidate, Measure: "permutation_drop",
			Value: float64(d), Lo: float64(d) - 1, Hi: float64(d) + 1, Share: float64(d) / 100, Flags: flags[f]})
	}
	return run
}

func TestStreak(t *testing.T) {
	collapsed := map[string][]string{"review_score": {"collapsed"}}
	both := map[string][]string{"review_score": {"surged", "collapsed"}}
	none := map[string][]string{}
	other := map[string][]string{"text_match": {"collapsed"}}
	onBaseline := flagRun(35, nil)
	onBaseline.Rows = append(onBaseline.Rows, FeatureRow{Feature: "review_score", Version: VersionBaseline, Measure: "split_count", Flags: []string{"collapsed"}})
	withoutFeature := flagRun(28, collapsed)
	withoutFeature.Rows = slices.DeleteFunc(withoutFeature.Rows, func(r FeatureRow) bool { return r.Feature == "review_score" })

	// Counting rule: common practice (consecutive most recent runs).
	tests := []struct {
		name string
		runs []Run
		flag string
		want int
	}{
		{"no runs", nil, "collapsed", 0},
		{"one run fired", []Run{flagRun(0, collapsed)}, "collapsed", 1},
		{"latest quiet", []Run{flagRun(0, collapsed), flagRun(7, collapsed), flagRun(14, none)}, "collapsed", 0},
		{"last three of five", []Run{flagRun(0, collapsed), flagRun(7, none), flagRun(14, collapsed), flagRun(21, both), flagRun(28, collapsed)}, "collapsed", 3},
		{"unsorted input", []Run{flagRun(28, collapsed), flagRun(14, collapsed), flagRun(7, none), flagRun(21, both), flagRun(0, collapsed)}, "collapsed", 3},
		{"other flag", []Run{flagRun(0, both), flagRun(7, both), flagRun(14, collapsed)}, "surged", 0},
		{"other flag two runs", []Run{flagRun(0, collapsed), flagRun(7, both), flagRun(14, both)}, "surged", 2},
		{"other feature", []Run{flagRun(0, other), flagRun(7, other)}, "collapsed", 0},
		{"feature absent breaks", []Run{flagRun(14, collapsed), flagRun(21, collapsed), withoutFeature, flagRun(35, collapsed)}, "collapsed", 1},
		{"baseline row counts", []Run{flagRun(28, collapsed), onBaseline}, "collapsed", 2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			before := fmt.Sprintf("%v", tt.runs)
			if got := Streak(tt.runs, "review_score", tt.flag); got != tt.want {
				t.Errorf("Streak = %d, want %d", got, tt.want)
			}
			if fmt.Sprintf("%v", tt.runs) != before {
				t.Error("Streak reordered or changed its input")
			}
		})
	}
}

func TestStreakLabel(t *testing.T) {
	// English ordinal suffixes (common practice): 11th-13th are exceptions.
	tests := []struct {
		n    int
		want string
	}{
		{-3, ""}, {0, ""}, {1, "new"},
		{2, "2nd run in a row"}, {3, "3rd run in a row"}, {4, "4th run in a row"},
		{5, "5th run in a row"}, {10, "10th run in a row"}, {11, "11th run in a row"},
		{12, "12th run in a row"}, {13, "13th run in a row"}, {21, "21st run in a row"},
		{22, "22nd run in a row"}, {23, "23rd run in a row"}, {101, "101st run in a row"},
		{111, "111th run in a row"}, {112, "112th run in a row"},
	}
	for _, tt := range tests {
		t.Run(fmt.Sprint(tt.n), func(t *testing.T) {
			if got := StreakLabel(tt.n); got != tt.want {
				t.Errorf("StreakLabel(%d) = %q, want %q", tt.n, got, tt.want)
			}
		})
	}
}

func TestFeatureTrend(t *testing.T) {
	gap := flagRun(14, nil)
	gap.Rows = gap.Rows[:1] // only text_match
	runs := []Run{flagRun(21, map[string][]string{"review_score": {"surged"}}), flagRun(0, nil), gap, flagRun(7, nil)}
	nan := math.NaN()
	// Expected values follow the flagRun construction (common practice).
	want := []TrendPoint{
		{RunID: "day000", Recorded: true, Value: 0, Lo: -1, Hi: 1, Share: 0},
		{RunID: "day007", Recorded: true, Value: 7, Lo: 6, Hi: 8, Share: 0.07},
		{RunID: "day014", Recorded: false, Value: nan, Lo: nan, Hi: nan, Share: nan},
		{RunID: "day021", Recorded: true, Value: 21, Lo: 20, Hi: 22, Share: 0.21, Flags: []string{"surged"}},
	}
	got := FeatureTrend(runs, "review_score", "permutation_drop", VersionCandidate)
	if len(got) != len(want) {
		t.Fatalf("%d points, want %d", len(got), len(want))
	}
	for i, w := range want {
		t.Run(w.RunID, func(t *testing.T) {
			g := got[i]
			if g.RunID != w.RunID || g.Recorded != w.Recorded || !slices.Equal(g.Flags, w.Flags) ||
				!sameFloat(g.Value, w.Value) || !sameFloat(g.Lo, w.Lo) || !sameFloat(g.Hi, w.Hi) || !sameFloat(g.Share, w.Share) {
				t.Errorf("got %+v, want %+v", g, w)
			}
		})
	}
	t.Run("flags are copies", func(t *testing.T) {
		got[3].Flags[0] = "changed"
		if runs[0].Rows[2].Flags[0] != "surged" {
			t.Error("FeatureTrend returned the input's flag slice")
		}
	})
	t.Run("other version", func(t *testing.T) {
		for _, p := range FeatureTrend(runs, "review_score", "permutation_drop", VersionBaseline) {
			if p.Recorded {
				t.Errorf("point %s recorded for a version with no rows", p.RunID)
			}
		}
	})
	t.Run("no runs", func(t *testing.T) {
		if got := FeatureTrend(nil, "review_score", "permutation_drop", VersionCandidate); got != nil {
			t.Errorf("got %v, want nil", got)
		}
	})
}
