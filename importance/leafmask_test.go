package importance

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"sort"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/storage/treefile"
	"splitledger/storage/treefile/leavesref"
)

func TestLastAtOrBelow(t *testing.T) {
	// The definition, by linear scan: the last index whose element is at
	// most c.
	scan := func(s []int32, c int32) int {
		i := -1
		for j, v := range s {
			if v <= c {
				i = j
			}
		}
		return i
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for n := 0; n < 40; n++ {
		s := make([]int32, n)
		v := int32(0)
		for i := range s {
			v += 1 + rng.Int32N(3)
			s[i] = v
		}
		for c := int32(-1); c <= v+2; c++ {
			if got, want := lastAtOrBelow(s, c), scan(s, c); got != want {
				t.Fatalf("n=%d c=%d: got %d, want %d", n, c, got, want)
			}
		}
	}
}

// The leaf-mask form and the branch walks are two computations of the same
// step functions; every measure must come out the same from both (up to
// the order of floating-point additions).
func TestLeafMasksAgreeWithWalks(t *testing.T) {
	type input struct {
		name   string
		e      *forest.Ensemble
		f      *frame.Frame
		metric string
	}
	var cases []input
	for _, c := range []struct{ fixture, metric string }{
		{"binary", "logloss"}, {"missing", "logloss"}, {"regression", "rmse"},
		{"multiclass", "logloss"}, {"ranking", "ndcg"}, {"binary", "auc"},
	} {
		e, f := loadFixture(t, c.fixture)
		if c.fixture != "ranking" { // whole query groups: keep every row
			f = headRows(f, 300)
		}
		cases = append(cases, input{c.fixture + "/" + c.metric, e, f, c.metric})
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := Config{Metric: tc.metric, Replicates: 10, Repeats: 3, Workers: 2}
			masked, err := MeasureModel(tc.e, "m", tc.f, cfg)
			if err != nil {
				t.Fatal(err)
			}
			leafMasks = false
			walked, err := MeasureModel(tc.e, "m", tc.f, cfg)
			leafMasks = true
			if err != nil {
				t.Fatal(err)
			}
			sameTables(t, masked, walked)
			// every other tree masked, the rest walked
			maskOnly = func(tree int) bool { return tree%2 == 0 }
			mixed, err := MeasureModel(tc.e, "m", tc.f, cfg)
			maskOnly = nil
			if err != nil {
				t.Fatal(err)
			}
			sameTables(t, mixed, walked)
		})
	}
}

// The same agreement on LightGBM models and rows from the module
// github.com/dmitryikh/leaves (testdata): numeric splits with NaN taken as
// zero (leaf masks), category sets (walks, mixed with masks in one model),
// five and thirteen classes.
func TestLeafMasksAgreeWithWalksLightGBM(t *testing.T) {
	dir := leavesref.Dir(t)
	cases := []struct {
		model, data, sep string
		skip             int
	}{
		{"lg_breast_cancer.txt", "lg_breast_cancer_data.txt", "", 0},
		{"lg_dart_breast_cancer.model", "breast_cancer_test.tsv", "\t", 0},
		{"lgmulticlass.model", "multiclass_test.tsv", "\t", 1},
		{"lg_kddcup99.model", "kddcup99_test.tsv", "\t", 0},
	}
	for _, tc := range cases {
		t.Run(tc.model, func(t *testing.T) {
			e, err := treefile.ReadFile(filepath.Join(dir, tc.model), treefile.Options{})
			if err != nil {
				t.Fatal(err)
			}
			f := readWhitespaceTable(t, filepath.Join(dir, tc.data), tc.sep, tc.skip, e.FeatureNames, 400)
			cfg := Config{Metric: "mean_abs_delta", Replicates: 10, Workers: 2}
			r, err := newRun(e, f, cfg.withDefaults(), MetricMeanAbsDelta, 0)
			if err != nil {
				t.Fatal(err)
			}
			if r.masks.walked == len(e.Trees) {
				t.Fatal("no tree took the leaf-mask form")
			}
			a, err := MeasureModel(e, "m", f, cfg)
			if err != nil {
				t.Fatal(err)
			}
			leafMasks = false
			b, err := MeasureModel(e, "m", f, cfg)
			leafMasks = true
			if err != nil {
				t.Fatal(err)
			}
			sameTables(t, a, b)
		})
	}
}

