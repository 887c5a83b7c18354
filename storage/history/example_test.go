package history_test

import (
	"fmt"
	"log"
	"math"
	"os"
	"time"

	"splitledger/storage/history"
)

// Record three weekly runs, then ask how long review_score has been
// collapsing and how its permutation-drop share moved.
func Example() {
	dir, err := os.MkdirTemp("", "history-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)

	monday := time.Date(2031, 4, 7, 6, 0, 0, 0, time.UTC)
	shares := []float64{0.31, 0.12, 0.04}
	for week, share := range shares {
		at := monday.AddDate(0, 0, 7*week)
		run := history.Run{
			ID: fmt.Sprintf("week-%d", week+1), Time: at, Metric: "ndcg@10", Seed: 1, Replicates: 200,
			Verdict: history.VerdictWarn,
			Rows: []history.FeatureRow{{
				Feature: "review_score", Version: history.VersionCandidate, Measure: "permutation_drop",
				Value: share / 10, Lo: math.NaN(), Hi: math.NaN(), Share: share,
			}},
		}
		if week > 0 {
			run.Rows[0].Flags = []string{"collapsed"}
		}
		if _, err := history.Append(dir, run); err != nil {
			log.Fatal(err)
		}
	}

	runs, warnings, err := history.Load(dir)
	if err != nil || len(warnings) > 0 {
		log.Fatal(err, warnings)
	}
	n := history.Streak(runs, "review_score", "collapsed")
	fmt.Println("collapsed:", history.StreakLabel(n))
	var line []float64
	for _, p := range history.FeatureTrend(runs, "review_score", "permutation_drop", history.VersionCandidate) {
		line = append(line, p.Share)
	}
	fmt.Println("share:", history.Sparkline(line), history.SparklineASCII(line))
	// Output:
	// collapsed: 2nd run in a row
	// share: █▃▁ #-_
}
