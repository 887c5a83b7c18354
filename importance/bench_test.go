package importance

import (
	"path/filepath"
	"testing"

	"splitledger/importance/benchdata"
	"splitledger/importance/frame"
	"splitledger/storage/treefile"
)

// The benchmark model: 300 trees, depth 6, 30 features, rank:pairwise,
// trained by testdata/bench/make_bench.py with XGBoost 1.7.4; the rows come
// from the same generator as the script (importance/benchdata, seed 2):
// 100k rows in 4k query groups.
func benchInputs(b *testing.B, n int) (*frame.Frame, func() *Table) {
	e, err := treefile.ReadFile(filepath.Join("..", "testdata", "bench", "model.json.gz"), treefile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	cols, group, label := benchdata.Rows(n, 2)
	f := &frame.Frame{Names: e.FeatureNames, Columns: cols, Group: group, Label: label, Rows: n, SampleFraction: 1}
	return f, func() *Table {
		t, err := MeasureModel(e, "bench", f, Config{Workers: 2, SHAP: false})
		if err != nil {
			b.Fatal(err)
		}
		return t
	}
}

// BenchmarkScorePass is one plain scoring pass of the model over the rows
// (2 workers): the unit the drops are measured against.
func BenchmarkScorePass(b *testing.B) {
	e, err := treefile.ReadFile(filepath.Join("..", "testdata", "bench", "model.json.gz"), treefile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	cols, _, _ := benchdata.Rows(benchRows, 2)
	dst := make([]float64, benchRows)
	b.ResetTimer()
	c0 := processCPU()
	for i := 0; i < b.N; i++ {
		e.Margins(dst, cols, benchRows, 2)
	}
	b.ReportMetric((processCPU()-c0).Seconds()/float64(b.N), "cpu-s/op")
}

func BenchmarkScorePass10k(b *testing.B) {
	benchRows = 10000
	defer func() { benchRows = 100000 }()
	BenchmarkScorePass(b)
}

// BenchmarkDropsNDCG measures all features' permutation, missing-break and
// freeze drops (NDCG@10, 10 shuffles) with 200 bootstrap replicates, plus
// path usage, on 2 workers, without SHAP.
func BenchmarkDropsNDCG(b *testing.B) {
	_, run := benchInputs(b, benchRows)
	b.ResetTimer()
	c0 := processCPU()
	for i := 0; i < b.N; i++ {
		run()
	}
	b.ReportMetric((processCPU()-c0).Seconds()/float64(b.N), "cpu-s/op")
}

// benchRows is the benchmark sample size (100k rows, 4k groups).
var benchRows = 100000

// BenchmarkDropsNDCG10k and BenchmarkScorePass10k are the same pair on 10k
// rows (400 groups), quick enough to run often.
func BenchmarkDropsNDCG10k(b *testing.B) {
	benchRows = 10000
	defer func() { benchRows = 100000 }()
	BenchmarkDropsNDCG(b)
}
