package importance

import (
	"errors"
	"math"
	"strings"
	"testing"

	"splitledger/importance/frame"
)

// Bad and awkward traffic: clear errors or documented handling.
func TestTrafficEdgeCases(t *testing.T) {
	e, f := loadFixture(t, "ranking")
	cfg := Config{Replicates: 20, Repeats: 2}

	t.Run("NaN relevance", func(t *testing.T) {
		g := *f
		g.Label = append([]float64(nil), f.Label...)
		g.Label[7] = math.NaN()
		_, err := MeasureModel(e, "m", &g, cfg)
		if err == nil || !strings.Contains(err.Error(), "7") {
			t.Fatalf("want an error naming row 7, got %v", err)
		}
	})
	t.Run("negative relevance", func(t *testing.T) {
		g := *f
		g.Label = append([]float64(nil), f.Label...)
		g.Label[3] = -1
		if _, err := MeasureModel(e, "m", &g, cfg); err == nil {
			t.Fatal("want an error")
		}
	})
	t.Run("zero rows", func(t *testing.T) {
		g := frame.Frame{Names: f.Names, Columns: make([][]float64, len(f.Names)), Label: []float64{}, Group: []int64{}}
		for j := range g.Columns {
			g.Columns[j] = []float64{}
		}
		if _, err := MeasureModel(e, "m", &g, cfg); !errors.Is(err, ErrNoRows) {
			t.Fatalf("want ErrNoRows, got %v", err)
		}
	})
	t.Run("groups not contiguous give the same ledger", func(t *testing.T) {
		// reverse the row order: every query's rows stay together as a set,
		// but the frame no longer lists them in query order.
		n := f.Rows
		g := *f
		g.Columns = make([][]float64, len(f.Columns))
		for j, c := range f.Columns {
			r := make([]float64, n)
			for i := range r {
				r[i] = c[n-1-i]
			}
			g.Columns[j] = r
		}
		g.Label = make([]float64, n)
		g.Group = make([]int64, n)
		for i := 0; i < n; i++ {
			g.Label[i], g.Group[i] = f.Label[n-1-i], f.Group[n-1-i]
		}
		// interleave two queries' rows to make them really scattered
		g.Group[0], g.Group[1] = g.Group[1], g.Group[0]
		g.Label[0], g.Label[1] = g.Label[1], g.Label[0]
		for j := range g.Columns {
			g.Columns[j][0], g.Columns[j][1] = g.Columns[j][1], g.Columns[j][0]
		}
		a, err := MeasureModel(e, "m", f, Config{Replicates: 20, Repeats: 1, Metric: "mean_abs_delta"})
		if err != nil {
			t.Fatal(err)
		}
		b, err := MeasureModel(e, "m", &g, Config{Replicates: 20, Repeats: 1, Metric: "mean_abs_delta"})
		if err != nil {
			t.Fatal(err)
		}
		if a.Units != b.Units {
			t.Fatalf("units %d and %d", a.Units, b.Units)
		}
		for j := range a.Features {
			x, y := a.Features[j].Traffic[MissingBreakDrop].Value, b.Features[j].Traffic[MissingBreakDrop].Value
			if !within(x, y, 1e-12*(1+math.Abs(x))) {
				t.Errorf("%s: missing-break drop %v in query order, %v scattered", a.Features[j].Feature, x, y)
			}
		}
	})
	t.Run("all-missing feature", func(t *testing.T) {
		g := *f
		g.Columns = append([][]float64(nil), f.Columns...)
		nanCol := make([]float64, f.Rows)
		for i := range nanCol {
			nanCol[i] = math.NaN()
		}
		g.Columns[0] = nanCol
		tab, err := MeasureModel(e, "m", &g, cfg)
		if err != nil {
			t.Fatal(err)
		}
		tr := tab.Features[0].Traffic
		// every row already takes the default branch: nothing can change
		for _, m := range []TrafficMeasure{PermutationDrop, MissingBreakDrop, FreezeDrop} {
			if tr[m].Value != 0 {
				t.Errorf("%s of an all-missing feature: %v, want 0", m, tr[m].Value)
			}
		}
	})
}
