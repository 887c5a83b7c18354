package cli

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// csvToParquet writes a CSV with a header (empty cell = null) as a Parquet
// file of optional doubles, with "query" as int64 when present.
func csvToParquet(t *testing.T, csvPath, out string) {
	t.Helper()
	f, err := os.Open(csvPath)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head := recs[0]
	group := parquet.Group{}
	for _, h := range head {
		if h == "query" {
			group[h] = parquet.Leaf(parquet.Int64Type)
			continue
		}
		group[h] = parquet.Optional(parquet.Leaf(parquet.DoubleType))
	}
	schema := parquet.NewSchema("rows", group)
	// column index of each header name in the schema's (sorted) order
	idx := map[string]int{}
	for i, p := range schema.Columns() {
		idx[p[0]] = i
	}
	w, err := os.Create(out)
	if err != nil {
		t.Fatal(err)
	}
	pw := parquet.NewWriter(w, schema)
	for _, rec := range recs[1:] {
		row := make(parquet.Row, len(head))
		for c, h := range head {
			ci := idx[h]
			if h == "query" {
				v, _ := strconv.ParseInt(rec[c], 10, 64)
				row[ci] = parquet.Int64Value(v).Level(0, 0, ci)
				continue
			}
			if rec[c] == "" {
				row[ci] = parquet.NullValue().Level(0, 0, ci)
				continue
			}
			v, err := strconv.ParseFloat(rec[c], 64)
			if err != nil {
				t.Fatal(err)
			}
			row[ci] = parquet.DoubleValue(v).Level(0, 1, ci)
		}
		if _, err := pw.WriteRows([]parquet.Row{row}); err != nil {
			t.Fatal(err)
		}
	}
	if err := pw.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}

func readCSVFloats(t *testing.T, path string) [][]float64 {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	recs, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	out := make([][]float64, 0, len(recs))
	for _, rec := range recs {
		row := make([]float64, len(rec))
		for i, s := range rec {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				v = math.NaN()
			}
			row[i] = v
		}
		out = append(out, row)
	}
	return out
}

func fixture(name, file string) string {
	return filepath.Join("..", "..", "..", "testdata", "models", name, file)
}
