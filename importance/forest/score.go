package forest

import "splitledger/importance/parallel"

// scoreChunk is the number of rows scored together; a chunk walks every tree
// while its rows' columns stay in cache.
const scoreChunk = 512

// lanes is the number of rows walked through one tree in lockstep.
const lanes = 8

// Margins writes the raw margins of n rows into dst, row-major with NumClass
// values per row (dst[r*NumClass+k]). cols is column-major: cols[f][r] is
// feature f of row r, NaN for missing. workers <= 0 uses every core; the
// result does not depend on it. dst must have n*NumClass entries.
//
// Rows go through each tree eight at a time in lockstep and a numeric split
// picks its child without a branch: one row's walk is a chain of dependent
// loads (node, column, value, child) and a coin-flip branch, so walking
// several independent rows together lets the processor overlap them.
func (e *Ensemble) Margins(dst []float64, cols [][]float64, n, workers int) {
	k := e.NumClass
	if len(dst) < n*k {
		panic("forest: Margins dst too short")
	}
	rule := e.Rule
	parallel.Chunks(n, scoreChunk, workers, func(_, lo, hi int) {
		for r := lo; r < hi; r++ {
			copy(dst[r*k:(r+1)*k], e.BaseMargin)
		}
		for ti := range e.Trees {
			t := &e.Trees[ti]
			c := t.Class
			r := lo
			for ; r+lanes <= hi; r += lanes {
				idx := walkLanes(t, cols, r, rule)
				for j, i := range idx {
					dst[(r+j)*k+c] += t.Value[i]
				}
			}
			for ; r < hi; r++ {
				idx := int32(0)
				for {
					nd := &t.Nodes[idx]
					if nd.Flags&FlagLeaf != 0 {
						break
					}
					idx = Next(t, nd, cols[nd.Feature][r], rule)
				}
				dst[r*k+c] += t.Value[idx]
			}
		}
	})
}

// walkLanes returns the leaves reached by rows r..r+lanes-1 of tree t. It
// agrees with Next on every node: the fast path only handles numeric splits
// on present values and defers everything else to Next.
func walkLanes(t *Tree, cols [][]float64, r int, rule Rule) [lanes]int32 {
	var idx [lanes]int32
	nodes := t.Nodes
	active := uint32(1<<lanes - 1)
	float32Rule := rule == LessThanFloat32
	for active != 0 {
		for j := 0; j < lanes; j++ {
			if active&(1<<j) == 0 {
				continue
			}
			nd := &nodes[idx[j]]
			if nd.Flags&FlagLeaf != 0 {
				active &^= 1 << j
				continue
			}
			x := cols[nd.Feature][r+j]
			if x != x || nd.Flags&SlowFlags != 0 {
				idx[j] = Next(t, nd, x, rule)
				continue
			}
			var goLeft bool
			if float32Rule {
				goLeft = float32(x) < float32(nd.Threshold)
			} else {
				goLeft = x <= nd.Threshold
			}
			idx[j] = nd.Right + (nd.Left-nd.Right)*b2i(goLeft)
		}
	}
	return idx
}

// b2i is 1 for true and 0 for false; it compiles to a flag set, so the child
// index is computed without a branch.
func b2i(b bool) int32 {
	var v int32
	if b {
		v = 1
	}
	return v
}
