package metrics

import (
	"cmp"
	"math/rand/v2"
	"slices"
	"testing"
)

func benchData(n int) (scores, labels, weights []float64, counts []uint8) {
	rng := rand.New(rand.NewPCG(7, 8))
	scores = make([]float64, n)
	labels = make([]float64, n)
	weights = make([]float64, n)
	counts = make([]uint8, n)
	for i := range scores {
		scores[i] = rng.NormFloat64()
		if rng.Float64() < 0.3+0.2*scores[i] {
			labels[i] = 1
		}
		c := uint8(rng.IntN(3))
		counts[i] = c
		weights[i] = float64(c)
	}
	return
}

// BenchmarkAUC is one AUC of 100k rows from scratch: Rank (radix sort) and
// the area, as for one permutation repeat.
func BenchmarkAUC(b *testing.B) {
	s, y, _, _ := benchData(100_000)
	var r Ranking
	b.ResetTimer()
	for b.Loop() {
		if err := r.Rank(s, y); err != nil {
			b.Fatal(err)
		}
		r.AUC(nil)
	}
}

// BenchmarkAUCOneShot is the allocating AUC function on 100k rows.
func BenchmarkAUCOneShot(b *testing.B) {
	s, y, _, _ := benchData(100_000)
	for b.Loop() {
		AUC(s, y, nil)
	}
}

// BenchmarkAUCCounts is one bootstrap replicate on an already ranked 100k
// rows.
func BenchmarkAUCCounts(b *testing.B) {
	s, y, _, counts := benchData(100_000)
	var r Ranking
	if err := r.Rank(s, y); err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		r.AUCCounts(counts)
	}
}

// BenchmarkNDCG is NDCG@10 of one 40-item query group with scratch.
func BenchmarkNDCG(b *testing.B) {
	s, _, w, _ := benchData(40)
	var scratch NDCGScratch
	for b.Loop() {
		NDCG(s, w, 10, GainExponential, &scratch)
	}
}

// BenchmarkLogLoss is the mean log loss of 100k rows.
func BenchmarkLogLoss(b *testing.B) {
	s, y, w, _ := benchData(100_000)
	p := make([]float64, len(s))
	for i, v := range s {
		p[i] = 1 / (1 + v*v)
	}
	for b.Loop() {
		LogLoss(y, p, w)
	}
}

// BenchmarkRankComparisonSort sorts the same 100k (key, row) pairs with the
// standard library's comparison sort, the baseline for Rank's radix sort.
func BenchmarkRankComparisonSort(b *testing.B) {
	s, _, _, _ := benchData(100_000)
	type keyRow struct {
		key uint64
		row int32
	}
	buf := make([]keyRow, len(s))
	for b.Loop() {
		for i, v := range s {
			buf[i] = keyRow{sortKey(v), int32(i)}
		}
		slices.SortFunc(buf, func(a, b keyRow) int { return cmp.Compare(a.key, b.key) })
	}
}
