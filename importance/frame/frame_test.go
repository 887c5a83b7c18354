package frame

import (
	"math"
	"slices"
	"testing"
)

func TestGroupsNonContiguous(t *testing.T) {
	f := &Frame{Rows: 6, Group: []int64{7, 3, 7, 9, 3, 7}}
	got := f.Groups()
	want := [][]int32{{0, 2, 5}, {1, 4}, {3}}
	if len(got) != len(want) {
		t.Fatalf("groups %v, want %v", got, want)
	}
	for i := range want {
		if !slices.Equal(got[i], want[i]) {
			t.Fatalf("groups %v, want %v", got, want)
		}
	}
	f = &Frame{Rows: 3}
	if g := f.Groups(); len(g) != 3 || g[2][0] != 2 {
		t.Fatalf("without a group column every row is a group, got %v", g)
	}
}

func TestMedian(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		name string
		col  []float64
		want float64
	}{
		{"odd", []float64{3, 1, 2}, 2},
		{"even: mean of the two middle values", []float64{4, 1, 3, 2}, 2.5},
		{"missing values left out", []float64{nan, 5, nan, 1, 3}, 3},
		{"all missing", []float64{nan, nan}, nan},
		{"empty", nil, nan},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f := &Frame{Names: []string{"x"}, Columns: [][]float64{tc.col}, Rows: len(tc.col)}
			got := f.Median(0)
			if math.IsNaN(tc.want) != math.IsNaN(got) || (!math.IsNaN(got) && got != tc.want) {
				t.Fatalf("median %v, want %v", got, tc.want)
			}
		})
	}
}

func TestValidate(t *testing.T) {
	ok := &Frame{Names: []string{"a"}, Columns: [][]float64{{1, 2}}, Rows: 2, Label: []float64{0, 1}}
	if err := ok.Validate(); err != nil {
		t.Fatal(err)
	}
	for _, bad := range []*Frame{
		{Names: []string{"a", "b"}, Columns: [][]float64{{1}}, Rows: 1},
		{Names: []string{"a"}, Columns: [][]float64{{1}}, Rows: 2},
		{Names: []string{"a"}, Columns: [][]float64{{1, 2}}, Rows: 2, Label: []float64{1}},
		{Names: []string{"a"}, Columns: [][]float64{{1, 2}}, Rows: 2, Group: []int64{1}},
	} {
		if bad.Validate() == nil {
			t.Errorf("%+v: want an error", bad)
		}
	}
}

// selectKth against the definition: the k-th value of the sorted slice, for
// every k, on shapes that trouble quickselect (sorted, reversed, constant,
// few distinct values, organ pipe) and on random values.
func TestSelectKthMatchesSort(t *testing.T) {
	shapes := map[string]func(i, n int) float64{
		"sorted":    func(i, n int) float64 { return float64(i) },
		"reversed":  func(i, n int) float64 { return float64(n - i) },
		"constant":  func(i, n int) float64 { return 7 },
		"fewValues": func(i, n int) float64 { return float64(i*7919%5) - 2 },
		"organPipe": func(i, n int) float64 { return float64(min(i, n-i)) },
		"random":    func(i, n int) float64 { return math.Sin(float64(i)*12.9898) * 43758.5453 },
	}
	for name, gen := range shapes {
		for _, n := range []int{1, 2, 3, 4, 7, 16, 101} {
			v := make([]float64, n)
			for i := range v {
				v[i] = gen(i, n)
			}
			want := slices.Clone(v)
			slices.Sort(want)
			for k := 0; k < n; k++ {
				w := slices.Clone(v)
				got := selectKth(w, k)
				if got != want[k] {
					t.Fatalf("%s n=%d k=%d: %v, sorted gives %v", name, n, k, got, want[k])
				}
				for i := 0; i < k; i++ {
					if w[i] > got {
						t.Fatalf("%s n=%d k=%d: v[%d]=%v above the k-th", name, n, k, i, w[i])
					}
				}
				for i := k + 1; i < n; i++ {
					if w[i] < got {
						t.Fatalf("%s n=%d k=%d: v[%d]=%v below the k-th", name, n, k, i, w[i])
					}
				}
			}
		}
	}
}
