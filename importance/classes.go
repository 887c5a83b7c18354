package importance

import (
	"math"
	"sort"

	"splitledger/importance/forest"
)

var nan = math.NaN()

// valueClasses partitions the values of one feature into classes that every
// split of the ensemble on that feature treats alike, so a row's score is a
// step function of the class. Two modes:
//
//   - numeric (no category-set split on the feature): classes 0..nb-1 are
//     the intervals between the sorted distinct thresholds; class nb is
//     "missing" (NaN); class nb+1 is "zero" when some split sends zero to
//     the default branch (LightGBM missing type zero).
//   - categorical: one class per distinct value seen in the traffic (plus the
//     median and NaN), directions found by evaluating every split.
type valueClasses struct {
	rule        forest.Rule
	categorical bool
	thresholds  []float64 // numeric: sorted distinct thresholds
	// numeric: the thresholds' orderKey values, for a branch-free search
	thresholdKeys []int64
	zeroMode      bool
	nb            int // numeric bins = len(thresholds)+1
	// categorical mode: class per distinct value (NaN separately)
	values  []float64       // sorted distinct non-NaN values
	valueOf map[float64]int // value -> class
	all     []uint64        // categorical: the set of every class (walks start from it)
	n       int             // total number of classes
}

// missingClass is the class of NaN.
func (c *valueClasses) missingClass() int {
	if c.categorical {
		return len(c.values)
	}
	return c.nb
}

// zeroClass is the class of |x| <= forest.ZeroThreshold in zero mode, -1
// otherwise.
func (c *valueClasses) zeroClass() int {
	if c.categorical || !c.zeroMode {
		return -1
	}
	return c.nb + 1
}

// classOf returns the class of value v.
func (c *valueClasses) classOf(v float64) int {
	if v != v {
		return c.missingClass()
	}
	if c.categorical {
		if k, ok := c.valueOf[v]; ok {
			return k
		}
		// A value never seen: place it by search (only the median can be
		// new, and it was added); fall back to missing.
		return c.missingClass()
	}
	if c.zeroMode && math.Abs(v) <= forest.ZeroThreshold {
		return c.nb + 1
	}
	keys := c.thresholdKeys
	if c.rule == forest.LessThanFloat32 {
		// goes right at threshold t when float32(v) >= t: bin = #{t <= v32}
		return countBelow(keys, orderKey(float64(float32(v))), true)
	}
	// LightGBM: right when v > t: bin = #{t < v}
	return countBelow(keys, orderKey(v), false)
}

// countBelow returns the number of elements of the ascending slice keys
// that are below x (orEqual: at or below x); keys and x are orderKey
// values. It halves without a branch on the comparison, so the search
// costs no mispredictions.
func countBelow(keys []int64, x int64, orEqual bool) int {
	n := len(keys)
	if n == 0 {
		return 0
	}
	if orEqual {
		x++ // at or below x: below x+1 (keys of finite floats never reach MaxInt64)
	}
	lo := 0
	for n > 1 {
		half := n >> 1
		lo += half & int(below(keys[lo+half], x))
		n -= half
	}
	return lo - int(below(keys[lo], x))
}

// below returns -1 when a < b and 0 otherwise, without a branch and without
// overflow (Warren, Hacker's Delight, 2nd ed., section 2-12: the sign of
// a-b, corrected where the subtraction overflows). Go does not compile a
// conditional add inside a loop to a conditional move, so the searches
// use this mask instead.
func below(a, b int64) int64 {
	d := a - b
	return (d ^ ((a ^ b) & (d ^ a))) >> 63
}

// orderKey maps a float (not NaN) to an integer of the same order: the bits
// of a non-negative float already sort as integers, and a negative one's
// bits below the sign are flipped so that larger magnitudes sort lower.
// -0 maps to +0's key, as the two compare equal.
func orderKey(x float64) int64 {
	if x == 0 {
		x = 0 // -0 to +0
	}
	b := int64(math.Float64bits(x))
	return b ^ (b>>63)&math.MaxInt64
}

// representative returns a value of class k (used to evaluate splits).
func (c *valueClasses) representative(k int) float64 {
	switch {
	case k == c.missingClass():
		return nan
	case c.categorical:
		return c.values[k]
	case k == c.nb+1:
		return 0
	case k == 0:
		return math.Inf(-1)
	case c.rule == forest.LessThanFloat32:
		return c.thresholds[k-1]
	default:
		return math.Nextafter(c.thresholds[k-1], math.Inf(1))
	}
}

