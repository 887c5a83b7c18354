// Package frame holds a traffic sample in column-major form: one float64
// slice per model feature, in the ensemble's feature order, with NaN for
// missing values. The storage layer fills it; the measures only read it.
package frame

import (
	"fmt"
	"math"
)

// Frame is a column-major traffic sample.
type Frame struct {
	// Names are the model feature names, one per column, in model order.
	Names []string
	// Columns holds one slice of Rows values per feature; NaN is missing.
	Columns [][]float64
	// Label is the outcome per row, nil when the sample has no label.
	Label []float64
	// Group is the query id code per row, nil without a group column. Equal
	// codes mean the same query; codes need not be contiguous.
	Group []int64
	// Weight is a per-row weight, nil for uniform weights.
	Weight []float64
	// Rows is the number of rows.
	Rows int
	// Missing counts missing values per column.
	Missing []int
	// Absent marks model features that were not in the traffic at all and
	// are missing in every row (allowed only on request).
	Absent []bool
	// SampleFraction is rows kept / rows read (1 when nothing was dropped).
	SampleFraction float64
	// Source describes where the rows came from (paths), for reports.
	Source string
	// TotalRows is the number of rows in the source before sampling.
	TotalRows int64
}

// Validate checks that every slice has Rows entries.
func (f *Frame) Validate() error {
	if len(f.Columns) != len(f.Names) {
		return fmt.Errorf("frame: %d columns for %d names", len(f.Columns), len(f.Names))
	}
	for i, c := range f.Columns {
		if len(c) != f.Rows {
			return fmt.Errorf("frame: column %q has %d rows, want %d", f.Names[i], len(c), f.Rows)
		}
	}
	for name, s := range map[string]int{"label": len(f.Label), "weight": len(f.Weight)} {
		if s != 0 && s != f.Rows {
			return fmt.Errorf("frame: %s has %d rows, want %d", name, s, f.Rows)
		}
	}
	if f.Group != nil && len(f.Group) != f.Rows {
		return fmt.Errorf("frame: group has %d rows, want %d", len(f.Group), f.Rows)
	}
	return nil
}

// Groups returns the rows of each query group, groups in order of first
// appearance and rows in input order inside a group. Rows of one query need
// not be contiguous. Without a group column every row is its own group.
func (f *Frame) Groups() [][]int32 {
	if f.Group == nil {
		g := make([][]int32, f.Rows)
		for r := range g {
			g[r] = []int32{int32(r)}
		}
		return g
	}
	index := map[int64]int{}
	var out [][]int32
	for r, id := range f.Group {
		k, ok := index[id]
		if !ok {
			k = len(out)
			index[id] = k
			out = append(out, nil)
		}
		out[k] = append(out[k], int32(r))
	}
	return out
}

// Row copies row r into dst (len = number of columns) and returns it.
func (f *Frame) Row(dst []float64, r int) []float64 {
	for j, c := range f.Columns {
		dst[j] = c[r]
	}
	return dst
}

// Median returns the median of the non-missing values of column j, NaN when
// the column has no value. With an even count it is the mean of the two
// middle values.
func (f *Frame) Median(j int) float64 {
	v := make([]float64, 0, f.Rows)
	for _, x := range f.Columns[j] {
		if x == x {
			v = append(v, x)
		}
	}
	if len(v) == 0 {
		return math.NaN()
	}
	m := len(v) / 2
	hi := selectKth(v, m) // v[:m] now holds the m smaller values
	if len(v)%2 == 1 {
		return hi
	}
	lo := v[0]
	for _, x := range v[1:m] {
		lo = max(lo, x)
	}
	return (lo + hi) / 2
}

// selectKth reorders v (no NaN) so that v[k] is the value a sort would put
// there, with no larger value before it and no smaller after, and returns
// it: Hoare's selection with a median-of-three pivot, O(len(v)) on average.
func selectKth(v []float64, k int) float64 {
	lo, hi := 0, len(v)-1
	for hi > lo {
		mid := lo + (hi-lo)/2
		// median of three as the pivot
		a, b, c := v[lo], v[mid], v[hi]
		p := max(min(a, b), min(max(a, b), c))
		i, j := lo, hi
		for i <= j {
			for v[i] < p {
				i++
			}
			for v[j] > p {
				j--
			}
			if i <= j {
				v[i], v[j] = v[j], v[i]
				i++
				j--
			}
		}
		// [lo, j] <= p, [i, hi] >= p, and (j, i) == p
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return v[k]
		}
	}
	return v[k]
}
