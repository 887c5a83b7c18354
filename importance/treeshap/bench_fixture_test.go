package treeshap

import (
	"math"
	"path/filepath"
	"testing"

	"splitledger/importance/benchdata"
	"splitledger/storage/treefile"
)

// TestBenchModelContribs compares the benchmark model (300 trees of depth
// 6, 30 features) on the first 200 benchmark rows with XGBoost 1.7.4
// predict(pred_contribs=True), written by testdata/treeshap/make_contribs.py.
// Tolerance 1e-4 absolute: XGBoost sums in float32 and the file holds 9
// significant digits.
func TestBenchModelContribs(t *testing.T) {
	e, err := treefile.ReadFile(filepath.FromSlash(benchModel), treefile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	x, err := New(e)
	if err != nil {
		t.Fatal(err)
	}
	want := readMatrix(t, "../../testdata/treeshap/bench_contribs.csv")
	n := len(want)
	if n == 0 {
		t.Fatal("no reference rows")
	}
	cols, _, _ := benchdata.Rows(n, 2)
	rl := x.RowLen()
	got := make([]float64, n*rl)
	x.Rows(got, cols, n, 2)
	worst := 0.0
	for r := range want {
		if len(want[r]) != rl {
			t.Fatalf("reference row %d has %d values, want %d", r, len(want[r]), rl)
		}
		for i, w := range want[r] {
			if !within(got[r*rl+i], w, 1e-4) {
				t.Fatalf("row %d entry %d: %.9g, XGBoost 1.7.4 %.9g", r, i, got[r*rl+i], w)
			}
			worst = math.Max(worst, math.Abs(got[r*rl+i]-w))
		}
	}
	t.Logf("%d rows, largest difference from XGBoost 1.7.4 %.2g", n, worst)
}