// sameTables fails unless every traffic measure of a and b (value and
// interval) agrees to 1e-9 relative, NaN matching NaN.
func sameTables(t *testing.T, a, b *Table) {
	t.Helper()
	compared := 0
	for i := range a.Features {
		x, y := a.Features[i].Traffic, b.Features[i].Traffic
		for m := range x {
			for _, v := range [][2]float64{{x[m].Value, y[m].Value}, {x[m].Lo, y[m].Lo}, {x[m].Hi, y[m].Hi}} {
				if !(v[0] == v[1] || v[0] != v[0] && v[1] != v[1] || math.Abs(v[0]-v[1]) <= 1e-9*(1+math.Abs(v[1]))) {
					t.Errorf("%s measure %d: masks %.15g, walks %.15g", a.Features[i].Feature, m, v[0], v[1])
				}
				compared++
			}
		}
	}
	if compared == 0 {
		t.Fatal("nothing compared")
	}
}

// readWhitespaceTable reads a numeric table (leavesref.ReadTable), keeping
// at most limit rows and the first len(names) columns, as a frame.
func readWhitespaceTable(t *testing.T, path, sep string, skip int, names []string, limit int) *frame.Frame {
	t.Helper()
	rows := leavesref.ReadTable(t, path, sep, skip)
	f := &frame.Frame{Names: names, Columns: make([][]float64, len(names)), SampleFraction: 1, Missing: make([]int, len(names))}
	for r, row := range rows[:min(limit, len(rows))] {
		if len(row) < len(names) {
			t.Fatalf("%s row %d: %d columns, want %d", path, r+1, len(row), len(names))
		}
		for j := range names {
			f.Columns[j] = append(f.Columns[j], row[j])
		}
		f.Rows++
	}
	return f
}

// The table budget: nothing fits in none, everything in the default.
func TestMaskTableBudget(t *testing.T) {
	e, f := loadFixture(t, "binary")
	cfg := Config{Replicates: 5}.withDefaults()
	for _, c := range []struct {
		budget, walked int
	}{{0, len(e.Trees)}, {256 << 20, 0}} {
		saved := maxMaskTables
		maxMaskTables = c.budget
		r, err := newRun(e, f, cfg, MetricLogLoss, 0)
		maxMaskTables = saved
		if err != nil {
			t.Fatal(err)
		}
		if r.masks.walked != c.walked {
			t.Errorf("budget %d: %d trees walked, want %d", c.budget, r.masks.walked, c.walked)
		}
	}
}

// countBelow on orderKey values against sort.Search on the floats, its
// definition, with ties, signs, both zeros, tiny and huge magnitudes and
// infinities.
func TestCountBelow(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	pool := []float64{math.Inf(-1), -math.MaxFloat64, -3, -1.5, -math.SmallestNonzeroFloat64,
		math.Copysign(0, -1), 0, math.SmallestNonzeroFloat64, 0.25, 1, 2.5, math.MaxFloat64, math.Inf(1)}
	for n := 0; n < 30; n++ {
		th := make([]float64, n)
		for i := range th {
			th[i] = pool[rng.IntN(len(pool))]
		}
		slices.Sort(th)
		keys := make([]int64, n)
		for i, v := range th {
			keys[i] = orderKey(v)
		}
		for _, x := range append(pool, -2, -0.5, 0.1, 3) {
			le := sort.Search(len(th), func(i int) bool { return th[i] > x })
			lt := sort.SearchFloat64s(th, x)
			if got := countBelow(keys, orderKey(x), true); got != le {
				t.Fatalf("%v at or below %v: %d, want %d", th, x, got, le)
			}
			if got := countBelow(keys, orderKey(x), false); got != lt {
				t.Fatalf("%v below %v: %d, want %d", th, x, got, lt)
			}
		}
	}
}
