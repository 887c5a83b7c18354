package treeshap_test

import (
	"fmt"

	"splitledger/importance/forest"
	"splitledger/importance/treeshap"
)

// A one-split model: feature 0 < 0.5 goes left (value 1, 40 training rows
// of cover), else right (value -2, 60). The expected value is
// 0.4·1 + 0.6·(-2) = -0.8, so a row going left gets φ0 = 1 - (-0.8) = 1.8.
func ExampleExplainer_Row() {
	leaf := forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
	e := &forest.Ensemble{
		Task: forest.TaskRegression, Link: forest.LinkIdentity, Rule: forest.LessThanFloat32,
		NumClass: 1, BaseMargin: []float64{0.5}, FeatureNames: []string{"price", "photos"},
		Trees: []forest.Tree{{
			Nodes: []forest.Node{{Feature: 0, Threshold: 0.5, Left: 1, Right: 2, CatSet: -1}, leaf, leaf},
			Value: []float64{0, 1, -2},
			Cover: []float64{100, 40, 60},
		}},
	}
	x, err := treeshap.New(e)
	if err != nil {
		fmt.Println(err)
		return
	}
	phi := make([]float64, x.RowLen())
	x.Row(phi, []float64{0.2, 7})
	fmt.Printf("price %.2f, photos %.2f, bias %.2f\n", phi[0], phi[1], phi[2])
	// Output: price 1.80, photos 0.00, bias -0.30
}
