package treefile_test

import (
	"fmt"
	"path/filepath"
	"strings"

	"splitledger/importance/forest"
	"splitledger/storage/treefile"
)

// Read an XGBoost JSON model, sniffing the format, and describe it.
func ExampleReadFile() {
	path := filepath.Join("..", "..", "testdata", "models", "multiclass", "model.json")
	e, err := treefile.ReadFile(path, treefile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	s := forest.Summarize(e)
	fmt.Println(e.Format, e.Objective, e.Task, e.Link)
	fmt.Println("trees per class:", s.TreesPerClass)
	fmt.Println("features used:", s.FeaturesUsed, "of", s.FeaturesDeclared)
	// Output:
	// xgboost-json multi:softprob multiclass softmax
	// trees per class: [10 10 10]
	// features used: 8 of 8
}

// A text dump does not record the objective or base score: pass them.
func ExampleRead_dump() {
	dump := "booster[0]:\n0:[f1<0.5] yes=1,no=2,missing=2\n\t1:leaf=-0.4\n\t2:leaf=0.3\n"
	base := 0.5
	e, err := treefile.Read(strings.NewReader(dump), "dump.txt", treefile.Options{Objective: "binary:logistic", BaseScore: &base})
	if err != nil {
		fmt.Println(err)
		return
	}
	m := make([]float64, 2)
	e.Margins(m, [][]float64{{0, 0}, {0.2, 0.9}}, 2, 1)
	fmt.Println(e.Format, e.FeatureNames, m)
	// Output:
	// xgboost-dump-text [f0 f1] [-0.4000000059604645 0.30000001192092896]
}

// Errors name the file and where in it the problem is.
func ExampleRead_error() {
	dump := "booster[0]:\n0:[f1<0.5] yes=1,no=7,missing=1\n\t1:leaf=-0.4\n\t2:leaf=0.3\n"
	_, err := treefile.Read(strings.NewReader(dump), "models/cand.txt", treefile.Options{})
	fmt.Println(err)
	// Output:
	// models/cand.txt:2: tree 0 node 0: child id 7 not in the tree
}
