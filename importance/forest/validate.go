package forest

import (
	"errors"
	"fmt"
	"math"
	"strconv"
)

// DefaultMaxDepth is the depth limit Validate applies when given 0.
const DefaultMaxDepth = 64

// NodeError locates a structural problem in one tree of an ensemble. Node is
// -1 when the problem concerns the whole tree.
type NodeError struct {
	// Tree is the tree index in boosting order.
	Tree int
	// Node is the node index inside the tree, -1 for the whole tree.
	Node int
	// Err is the problem.
	Err error
}

// Error reads "tree 12 node 7: <problem>" or "tree 12: <problem>".
func (e *NodeError) Error() string {
	s := "tree " + strconv.Itoa(e.Tree)
	if e.Node >= 0 {
		s += " node " + strconv.Itoa(e.Node)
	}
	return s + ": " + e.Err.Error()
}

// Unwrap returns the problem.
func (e *NodeError) Unwrap() error { return e.Err }

// ErrInvalid is wrapped by every error Validate returns, so callers can test
// for a structurally broken ensemble with errors.Is.
var ErrInvalid = errors.New("invalid ensemble")

// invalid formats a problem that wraps ErrInvalid.
func invalid(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrInvalid}, args...)...)
}

// Validate checks that the ensemble can be walked safely and means what it
// says. Ensemble level: NumClass >= 1 (>= 2 for the multi-class task and the
// softmax link), len(BaseMargin) == NumClass with finite entries, Rule, Task
// and Link set to known values, at least one tree, feature names unique and
// non-empty, Categorical nil or one flag per feature. Per tree: at least one
// node, len(Value) == len(Nodes), Gain and Cover nil or of the same length,
// Class in [0, NumClass). Per node (every node, reachable or not, so that no
// later walk can index out of range): internal nodes have both children in
// range and a feature in [0, NumFeatures); numeric splits have a finite
// threshold (within float32 range for LessThanFloat32); categorical splits
// index an existing CatSet; leaves have a finite Value. From the root: no
// node is reached twice (a cycle or a shared child) and no path is deeper
// than maxDepth (the root is at depth 0; maxDepth <= 0 means
// DefaultMaxDepth). Tree problems are returned as *NodeError; all errors
// wrap ErrInvalid. Validate does not modify e.
func (e *Ensemble) Validate(maxDepth int) error {
	if maxDepth <= 0 {
		maxDepth = DefaultMaxDepth
	}
	if err := e.validateHeader(); err != nil {
		return err
	}
	var seen []bool
	var stack []nodeDepth
	for ti := range e.Trees {
		var err error
		seen, stack, err = e.validateTree(ti, maxDepth, seen, stack)
		if err != nil {
			return err
		}
	}
	return nil
}

// validateHeader checks the ensemble-level fields.
func (e *Ensemble) validateHeader() error {
	switch e.Rule {
	case LessThanFloat32, LessEqualFloat64:
	default:
		return invalid("split rule %d not set or unknown", uint8(e.Rule))
	}
	switch e.Task {
	case TaskRegression, TaskBinary, TaskRanking, TaskMulticlass:
	default:
		return invalid("task %d not set or unknown", uint8(e.Task))
	}
	switch e.Link {
	case LinkIdentity, LinkLogistic, LinkSoftmax, LinkExp:
	default:
		return invalid("link %d not set or unknown", uint8(e.Link))
	}
	if e.NumClass < 1 {
		return invalid("%d outputs per row, want at least 1", e.NumClass)
	}
	if (e.Task == TaskMulticlass || e.Link == LinkSoftmax) && e.NumClass < 2 {
		return invalid("%s task with %s link needs at least 2 classes, have %d", e.Task, e.Link, e.NumClass)
	}
	if len(e.BaseMargin) != e.NumClass {
		return invalid("%d base margins for %d outputs", len(e.BaseMargin), e.NumClass)
	}
	for k, m := range e.BaseMargin {
		if math.IsNaN(m) || math.IsInf(m, 0) {
			return invalid("base margin of output %d is %v", k, m)
		}
	}
	if len(e.Trees) == 0 {
		return invalid("no trees")
	}
	if e.Categorical != nil && len(e.Categorical) != len(e.FeatureNames) {
		return invalid("%d categorical flags for %d features", len(e.Categorical), len(e.FeatureNames))
	}
	names := make(map[string]int, len(e.FeatureNames))
	for j, nm := range e.FeatureNames {
		if nm == "" {
			return invalid("feature %d has an empty name", j)
		}
		if prev, dup := names[nm]; dup {
			return invalid("feature name %q used by features %d and %d", nm, prev, j)
		}
		names[nm] = j
	}
	return nil
}

