package treeshap

import (
	"math"
	"math/rand/v2"
	"testing"
)

// FuzzShapleyDefinition builds random ensembles (repeated features,
// uneven covers, missing values, several classes) and checks New and Row
// against the Shapley definition (Shapley 1953) with the path-dependent
// value function of Lundberg, Erion & Lee (2018), and local accuracy.
func FuzzShapleyDefinition(f *testing.F) {
	f.Add(uint64(1), uint8(3), uint8(1), uint8(3), uint8(3))
	f.Add(uint64(2), uint8(5), uint8(2), uint8(4), uint8(6))
	f.Add(uint64(3), uint8(1), uint8(3), uint8(2), uint8(8))
	f.Add(uint64(4), uint8(6), uint8(1), uint8(1), uint8(12))
	f.Fuzz(func(t *testing.T, seed uint64, nf, classes, trees, depth uint8) {
		nfi := 1 + int(nf)%6
		k := 1 + int(classes)%3
		nt := 1 + int(trees)%6
		dep := int(depth) % 13
		rng := rand.New(rand.NewPCG(seed, 99))
		e := randomEnsemble(rng, nfi, k, nt, dep)
		x, err := New(e)
		if err != nil {
			t.Fatal(err)
		}
		row := make([]float64, nfi)
		got := make([]float64, x.RowLen())
		for r := 0; r < 4; r++ {
			for j := range row {
				row[j] = float64(rng.IntN(7)) - 1
				if rng.IntN(6) == 0 {
					row[j] = math.NaN()
				}
			}
			x.Row(got, row)
			want := bruteForce(e, row)
			for i := range want {
				if !within(got[i], want[i], 1e-9*(1+math.Abs(want[i]))) {
					t.Fatalf("row %v entry %d: %v, Shapley definition %v", row, i, got[i], want[i])
				}
			}
			margin := make([]float64, k)
			e.MarginRow(margin, row)
			for c := 0; c < k; c++ {
				s := 0.0
				for _, v := range got[c*(nfi+1) : (c+1)*(nfi+1)] {
					s += v
				}
				if !within(s, margin[c], 1e-9*(1+math.Abs(margin[c]))) {
					t.Fatalf("class %d: bias+Σφ %v, margin %v", c, s, margin[c])
				}
			}
		}
	})
}
