package forest

import (
	"math/rand/v2"
	"runtime"
	"strconv"
	"testing"
)

// syntheticEnsemble builds an XGBoost-style ensemble of complete trees of the
// given depth over nf features, heap layout (children of i at 2i+1, 2i+2),
// with random features, float32 thresholds, default directions and leaf
// values. numClass > 1 makes a softmax model with trees round-robin.
func syntheticEnsemble(rng *rand.Rand, trees, depth, nf, numClass int) *Ensemble {
	e := &Ensemble{
		Format: "synthetic", Objective: "reg:squarederror",
		Task: TaskRegression, Link: LinkIdentity, Rule: LessThanFloat32,
		NumClass: numClass, BaseMargin: make([]float64, numClass),
		FeatureNames: make([]string, nf),
		Trees:        make([]Tree, trees),
	}
	if numClass > 1 {
		e.Objective, e.Task, e.Link = "multi:softprob", TaskMulticlass, LinkSoftmax
	}
	for j := range e.FeatureNames {
		e.FeatureNames[j] = "x" + strconv.Itoa(j)
	}
	n := 1<<(depth+1) - 1
	internal := 1<<depth - 1
	for ti := range e.Trees {
		t := Tree{Nodes: make([]Node, n), Value: make([]float64, n), Class: ti % numClass}
		for i := 0; i < n; i++ {
			if i >= internal {
				t.Nodes[i] = Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: FlagLeaf}
				t.Value[i] = float64(float32(rng.NormFloat64() * 0.1))
				continue
			}
			var flags uint8
			if rng.IntN(2) == 0 {
				flags = FlagDefaultLeft
			}
			t.Nodes[i] = Node{
				Feature:   int32(rng.IntN(nf)),
				Threshold: float64(float32(rng.NormFloat64())),
				Left:      int32(2*i + 1),
				Right:     int32(2*i + 2),
				CatSet:    -1,
				Flags:     flags,
			}
		}
		e.Trees[ti] = t
	}
	return e
}

// BenchmarkMargins scores 100k rows with a 300-tree depth-6 model over 30
// features (10% missing values), on one core and on all cores.
func BenchmarkMargins(b *testing.B) {
	rng := rand.New(rand.NewPCG(20261202, 6))
	e := syntheticEnsemble(rng, 300, 6, 30, 1)
	const n = 100_000
	cols := randomColumns(rng, 30, n)
	dst := make([]float64, n)
	for _, workers := range []int{1, runtime.GOMAXPROCS(0)} {
		b.Run("workers="+strconv.Itoa(workers), func(b *testing.B) {
			for b.Loop() {
				e.Margins(dst, cols, n, workers)
			}
			b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}
