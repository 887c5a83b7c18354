// Package forest holds the compiled tree ensemble that every measure walks.
//
// A tree is a flat slice of small Node values addressed by index (node 0 is
// the root), with the cold per-node statistics (gain, cover) in parallel
// slices beside it. Split semantics are explicit per ensemble because the two
// training libraries disagree:
//
//   - XGBoost converts the input to float32 and goes left when x < threshold
//     (threshold is float32 too). Comparing in float64 sends rows that sit on a
//     threshold the wrong way.
//   - LightGBM goes left when x <= threshold, in float64, and treats missing
//     values per node (none: NaN counts as 0; zero: 0 and NaN take the default
//     branch; nan: NaN takes the default branch).
package forest

import (
	"fmt"
	"math"
)

// Rule is the comparison a numeric split applies to a feature value.
type Rule uint8

const (
	// LessThanFloat32 goes left when float32(x) < float32(threshold) (XGBoost).
	LessThanFloat32 Rule = iota + 1
	// LessEqualFloat64 goes left when x <= threshold in float64 (LightGBM).
	LessEqualFloat64
)

// String names the rule as it appears in reports.
func (r Rule) String() string {
	switch r {
	case LessThanFloat32:
		return "x < t (float32)"
	case LessEqualFloat64:
		return "x <= t (float64)"
	default:
		return fmt.Sprintf("rule(%d)", uint8(r))
	}
}

// Task is what the model predicts; it picks the default quality metric.
type Task uint8

const (
	// TaskRegression predicts a real value (RMSE).
	TaskRegression Task = iota + 1
	// TaskBinary predicts a probability through the logistic link (log loss).
	TaskBinary
	// TaskRanking orders items inside a query group (NDCG@k).
	TaskRanking
	// TaskMulticlass predicts one margin per class, softmax link.
	TaskMulticlass
)

// String names the task.
func (t Task) String() string {
	switch t {
	case TaskRegression:
		return "regression"
	case TaskBinary:
		return "binary"
	case TaskRanking:
		return "ranking"
	case TaskMulticlass:
		return "multiclass"
	default:
		return fmt.Sprintf("task(%d)", uint8(t))
	}
}

// Link maps raw margins to predictions.
type Link uint8

const (
	// LinkIdentity leaves the margin as it is (regression, ranking).
	LinkIdentity Link = iota + 1
	// LinkLogistic applies 1/(1+exp(-m)).
	LinkLogistic
	// LinkSoftmax normalises the per-class margins of a row.
	LinkSoftmax
	// LinkExp applies exp(m) (count and gamma objectives).
	LinkExp
)

// String names the link.
func (l Link) String() string {
	switch l {
	case LinkIdentity:
		return "identity"
	case LinkLogistic:
		return "logistic"
	case LinkSoftmax:
		return "softmax"
	case LinkExp:
		return "exp"
	default:
		return fmt.Sprintf("link(%d)", uint8(l))
	}
}

// Node flags.
const (
	// FlagLeaf marks a leaf; Feature, Left and Right are meaningless.
	FlagLeaf uint8 = 1 << iota
	// FlagDefaultLeft sends missing values left (else right).
	FlagDefaultLeft
	// FlagCategorical marks a category-set split (see Tree.CatSets).
	FlagCategorical
	// FlagNaNAsZero replaces NaN by 0 before the test (LightGBM missing
	// type none and zero).
	FlagNaNAsZero
	// FlagZeroIsMissing sends |x| <= 1e-35 to the default branch (LightGBM
	// missing type zero).
	FlagZeroIsMissing
	// FlagInSetLeft sends categories found in the set left (LightGBM); when
	// clear they go right (XGBoost).
	FlagInSetLeft
)

// ZeroThreshold is LightGBM's bound below which a value counts as zero:
// kZeroThreshold is the float32 1e-35f widened to double.
var ZeroThreshold = float64(float32(1e-35))

// Node is one node of a tree. Internal nodes test Feature; leaves carry their
// output in Tree.Value.
type Node struct {
	// Threshold of a numeric split. For LessThanFloat32 ensembles it already
	// holds a float32-representable value.
	Threshold float64
	// Feature is the tested feature index, -1 for leaves.
	Feature int32
	// Left and Right are child node indexes, -1 for leaves.
	Left, Right int32
	// CatSet indexes Tree.CatSets for categorical splits, -1 otherwise.
	CatSet int32
	// Flags is a combination of the Flag constants.
	Flags uint8
}

// IsLeaf reports whether n is a leaf.
func (n *Node) IsLeaf() bool { return n.Flags&FlagLeaf != 0 }

// Tree is one regression tree in struct-of-arrays form.
type Tree struct {
	// Nodes in index order; node 0 is the root.
	Nodes []Node
	// Value holds the leaf output (already scaled by the learning rate) for
	// leaves; for internal nodes it may hold the training library's internal
	// value or 0.
	Value []float64
	// Gain is the split gain (loss reduction) of internal nodes, 0 on leaves;
	// nil when the file carries no statistics.
	Gain []float64
	// Cover is the sum of hessians (XGBoost) or the training row count
	// (LightGBM) reaching each node; nil when the file carries none.
	Cover []float64
	// CatSets are bitsets of categories: bit c of word c/32 is set when
	// category c belongs to the set.
	CatSets [][]uint32
	// Class is the output group (class index) this tree adds to.
	Class int
}

