package treeshap

import (
	"fmt"
	"math"
	"testing"

	"splitledger/importance/forest"
)

// TestDecideAgreesWithNext checks that the in-place comparison of plain
// numeric splits takes the branch forest.Next takes, for both rules, every
// node flag and values on, just off and float32-rounding onto the threshold
// (the float32 comparison is XGBoost 1.7.4's; LightGBM compares x <= t in
// double), plus NaN, ±Inf, ±0 and values below LightGBM's zero threshold.
func TestDecideAgreesWithNext(t *testing.T) {
	th := 0.30000001192092896 // float32(0.3) widened
	values := []float64{
		th, math.Nextafter(th, 0), math.Nextafter(th, 1), 0.3, 0.29999999, 0.30000002,
		math.NaN(), math.Inf(1), math.Inf(-1), 0, math.Copysign(0, -1), 1e-36, -1e-36,
		-0.5, 2, 3, 5, 64, 1e300,
	}
	tree := &forest.Tree{CatSets: [][]uint32{{1<<2 | 1<<3}, {0, 1}}}
	flags := []struct {
		name   string
		flags  uint8
		catSet int32
	}{
		{"numeric", 0, -1},
		{"default left", forest.FlagDefaultLeft, -1},
		{"NaN as zero", forest.FlagNaNAsZero, -1},
		{"zero is missing", forest.FlagZeroIsMissing | forest.FlagDefaultLeft, -1},
		{"categorical right", forest.FlagCategorical, 0},
		{"categorical left", forest.FlagCategorical | forest.FlagInSetLeft | forest.FlagDefaultLeft, 1},
	}
	for _, rule := range []forest.Rule{forest.LessThanFloat32, forest.LessEqualFloat64} {
		for _, fl := range flags {
			t.Run(fmt.Sprintf("%v/%s", rule, fl.name), func(t *testing.T) {
				nd := &forest.Node{Feature: 0, Threshold: th, Left: 1, Right: 2, CatSet: fl.catSet, Flags: fl.flags}
				got := decide(make([]uint64, len(values)), tree, nd, values, rule)
				for i, v := range values {
					want := uint64(0)
					if forest.Next(tree, nd, v, rule) == nd.Right {
						want = ^uint64(0)
					}
					if got[i] != want {
						t.Errorf("x = %v: right mask %x, forest.Next says %x", v, got[i], want)
					}
				}
			})
		}
	}
}
