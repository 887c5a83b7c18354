package forest

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestValidate(t *testing.T) {
	// The rules are the package's own contract (common practice for tree
	// readers: pprof's profile.CheckValid style); each row breaks one.
	for _, c := range []struct {
		name       string
		break_     func(e *Ensemble)
		maxDepth   int
		tree, node int // -2: not a *NodeError
		msg        string
	}{
		{"valid", func(e *Ensemble) {}, 0, 0, 0, ""},
		{"valid at the depth limit", func(e *Ensemble) {}, 2, 0, 0, ""},
		{"too deep", func(e *Ensemble) {}, 1, 0, 4, "depth 2 exceeds the limit 1"},
		{"no trees", func(e *Ensemble) { e.Trees = nil }, 0, -2, 0, "no trees"},
		{"no classes", func(e *Ensemble) { e.NumClass = 0; e.BaseMargin = nil }, 0, -2, 0, "0 outputs per row"},
		{"base margin count", func(e *Ensemble) { e.BaseMargin = []float64{0, 0} }, 0, -2, 0, "2 base margins for 1 outputs"},
		{"base margin NaN", func(e *Ensemble) { e.BaseMargin[0] = math.NaN() }, 0, -2, 0, "base margin of output 0 is NaN"},
		{"rule unset", func(e *Ensemble) { e.Rule = 0 }, 0, -2, 0, "split rule 0"},
		{"task unset", func(e *Ensemble) { e.Task = 0 }, 0, -2, 0, "task 0"},
		{"link unknown", func(e *Ensemble) { e.Link = 9 }, 0, -2, 0, "link 9"},
		{"softmax with one class", func(e *Ensemble) { e.Link = LinkSoftmax }, 0, -2, 0, "needs at least 2 classes"},
		{"duplicate feature name", func(e *Ensemble) { e.FeatureNames[2] = "a" }, 0, -2, 0, `feature name "a" used by features 0 and 2`},
		{"empty feature name", func(e *Ensemble) { e.FeatureNames[1] = "" }, 0, -2, 0, "feature 1 has an empty name"},
		{"categorical flags length", func(e *Ensemble) { e.Categorical = []bool{true} }, 0, -2, 0, "1 categorical flags for 3 features"},
		{"tree without nodes", func(e *Ensemble) { e.Trees[1].Nodes = nil; e.Trees[1].Value = nil }, 0, 1, -1, "no nodes"},
		{"value length", func(e *Ensemble) { e.Trees[0].Value = e.Trees[0].Value[:4] }, 0, 0, -1, "4 values for 5 nodes"},
		{"gain length", func(e *Ensemble) { e.Trees[0].Gain = []float64{1} }, 0, 0, -1, "1 gains for 5 nodes"},
		{"cover length", func(e *Ensemble) { e.Trees[0].Cover = []float64{1} }, 0, 0, -1, "1 covers for 5 nodes"},
		{"class out of range", func(e *Ensemble) { e.Trees[1].Class = 1 }, 0, 1, -1, "class 1 out of range [0, 1)"},
		{"child out of range", func(e *Ensemble) { e.Trees[0].Nodes[2].Right = 99 }, 0, 0, 2, "child index 99 out of range (tree has 5 nodes)"},
		{"negative child", func(e *Ensemble) { e.Trees[0].Nodes[0].Left = -1 }, 0, 0, 0, "child index -1 out of range"},
		{"cycle", func(e *Ensemble) { e.Trees[0].Nodes[2].Left = 0 }, 0, 0, 2, "child 0 reached twice from the root (cycle or shared child)"},
		{"shared child", func(e *Ensemble) { e.Trees[0].Nodes[2].Left = 1 }, 0, 0, 2, "child 1 reached twice"},
		{"both children equal", func(e *Ensemble) { e.Trees[1].Nodes[0].Right = 1 }, 0, 1, 0, "child 1 reached twice"},
		{"feature beyond declared", func(e *Ensemble) { e.Trees[0].Nodes[2].Feature = 3 }, 0, 0, 2, "feature index 3 out of range (3 features declared)"},
		{"negative feature", func(e *Ensemble) { e.Trees[1].Nodes[0].Feature = -1 }, 0, 1, 0, "feature index -1 out of range"},
		{"NaN threshold", func(e *Ensemble) { e.Trees[0].Nodes[0].Threshold = math.NaN() }, 0, 0, 0, "threshold NaN is not finite"},
		{"infinite threshold", func(e *Ensemble) { e.Trees[1].Nodes[0].Threshold = math.Inf(-1) }, 0, 1, 0, "threshold -Inf is not finite"},
		{"threshold beyond float32", func(e *Ensemble) { e.Trees[1].Nodes[0].Threshold = 1e300 }, 0, 1, 0, "outside float32 range"},
		{"NaN leaf", func(e *Ensemble) { e.Trees[0].Value[4] = math.NaN() }, 0, 0, 4, "leaf value NaN"},
		{"category set missing", func(e *Ensemble) { e.Trees[1].Nodes[0].Flags |= FlagCategorical; e.Trees[1].Nodes[0].CatSet = 0 }, 0, 1, 0, "category set 0 out of range (tree has 0 sets)"},
		{"unreachable node checked too", func(e *Ensemble) {
			tr := &e.Trees[1]
			tr.Nodes = append(tr.Nodes, split(7, 0, 0, 0, 0))
			tr.Value = append(tr.Value, 0)
		}, 0, 1, 3, "feature index 7 out of range"},
	} {
		t.Run(c.name, func(t *testing.T) {
			e := smallEnsemble()
			c.break_(e)
			err := e.Validate(c.maxDepth)
			if c.msg == "" {
				if err != nil {
					t.Fatalf("unexpected error: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("no error, want %q", c.msg)
			}
			if !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %q does not contain %q", err, c.msg)
			}
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q spans lines", err)
			}
			if !errors.Is(err, ErrInvalid) {
				t.Errorf("error %q does not wrap ErrInvalid", err)
			}
			var ne *NodeError
			if c.tree == -2 {
				if errors.As(err, &ne) {
					t.Errorf("ensemble-level error came as a *NodeError: %v", err)
				}
				return
			}
			if !errors.As(err, &ne) {
				t.Fatalf("error %q is not a *NodeError", err)
			}
			if ne.Tree != c.tree || ne.Node != c.node {
				t.Errorf("located at tree %d node %d, want tree %d node %d", ne.Tree, ne.Node, c.tree, c.node)
			}
		})
	}
}

func TestValidateDoesNotModify(t *testing.T) {
	e := smallEnsemble()
	before := Summarize(e)
	if err := e.Validate(0); err != nil {
		t.Fatal(err)
	}
	after := Summarize(e)
	if before.Splits != after.Splits || before.Leaves != after.Leaves || e.ByFeature != nil {
		t.Errorf("Validate changed the ensemble")
	}
}

func TestNodeErrorMessage(t *testing.T) {
	for _, c := range []struct {
		err  *NodeError
		want string
	}{
		{&NodeError{Tree: 12, Node: 7, Err: errors.New("child index 99 out of range")}, "tree 12 node 7: child index 99 out of range"},
		{&NodeError{Tree: 3, Node: -1, Err: errors.New("no nodes")}, "tree 3: no nodes"},
	} {
		if got := c.err.Error(); got != c.want {
			t.Errorf("%q, want %q", got, c.want)
		}
	}
}
