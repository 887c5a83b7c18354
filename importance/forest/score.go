package forest

import "splitledger/importance/parallel"

// scoreChunk is the number of rows scored together; a chunk walks every tree
// while its rows' columns stay in cache.
const scoreChunk = 512

// Margins writes the raw margins of n rows into dst, row-major with NumClass
// values per row (dst[r*NumClass+k]). cols is column-major: cols[f][r] is
// feature f of row r, NaN for missing. workers <= 0 uses every core; the
// result does not depend on it. dst must have n*NumClass entries.
func (e *Ensemble) Margins(dst []float64, cols [][]float64, n, workers int) {
	k := e.NumClass
	if len(dst) < n*k {
		panic("forest: Margins dst too short")
	}
	parallel.Chunks(n, scoreChunk, workers, func(_, lo, hi int) {
		for r := lo; r < hi; r++ {
			copy(dst[r*k:(r+1)*k], e.BaseMargin)
		}
		for ti := range e.Trees {
			t := &e.Trees[ti]
			nodes := t.Nodes
			c := t.Class
			for r := lo; r < hi; r++ {
				i := int32(0)
				for {
					nd := &nodes[i]
					if nd.Flags&FlagLeaf != 0 {
						break
					}
					i = Next(t, nd, cols[nd.Feature][r], e.Rule)
				}
				dst[r*k+c] += t.Value[i]
			}
		}
	})
}
