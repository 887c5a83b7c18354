package treeshap

import (
	"path/filepath"
	"testing"

	"splitledger/importance/benchdata"
	"splitledger/storage/treefile"
)

// benchModel is the 300-tree depth-6 rank:pairwise XGBoost 1.7.4 model over
// 30 invented features written by testdata/bench/make_bench.py; its rows
// come from the same generator (benchdata.Rows, seed 2).
const benchModel = "../../testdata/bench/model.json.gz"

// BenchmarkRows10k explains the 10,000 benchmark rows on 2 workers, the
// setting of the reference timing of XGBoost 1.7.4
// predict(pred_contribs=True) with nthread=2 in make_bench.py --time.
func BenchmarkRows10k(b *testing.B) {
	e, err := treefile.ReadFile(filepath.FromSlash(benchModel), treefile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	x, err := New(e)
	if err != nil {
		b.Fatal(err)
	}
	const n = 10000
	cols, _, _ := benchdata.Rows(n, 2)
	dst := make([]float64, n*x.RowLen())
	b.ResetTimer()
	cpu := processCPU()
	for i := 0; i < b.N; i++ {
		x.Rows(dst, cols, n, 2)
	}
	cpu = processCPU() - cpu
	rows := float64(b.N) * n
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/1e6/rows, "ms/row")
	// CPU time over both workers; the wall time is about half of it on 2
	// idle cores.
	b.ReportMetric(float64(cpu.Nanoseconds())/1e6/rows, "cpu-ms/row")
}

// BenchmarkNew measures the one-off table building for the benchmark model.
func BenchmarkNew(b *testing.B) {
	e, err := treefile.ReadFile(filepath.FromSlash(benchModel), treefile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := New(e); err != nil {
			b.Fatal(err)
		}
	}
}
