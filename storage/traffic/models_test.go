package traffic

import (
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/parquet/compress"
)

// modelRows is a rows.csv of testdata/models: the rows XGBoost 1.7.4 scored
// for the reference margins (made by testdata/models/make_models.py).
type modelRows struct {
	features []string
	columns  map[string][]float64 // by header name; empty cell = NaN
}

func loadModelRows(t *testing.T, name string) modelRows {
	t.Helper()
	dir := filepath.Join("..", "..", "testdata", "models", name)
	feats, err := os.ReadFile(filepath.Join(dir, "features.txt"))
	if err != nil {
		t.Fatalf("fixture missing: %v", err)
	}
	fh, err := os.Open(filepath.Join(dir, "rows.csv"))
	if err != nil {
		t.Fatalf("fixture missing: %v", err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	m := modelRows{features: strings.Fields(string(feats)), columns: map[string][]float64{}}
	for _, rec := range recs[1:] {
		for j, cell := range rec {
			v := math.NaN()
			if cell != "" {
				if v, err = strconv.ParseFloat(cell, 64); err != nil {
					t.Fatalf("%s rows.csv: %v", name, err)
				}
			}
			m.columns[recs[0][j]] = append(m.columns[recs[0][j]], v)
		}
	}
	return m
}

// nullable splits float values into values and validity (NaN = null).
func nullable(v []float64) ([]float64, []bool) {
	vals := make([]float64, len(v))
	valid := make([]bool, len(v))
	for i, x := range v {
		if x == x {
			vals[i], valid[i] = x, true
		}
	}
	return vals, valid
}

func toInts[T int32 | int64](t *testing.T, v []float64) []T {
	out := make([]T, len(v))
	for i, x := range v {
		if x != math.Trunc(x) {
			t.Fatalf("row %d: %v is not an integer", i, x)
		}
		out[i] = T(x)
	}
	return out
}

// TestReadModelRows writes the rows XGBoost 1.7.4 scored to Parquet with
// arrow-go v18.8.0 (empty CSV cells as nulls) and checks that the frame
// holds exactly the CSV values, so the model-scoring parity tests can read
// traffic through this package.
func TestReadModelRows(t *testing.T) {
	for _, tc := range []struct {
		model       string
		label       string
		group       string
		categorical string // feature written as strings "cat-<code>"
	}{
		{model: "ranking", label: "label", group: "query"},
		{model: "binary", label: "label"},
		{model: "missing", label: "label"},
		{model: "categorical", label: "label", categorical: "theta"},
	} {
		t.Run(tc.model, func(t *testing.T) {
			m := loadModelRows(t, tc.model)
			var cols []column
			cats := map[string]map[string]int{}
			for _, name := range m.features {
				if name == tc.categorical {
					vals, valid := nullable(m.columns[name])
					strs := make([]string, len(vals))
					codes := map[string]int{}
					for i, v := range vals {
						strs[i] = fmt.Sprintf("cat-%d", int(v))
						codes[strs[i]] = int(v)
					}
					cats[name] = codes
					cols = append(cols, column{name: name, values: strs, valid: valid})
					continue
				}
				vals, valid := nullable(m.columns[name])
				cols = append(cols, column{name: name, values: vals, valid: valid})
			}
			cols = append(cols, column{name: tc.label, values: toInts[int32](t, m.columns[tc.label])})
			if tc.group != "" {
				cols = append(cols, column{name: tc.group, values: toInts[int64](t, m.columns[tc.group])})
			}
			path := filepath.Join(t.TempDir(), tc.model+".parquet")
			writeParquet(t, path, cols, layout{codec: compress.Codecs.Snappy, rowGroupRows: 64})

			f, err := Read(path, Options{Features: m.features, Categories: cats, Label: tc.label, Group: tc.group})
			if err != nil {
				t.Fatal(err)
			}
			for j, name := range m.features {
				checkColumn(t, name, f.Columns[j], m.columns[name])
			}
			checkColumn(t, "label", f.Label, m.columns[tc.label])
			if tc.group != "" {
				for i, g := range f.Group {
					if float64(g) != m.columns[tc.group][i] {
						t.Fatalf("group row %d: %d, want %v", i, g, m.columns[tc.group][i])
					}
				}
			}
		})
	}
}
