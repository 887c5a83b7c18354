package treefile

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"splitledger/importance/forest"
)

// modelsDir holds the XGBoost 1.7.4 reference fixtures written by
// testdata/models/make_models.py.
var modelsDir = filepath.Join("..", "..", "testdata", "models")

// fixtureDir holds this package's own fixtures (testdata/treefile).
var fixtureDir = filepath.Join("..", "..", "testdata", "treefile")

// fixtureMeta is meta.json of a reference fixture.
type fixtureMeta struct {
	Objective string   `json:"objective"`
	BaseScore *float64 `json:"base_score"`
	NumClass  int      `json:"num_class"`
	Rows      int      `json:"rows"`
}

// readMeta reads dir/meta.json; a missing fixture fails the test.
func readMeta(t *testing.T, dir string) fixtureMeta {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(dir, "meta.json"))
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	var m fixtureMeta
	if err := json.Unmarshal(data, &m); err != nil {
		t.Fatalf("%s/meta.json: %v", dir, err)
	}
	return m
}

// readCSV reads a CSV file into records.
func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	recs, err := r.ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return recs
}

// parseCell reads one CSV number; empty means missing (NaN).
func parseCell(t *testing.T, path string, row int, s string) float64 {
	t.Helper()
	if s == "" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("%s row %d: %v", path, row, err)
	}
	return v
}

// readRows reads rows.csv into column-major order of e's features, matched
// by header name; columns the model does not declare (label, query) are
// ignored and declared features absent from the file are all missing.
func readRows(t *testing.T, path string, e *forest.Ensemble) ([][]float64, int) {
	t.Helper()
	recs := readCSV(t, path)
	if len(recs) < 2 {
		t.Fatalf("%s: no rows", path)
	}
	header, body := recs[0], recs[1:]
	n := len(body)
	cols := make([][]float64, e.NumFeatures())
	for j := range cols {
		cols[j] = make([]float64, n)
		for r := range cols[j] {
			cols[j][r] = math.NaN()
		}
	}
	pos := map[string]int{}
	for j, nm := range e.FeatureNames {
		pos[nm] = j
	}
	for c, h := range header {
		j, ok := pos[h]
		if !ok {
			continue
		}
		for r, rec := range body {
			cols[j][r] = parseCell(t, path, r+1, rec[c])
		}
	}
	return cols, n
}

// readMatrix reads a headerless numeric CSV row-major.
func readMatrix(t *testing.T, path string) (vals []float64, rows, width int) {
	t.Helper()
	recs := readCSV(t, path)
	for r, rec := range recs {
		if width == 0 {
			width = len(rec)
		}
		for _, s := range rec {
			vals = append(vals, parseCell(t, path, r+1, s))
		}
	}
	return vals, len(recs), width
}

// within reports whether got is within tol of want; NaN never is.
func within(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol
}