// buildClasses collects, per feature, the split structure of e and (for
// categorical features) the values present in the column.
func buildClasses(e *forest.Ensemble, cols [][]float64, medians []float64) []valueClasses {
	nf := e.NumFeatures()
	out := make([]valueClasses, nf)
	ths := make([][]float64, nf)
	for ti := range e.Trees {
		for i := range e.Trees[ti].Nodes {
			n := &e.Trees[ti].Nodes[i]
			if n.IsLeaf() {
				continue
			}
			c := &out[n.Feature]
			if n.Flags&forest.FlagCategorical != 0 {
				c.categorical = true
				continue
			}
			if n.Flags&forest.FlagZeroIsMissing != 0 {
				c.zeroMode = true
			}
			ths[n.Feature] = append(ths[n.Feature], n.Threshold)
		}
	}
	for j := range out {
		c := &out[j]
		c.rule = e.Rule
		if c.categorical {
			seen := map[float64]bool{}
			for _, v := range cols[j] {
				if v == v {
					seen[v] = true
				}
			}
			if m := medians[j]; m == m {
				seen[m] = true
			}
			for v := range seen {
				c.values = append(c.values, v)
			}
			sort.Float64s(c.values)
			c.valueOf = make(map[float64]int, len(c.values))
			for k, v := range c.values {
				c.valueOf[v] = k
			}
			c.n = len(c.values) + 1
			c.all = make([]uint64, (c.n+63)/64)
			for k := 0; k < c.n; k++ {
				c.all[k/64] |= 1 << (k % 64)
			}
			continue
		}
		t := ths[j]
		sort.Float64s(t)
		u := t[:0]
		for i, v := range t {
			if i == 0 || v != t[i-1] {
				u = append(u, v)
			}
		}
		c.thresholds = u
		c.thresholdKeys = make([]int64, len(u))
		for i, v := range u {
			c.thresholdKeys[i] = orderKey(v)
		}
		c.nb = len(u) + 1
		c.n = c.nb + 1
		if c.zeroMode {
			c.n++
		}
	}
	return out
}

// nodeSplit is the precomputed action of one internal node for the free
// walk of its own feature.
type nodeSplit struct {
	// numeric: classes [0, cut) go left, [cut, nb) right
	cut int32
	// missingLeft / zeroLeft: direction of the special classes
	missingLeft, zeroLeft bool
	// categorical: leftSet has a bit per class that goes left
	leftSet []uint64
}

// compileSplits precomputes, for every internal node, how the classes of
// its feature divide.
func compileSplits(e *forest.Ensemble, vc []valueClasses) [][]nodeSplit {
	out := make([][]nodeSplit, len(e.Trees))
	for ti := range e.Trees {
		t := &e.Trees[ti]
		ns := make([]nodeSplit, len(t.Nodes))
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsLeaf() {
				continue
			}
			c := &vc[n.Feature]
			s := &ns[i]
			if c.categorical {
				s.leftSet = make([]uint64, (c.n+63)/64)
				for k := 0; k < c.n; k++ {
					if forest.Next(t, n, c.representative(k), e.Rule) == n.Left {
						s.leftSet[k/64] |= 1 << (k % 64)
					}
				}
				continue
			}
			idx := sort.SearchFloat64s(c.thresholds, n.Threshold)
			s.cut = int32(idx + 1)
			s.missingLeft = forest.Next(t, n, nan, e.Rule) == n.Left
			s.zeroLeft = forest.Next(t, n, 0, e.Rule) == n.Left
		}
		out[ti] = ns
	}
	return out
}

// wnode is the walks' compact copy of a tree node: the split and its action
// on the feature's value classes in one record, so a walk loads one cache
// line per node instead of two.
type wnode struct {
	thr         float32 // XGBoost's float32 threshold; LightGBM reads Tree.Nodes[i].Threshold
	feat        int32
	left, right int32
	cut         int32 // numeric: classes [0, cut) go left
	flags       uint8
}

const (
	wLeaf        uint8 = 1 << iota // a leaf: its value is in left/right (see leafValue)
	wSlow                          // needs forest.Next (categorical, LightGBM missing rules)
	wMissLeft                      // the missing class goes left
	wZeroLeft                      // the zero class goes left
	wDefaultLeft                   // a missing value goes left (non-slow nodes)
	wCatFeature                    // the node's feature has category-set splits (set walks)
)

// leafValue reads a leaf's value, kept in the node's child fields so a walk
// that reaches a leaf needs no second cache line.
func (n *wnode) leafValue() float64 {
	return math.Float64frombits(uint64(uint32(n.left)) | uint64(uint32(n.right))<<32)
}

// compileWalk builds the compact node arrays from the trees and the splits.
func compileWalk(e *forest.Ensemble, ns [][]nodeSplit, vc []valueClasses) [][]wnode {
	out := make([][]wnode, len(e.Trees))
	for ti := range e.Trees {
		t := &e.Trees[ti]
		w := make([]wnode, len(t.Nodes))
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsLeaf() {
				bits := math.Float64bits(t.Value[i])
				w[i] = wnode{flags: wLeaf, feat: -1, left: int32(uint32(bits)), right: int32(uint32(bits >> 32))}
				continue
			}
			s := &ns[ti][i]
			x := wnode{thr: float32(n.Threshold), feat: n.Feature, left: n.Left, right: n.Right, cut: s.cut}
			if n.Flags&forest.SlowFlags != 0 {
				x.flags |= wSlow
			}
			if vc[n.Feature].categorical {
				x.flags |= wCatFeature
			}
			if n.Flags&forest.FlagDefaultLeft != 0 {
				x.flags |= wDefaultLeft
			}
			if s.missingLeft {
				x.flags |= wMissLeft
			}
			if s.zeroLeft {
				x.flags |= wZeroLeft
			}
			w[i] = x
		}
		out[ti] = w
	}
	return out
}
