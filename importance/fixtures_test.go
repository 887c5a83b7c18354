package importance

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/storage/treefile"
)

// loadFixture reads testdata/models/<name>: the XGBoost 1.7.4 model and the
// rows it was scored on (made by testdata/models/make_models.py).
func loadFixture(t testing.TB, name string) (*forest.Ensemble, *frame.Frame) {
	t.Helper()
	dir := filepath.Join("..", "testdata", "models", name)
	e, err := treefile.ReadFile(filepath.Join(dir, "model.json"), treefile.Options{})
	if err != nil {
		t.Fatalf("fixture %s: %v", name, err)
	}
	fh, err := os.Open(filepath.Join(dir, "rows.csv"))
	if err != nil {
		t.Fatalf("fixture %s: %v", name, err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		t.Fatalf("fixture %s rows.csv: %v", name, err)
	}
	head := recs[0]
	recs = recs[1:]
	f := &frame.Frame{Rows: len(recs), SampleFraction: 1}
	for c, h := range head {
		col := make([]float64, len(recs))
		for r, rec := range recs {
			if rec[c] == "" {
				col[r] = math.NaN()
				continue
			}
			v, err := strconv.ParseFloat(rec[c], 64)
			if err != nil {
				t.Fatalf("fixture %s rows.csv row %d col %s: %v", name, r, h, err)
			}
			col[r] = v
		}
		switch h {
		case "label":
			f.Label = col
		case "query":
			f.Group = make([]int64, len(col))
			for r, v := range col {
				f.Group[r] = int64(v)
			}
		default:
			f.Names = append(f.Names, h)
			f.Columns = append(f.Columns, col)
		}
	}
	f.Missing = make([]int, len(f.Names))
	return e, f
}

func within(a, b, tol float64) bool { return math.Abs(a-b) <= tol }
