package importance

import (
	"math"
	"math/rand/v2"
	"testing"

	"splitledger/importance/forest"
	"splitledger/importance/frame"
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
			compared := 0
			for i := range masked.Features {
				a, b := masked.Features[i].Traffic, walked.Features[i].Traffic
				for m := range a {
					for _, v := range [][2]float64{{a[m].Value, b[m].Value}, {a[m].Lo, b[m].Lo}, {a[m].Hi, b[m].Hi}} {
						if !(v[0] == v[1] || v[0] != v[0] && v[1] != v[1] || math.Abs(v[0]-v[1]) <= 1e-9*(1+math.Abs(v[1]))) {
							t.Errorf("%s measure %d: masks %.15g, walks %.15g", masked.Features[i].Feature, m, v[0], v[1])
						}
						compared++
					}
				}
			}
			if compared == 0 {
				t.Fatal("nothing compared")
			}
		})
	}
}
