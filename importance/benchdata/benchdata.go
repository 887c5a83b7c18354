// Package benchdata generates the deterministic invented rows that the
// benchmarks and the committed comparison scripts share. The generator is
// splitmix64 with integer-only arithmetic, so the Python side
// (testdata/bench/make_bench.py) reproduces the same rows bit for bit.
package benchdata

import "math"

// Features is the number of columns of a generated row.
const Features = 30

// GroupSize is the number of rows per query group.
const GroupSize = 25

type splitmix64 struct{ s uint64 }

func (g *splitmix64) next() uint64 {
	g.s += 0x9E3779B97F4A7C15
	z := g.s
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// uniform returns a double in [0, 1) with 53 random bits.
func (g *splitmix64) uniform() float64 {
	return float64(g.next()>>11) * (1.0 / (1 << 53))
}

// Rows returns n rows of Features columns in column-major form, a query
// group id per row (GroupSize consecutive rows per group) and a graded
// relevance label in 0..3. About 2% of values are missing (NaN). Column j
// is uniform on [0, 10) when j%3 == 0, an integer in 0..19 when j%3 == 1,
// and 5u² when j%3 == 2. Equal seeds give equal rows.
func Rows(n int, seed uint64) (cols [][]float64, group []int64, label []float64) {
	g := splitmix64{s: seed}
	cols = make([][]float64, Features)
	for j := range cols {
		cols[j] = make([]float64, n)
	}
	group = make([]int64, n)
	label = make([]float64, n)
	for r := 0; r < n; r++ {
		for j := 0; j < Features; j++ {
			u := g.uniform()
			var x float64
			switch j % 3 {
			case 0:
				x = u * 10
			case 1:
				x = math.Floor(u * 20)
			default:
				x = 5 * u * u
			}
			if g.uniform() < 0.02 {
				x = math.NaN()
			}
			cols[j][r] = x
		}
		group[r] = int64(r / GroupSize)
		s := signal(cols, r) + 2*(g.uniform()-0.5)
		label[r] = math.Max(0, math.Min(3, math.Floor(s)))
	}
	return cols, group, label
}

// signal is the invented relevance: a few strong columns, many weak ones.
func signal(cols [][]float64, r int) float64 {
	v := func(j int) float64 {
		x := cols[j][r]
		if x != x {
			return 0
		}
		return x
	}
	s := 0.3*v(0) - 0.1*v(1) + 0.4*v(2) + 0.05*v(3)*v(4)/10 + 0.2*v(5)
	for j := 6; j < Features; j++ {
		s += 0.01 * v(j) * float64(j%5) / 5
	}
	return s - 2
}
