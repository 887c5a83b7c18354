package treeshap

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"splitledger/importance/forest"
	"splitledger/storage/treefile"
	"splitledger/storage/treefile/leavesref"
)

// modelsDir holds the XGBoost 1.7.4 reference fixtures written by
// testdata/models/make_models.py.
const modelsDir = "../../testdata/models"

// readCSVRows reads a rows.csv fixture into column-major form in the model's
// feature order; an empty cell is missing (NaN) and columns that are not
// model features (label, query) are ignored.
func readCSVRows(tb testing.TB, path string, e *forest.Ensemble) ([][]float64, int) {
	tb.Helper()
	recs := readCSV(tb, path)
	if len(recs) < 2 {
		tb.Fatalf("%s: no rows", path)
	}
	index := map[string]int{}
	for j, nm := range recs[0] {
		index[nm] = j
	}
	nf := e.NumFeatures()
	n := len(recs) - 1
	cols := make([][]float64, nf)
	for f, nm := range e.FeatureNames {
		j, ok := index[nm]
		if !ok {
			tb.Fatalf("%s: no column %q", path, nm)
		}
		cols[f] = make([]float64, n)
		for r := 0; r < n; r++ {
			cols[f][r] = parseCell(tb, path, r+2, recs[r+1][j])
		}
	}
	return cols, n
}

// readMatrix reads a headerless numeric CSV.
func readMatrix(tb testing.TB, path string) [][]float64 {
	tb.Helper()
	recs := readCSV(tb, path)
	out := make([][]float64, len(recs))
	for r, rec := range recs {
		out[r] = make([]float64, len(rec))
		for j, s := range rec {
			out[r][j] = parseCell(tb, path, r+1, s)
		}
	}
	return out
}

func readCSV(tb testing.TB, path string) [][]string {
	tb.Helper()
	f, err := os.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		tb.Fatalf("%s: %v", path, err)
	}
	return recs
}

func parseCell(tb testing.TB, path string, line int, s string) float64 {
	tb.Helper()
	if s == "" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		tb.Fatalf("%s:%d: %v", path, line, err)
	}
	return v
}

// TestXGBoostContribs compares every row of each fixture with XGBoost 1.7.4
// predict(pred_contribs=True) (contribs.csv; per class F feature values then
// the bias), and checks local accuracy (Lundberg, Erion & Lee 2018): bias +
// Σφ equals Ensemble.Margins. XGBoost computes TreeSHAP in float32 and the
// file prints 9 significant digits, hence 1e-4 on the values; the margins
// are summed in float64 here on both sides, hence 1e-9.
func TestXGBoostContribs(t *testing.T) {
	const tolContrib, tolLocal = 1e-4, 1e-9
	for _, name := range []string{"binary", "missing", "regression", "ranking", "multiclass", "categorical"} {
		t.Run(name, func(t *testing.T) {
			dir := filepath.Join(modelsDir, name)
			e, err := treefile.ReadFile(filepath.Join(dir, "model.json"), treefile.Options{})
			if err != nil {
				t.Fatal(err)
			}
			x, err := New(e)
			if err != nil {
				t.Fatal(err)
			}
			cols, n := readCSVRows(t, filepath.Join(dir, "rows.csv"), e)
			want := readMatrix(t, filepath.Join(dir, "contribs.csv"))
			rl := x.RowLen()
			if len(want) != n {
				t.Fatalf("contribs.csv has %d rows, rows.csv %d", len(want), n)
			}
			got := make([]float64, n*rl)
			x.Rows(got, cols, n, 2)
			margins := make([]float64, n*e.NumClass)
			e.Margins(margins, cols, n, 1)
			worst := 0.0
			for r := 0; r < n; r++ {
				if len(want[r]) != rl {
					t.Fatalf("contribs.csv row %d has %d values, want %d", r, len(want[r]), rl)
				}
				for i, w := range want[r] {
					g := got[r*rl+i]
					if !within(g, w, tolContrib) {
						t.Fatalf("row %d entry %d (class %d feature %d): %.9g, XGBoost 1.7.4 %.9g", r, i, i/x.stride, i%x.stride, g, w)
					}
					worst = math.Max(worst, math.Abs(g-w))
				}
				for c := 0; c < e.NumClass; c++ {
					s := 0.0
					for _, v := range got[r*rl+c*x.stride : r*rl+(c+1)*x.stride] {
						s += v
					}
					if !within(s, margins[r*e.NumClass+c], tolLocal) {
						t.Fatalf("row %d class %d: bias+Σφ %.12g, margin %.12g", r, c, s, margins[r*e.NumClass+c])
					}
				}
			}
			t.Logf("%d rows, largest difference from XGBoost 1.7.4 %.2g", n, worst)
		})
	}
}

