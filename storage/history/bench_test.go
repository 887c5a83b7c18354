package history

import (
	"fmt"
	"math"
	"testing"
	"time"
)

// benchRun is a full-size weekly run: 40 features, 2 versions, 8 measures.
func benchRun(i int) Run {
	run := sampleRun(i % 10)
	run.ID = fmt.Sprintf("bench-%04d", i)
	run.Time = time.Date(2031, 1, 5, 6, 0, 0, 0, time.UTC).AddDate(0, 0, 7*i)
	run.Rows = run.Rows[:0:0]
	measures := []string{"split_count", "total_gain", "total_cover", "permutation_drop",
		"missing_break_drop", "freeze_drop", "mean_abs_shap", "path_usage"}
	for f := 0; f < 40; f++ {
		for _, v := range []string{VersionBaseline, VersionCandidate} {
			for m, name := range measures {
				x := float64(f*8+m) / 320
				row := FeatureRow{Feature: fmt.Sprintf("feature_%02d", f), Version: v, Measure: name,
					Value: x, Lo: x * 0.9, Hi: x * 1.1, Share: x / 40}
				if m < 3 {
					row.Lo, row.Hi = math.NaN(), math.NaN()
				}
				run.Rows = append(run.Rows, row)
			}
		}
	}
	return run
}

func BenchmarkAppend(b *testing.B) {
	dir := b.TempDir()
	i := 0
	for b.Loop() {
		if _, err := Append(dir, benchRun(i)); err != nil {
			b.Fatal(err)
		}
		i++
	}
}

// BenchmarkLoad reads a year of weekly runs (52 files of 640 rows).
func BenchmarkLoad(b *testing.B) {
	dir := b.TempDir()
	for i := 0; i < 52; i++ {
		if _, err := Append(dir, benchRun(i)); err != nil {
			b.Fatal(err)
		}
	}
	for b.Loop() {
		runs, warnings, err := Load(dir)
		if err != nil || len(warnings) > 0 || len(runs) != 52 {
			b.Fatal(err, warnings, len(runs))
		}
	}
}
