package history

import (
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"
)

func TestPrune(t *testing.T) {
	day := func(d int) time.Time { return time.Date(2031, 3, d, 6, 0, 0, 0, time.UTC) }
	// Runs on March 1, 8 and 15 (two on the 8th).
	build := func(t *testing.T) (string, map[string]string) {
		dir := t.TempDir()
		paths := map[string]string{}
		for _, d := range []int{1, 8, 8, 15} {
			run := sampleRun(0)
			run.Time = day(d)
			run.ID = NewRunID(run.Time)
			paths[run.ID] = mustAppend(t, dir, run)
		}
		return dir, paths
	}
	// Cutoff rule: whole UTC dates strictly before before's UTC date
	// (documented behaviour, common practice for date-partitioned tables).
	tests := []struct {
		name     string
		before   time.Time
		keepDays []string
		removed  int
	}{
		{"nothing older", day(1), []string{"2031-03-01", "2031-03-08", "2031-03-15"}, 0},
		{"same day kept", day(8).Add(17 * time.Hour), []string{"2031-03-08", "2031-03-15"}, 1},
		{"zone converted to UTC", time.Date(2031, 3, 9, 1, 0, 0, 0, time.FixedZone("UTC+3", 3*3600)), []string{"2031-03-08", "2031-03-15"}, 1},
		{"two days", day(9), []string{"2031-03-15"}, 3},
		{"everything", day(16), nil, 4},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir, _ := build(t)
			removed, err := Prune(dir, tt.before)
			if err != nil {
				t.Fatal(err)
			}
			if len(removed) != tt.removed {
				t.Errorf("removed %q, want %d files", removed, tt.removed)
			}
			for _, p := range removed {
				if exists(p) {
					t.Errorf("%s still there", p)
				}
			}
			var days []string
			for _, r := range mustLoad(t, dir) {
				days = append(days, r.Time.Format("2006-01-02"))
			}
			days = slices.Compact(days)
			if !slices.Equal(days, tt.keepDays) {
				t.Errorf("days left %q, want %q", days, tt.keepDays)
			}
			parts, _ := listPartitions(dir)
			if len(parts) != len(tt.keepDays) {
				t.Errorf("%d partition folders left, want %d (empty ones removed)", len(parts), len(tt.keepDays))
			}
		})
	}

	t.Run("unknown files stay with their folder", func(t *testing.T) {
		dir, _ := build(t)
		note := filepath.Join(dir, "run_date=2031-03-01", "README")
		os.WriteFile(note, []byte("keep me"), 0o644)
		damaged := filepath.Join(dir, "run_date=2031-03-01", "run-damaged.parquet")
		os.WriteFile(damaged, []byte("PAR1 broken"), 0o644)
		orphan := filepath.Join(dir, "run_date=2031-03-15", ".run-x-123.tmp")
		os.WriteFile(orphan, []byte("partial"), 0o644)
		removed, err := Prune(dir, day(2))
		if err != nil {
			t.Fatal(err)
		}
		if len(removed) != 2 || !slices.Contains(removed, damaged) {
			t.Errorf("removed %q, want the March 1 run and the damaged file", removed)
		}
		if !exists(note) {
			t.Error("unknown file removed")
		}
		if exists(orphan) {
			t.Error("orphaned temporary file kept")
		}
	})
	t.Run("missing dir", func(t *testing.T) {
		removed, err := Prune(filepath.Join(t.TempDir(), "none"), day(1))
		if err != nil || removed != nil {
			t.Errorf("Prune(missing) = %q, %v", removed, err)
		}
	})
}