// nodeDepth is a stack entry of the walk from the root.
type nodeDepth struct {
	node  int32
	depth int
}

// validateTree checks tree ti; seen and stack are scratch buffers reused
// across trees and returned for the next call.
func (e *Ensemble) validateTree(ti, maxDepth int, seen []bool, stack []nodeDepth) ([]bool, []nodeDepth, error) {
	t := &e.Trees[ti]
	treeErr := func(format string, args ...any) error {
		return &NodeError{Tree: ti, Node: -1, Err: invalid(format, args...)}
	}
	nodeErr := func(ni int, format string, args ...any) error {
		return &NodeError{Tree: ti, Node: ni, Err: invalid(format, args...)}
	}
	n := len(t.Nodes)
	if n == 0 {
		return seen, stack, treeErr("no nodes")
	}
	if len(t.Value) != n {
		return seen, stack, treeErr("%d values for %d nodes", len(t.Value), n)
	}
	if t.Gain != nil && len(t.Gain) != n {
		return seen, stack, treeErr("%d gains for %d nodes", len(t.Gain), n)
	}
	if t.Cover != nil && len(t.Cover) != n {
		return seen, stack, treeErr("%d covers for %d nodes", len(t.Cover), n)
	}
	if t.Class < 0 || t.Class >= e.NumClass {
		return seen, stack, treeErr("class %d out of range [0, %d)", t.Class, e.NumClass)
	}
	nf := len(e.FeatureNames)
	for ni := range t.Nodes {
		nd := &t.Nodes[ni]
		if nd.IsLeaf() {
			if v := t.Value[ni]; math.IsNaN(v) || math.IsInf(v, 0) {
				return seen, stack, nodeErr(ni, "leaf value %v", v)
			}
			continue
		}
		for _, c := range [2]int32{nd.Left, nd.Right} {
			if c < 0 || int(c) >= n {
				return seen, stack, nodeErr(ni, "child index %d out of range (tree has %d nodes)", c, n)
			}
		}
		if nd.Feature < 0 || int(nd.Feature) >= nf {
			return seen, stack, nodeErr(ni, "feature index %d out of range (%d features declared)", nd.Feature, nf)
		}
		if nd.Flags&FlagCategorical != 0 {
			if nd.CatSet < 0 || int(nd.CatSet) >= len(t.CatSets) {
				return seen, stack, nodeErr(ni, "category set %d out of range (tree has %d sets)", nd.CatSet, len(t.CatSets))
			}
			continue
		}
		th := nd.Threshold
		if math.IsNaN(th) || math.IsInf(th, 0) {
			return seen, stack, nodeErr(ni, "threshold %v is not finite", th)
		}
		if e.Rule == LessThanFloat32 && math.Abs(th) > math.MaxFloat32 {
			return seen, stack, nodeErr(ni, "threshold %v outside float32 range", th)
		}
	}
	if cap(seen) < n {
		seen = make([]bool, n)
	} else {
		seen = seen[:n]
		clear(seen)
	}
	stack = append(stack[:0], nodeDepth{0, 0})
	seen[0] = true
	for len(stack) > 0 {
		top := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if top.depth > maxDepth {
			return seen, stack, nodeErr(int(top.node), "depth %d exceeds the limit %d", top.depth, maxDepth)
		}
		nd := &t.Nodes[top.node]
		if nd.IsLeaf() {
			continue
		}
		for _, c := range [2]int32{nd.Left, nd.Right} {
			if seen[c] {
				return seen, stack, nodeErr(int(top.node), "child %d reached twice from the root (cycle or shared child)", c)
			}
			seen[c] = true
			stack = append(stack, nodeDepth{c, top.depth + 1})
		}
	}
	return seen, stack, nil
}