// TestLightGBMLocalAccuracy checks local accuracy (Lundberg, Erion & Lee
// 2018) on real LightGBM models: bias + Σφ must equal LightGBM's own raw
// prediction, shipped beside each model in github.com/dmitryikh/leaves
// testdata (LightGBM predict with predict_raw_score, see that folder's
// README.md and scripts). lg_breast_cancer.txt ships no predictions there;
// its reference is Ensemble.Margins, whose leaves that module's
// lg_breast_cancer_data_pred_leaves.txt confirms (storage/treefile tests).
// Tolerance: the files carry 17 digits, so 1e-9 relative to max(|p|, 1)
// leaves room only for float64 rounding over the trees.
func TestLightGBMLocalAccuracy(t *testing.T) {
	dir := leavesref.Dir(t)
	cases := []struct {
		name, model, data string
		skip              int    // label columns in data
		truth             string // "" compares with Ensemble.Margins
	}{
		{"binary v3", "lg_breast_cancer.txt", "lg_breast_cancer_data.txt", 0, ""},
		{"multiclass raw", "lgmulticlass.model", "multiclass_test.tsv", 1, "lgmulticlass_true_raw_predictions.txt"},
		{"categorical multiclass raw", "lg_kddcup99.model", "kddcup99_test.tsv", 0, "lg_kddcup99_true_predictions.txt"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			e, err := treefile.ReadFile(filepath.Join(dir, tc.model), treefile.Options{})
			if err != nil {
				t.Fatal(err)
			}
			x, err := New(e)
			if err != nil {
				t.Fatal(err)
			}
			rows := leavesref.ReadTable(t, filepath.Join(dir, tc.data), "", tc.skip)
			nf, k, n := e.NumFeatures(), e.NumClass, len(rows)
			cols := make([][]float64, nf)
			for j := range cols {
				cols[j] = make([]float64, n)
				for r := range rows {
					if len(rows[r]) != nf {
						t.Fatalf("row %d has %d values, model %d features", r, len(rows[r]), nf)
					}
					cols[j][r] = rows[r][j]
				}
			}
			var truth [][]float64
			if tc.truth != "" {
				truth = leavesref.ReadTable(t, filepath.Join(dir, tc.truth), "", 0)
			} else {
				m := make([]float64, n*k)
				e.Margins(m, cols, n, 1)
				for r := 0; r < n; r++ {
					truth = append(truth, m[r*k:(r+1)*k])
				}
			}
			if len(truth) != n {
				t.Fatalf("%d rows, %d predictions", n, len(truth))
			}
			rl := x.RowLen()
			got := make([]float64, n*rl)
			x.Rows(got, cols, n, 2)
			for r := 0; r < n; r++ {
				for c := 0; c < k; c++ {
					s := 0.0
					for _, v := range got[r*rl+c*x.stride : r*rl+(c+1)*x.stride] {
						s += v
					}
					w := truth[r][c]
					if !(math.Abs(s-w) <= 1e-9*math.Max(1, math.Abs(w))) {
						t.Fatalf("row %d class %d: bias+Σφ %.17g, LightGBM %.17g", r, c, s, w)
					}
				}
			}
			t.Logf("%d rows x %d classes", n, k)
		})
	}
}