// Ensemble is a compiled gradient-boosted tree model.
type Ensemble struct {
	// Format names the file format it was read from, e.g. "xgboost-json".
	Format string
	// Objective is the training library's objective string.
	Objective string
	// Task, Link and Rule give the model's semantics.
	Task Task
	Link Link
	Rule Rule
	// NumClass is the number of outputs per row (1 unless multi-class).
	NumClass int
	// BaseMargin is added once per row to each output's raw margin
	// (len NumClass).
	BaseMargin []float64
	// FeatureNames has one name per declared feature (len = NumFeatures).
	FeatureNames []string
	// Categorical marks declared categorical features (may be nil).
	Categorical []bool
	// Trees in boosting order.
	Trees []Tree
	// ByFeature lists, per feature, the indexes of the trees that test it.
	// Filled by Index.
	ByFeature [][]int32
}

// NumFeatures is the number of declared features.
func (e *Ensemble) NumFeatures() int { return len(e.FeatureNames) }

// Index fills ByFeature from the trees. Readers call it after Validate.
func (e *Ensemble) Index() {
	e.ByFeature = make([][]int32, e.NumFeatures())
	for ti := range e.Trees {
		seen := map[int32]bool{}
		for _, n := range e.Trees[ti].Nodes {
			if n.IsLeaf() || seen[n.Feature] {
				continue
			}
			seen[n.Feature] = true
			e.ByFeature[n.Feature] = append(e.ByFeature[n.Feature], int32(ti))
		}
	}
}

// SlowFlags mark nodes that need more than a threshold test. Hot loops
// test `n.Flags&SlowFlags == 0 && x == x` and compare in place (see
// Ensemble.Margins), calling Next otherwise.
const SlowFlags = FlagCategorical | FlagNaNAsZero | FlagZeroIsMissing

// Next returns the child that value x takes at internal node n under rule.
// NaN means missing.
func Next(t *Tree, n *Node, x float64, rule Rule) int32 {
	if n.Flags&SlowFlags == 0 && x == x {
		return threshold(n, x, rule)
	}
	return nextSlow(t, n, x, rule)
}

// threshold applies the numeric test of the rule to a present value.
func threshold(n *Node, x float64, rule Rule) int32 {
	if rule == LessThanFloat32 {
		if float32(x) < float32(n.Threshold) {
			return n.Left
		}
		return n.Right
	}
	if x <= n.Threshold {
		return n.Left
	}
	return n.Right
}

func nextSlow(t *Tree, n *Node, x float64, rule Rule) int32 {
	if x != x { // NaN
		if n.Flags&FlagNaNAsZero == 0 {
			if n.Flags&FlagDefaultLeft != 0 {
				return n.Left
			}
			return n.Right
		}
		x = 0
	}
	if n.Flags&FlagZeroIsMissing != 0 && math.Abs(x) <= ZeroThreshold {
		if n.Flags&FlagDefaultLeft != 0 {
			return n.Left
		}
		return n.Right
	}
	if n.Flags&FlagCategorical != 0 {
		c := x
		if n.Flags&FlagInSetLeft != 0 && x > -1 && x < 0 {
			c = 0 // LightGBM truncates toward zero: (-1, 0) is category 0
		}
		in := InSet(t.CatSets[n.CatSet], c)
		if in == (n.Flags&FlagInSetLeft != 0) {
			return n.Left
		}
		return n.Right
	}
	return threshold(n, x, rule)
}

// InSet reports whether category value x (truncated to an integer) is in the
// bitset. Negative, non-finite or out-of-range values are not in the set.
func InSet(bits []uint32, x float64) bool {
	if !(x >= 0) || x >= float64(len(bits))*32 {
		return false
	}
	c := int(x)
	return bits[c/32]&(1<<(uint(c)%32)) != 0
}

// Leaf returns the leaf index reached by row x (indexed by feature).
func (e *Ensemble) Leaf(ti int, x []float64) int32 {
	t := &e.Trees[ti]
	i := int32(0)
	for {
		n := &t.Nodes[i]
		if n.Flags&FlagLeaf != 0 {
			return i
		}
		i = Next(t, n, x[n.Feature], e.Rule)
	}
}

// MarginRow writes the raw margins (before the link) of one row into dst
// (len NumClass). x is indexed by feature; NaN means missing.
func (e *Ensemble) MarginRow(dst, x []float64) {
	copy(dst, e.BaseMargin)
	for ti := range e.Trees {
		l := e.Leaf(ti, x)
		dst[e.Trees[ti].Class] += e.Trees[ti].Value[l]
	}
}

// Transform applies the link to raw margins in place: m holds rows of
// NumClass values.
func (e *Ensemble) Transform(m []float64) {
	switch e.Link {
	case LinkLogistic:
		for i, v := range m {
			m[i] = 1 / (1 + math.Exp(-v))
		}
	case LinkExp:
		for i, v := range m {
			m[i] = math.Exp(v)
		}
	case LinkSoftmax:
		k := e.NumClass
		for r := 0; r+k <= len(m); r += k {
			row := m[r : r+k]
			mx := math.Inf(-1)
			for _, v := range row {
				mx = math.Max(mx, v)
			}
			s := 0.0
			for i, v := range row {
				row[i] = math.Exp(v - mx)
				s += row[i]
			}
			for i := range row {
				row[i] /= s
			}
		}
	}
}
