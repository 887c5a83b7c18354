package importance

import (
	"math/bits"

	"splitledger/importance/forest"
)

// stepFunction is one row's margin change as a function of one feature's
// value class, relative to the row's own score (so the row's own class maps
// to zero). Numeric classes are held as sorted segment starts with the
// change on each segment; the missing and zero classes separately.
type stepFunction struct {
	// numeric mode
	starts []int32   // segment start classes, ascending
	deltas []float64 // K values per segment
	// special classes (numeric mode)
	missing, zero []float64 // K values each
	// categorical mode: K values per class
	dense []float64
}

// stepBuilder accumulates the pieces that the free walks of one row emit for
// one feature, then turns them into a stepFunction. It is reused row after
// row; all buffers stay allocated.
type stepBuilder struct {
	vc   *valueClasses
	k    int
	diff []float64 // numeric: (nb+1)*k difference array
	mark []uint64  // numeric: bit per bin touched this row (bins come out sorted)
	sink int32     // numeric: bin nb, past the numeric classes: finish ignores it
	// evalQueries: bit per asked bin, and the running sum at each bin
	qmark []uint64
	qval  []float64
	used  bool // some piece was emitted for the current row
	sf    stepFunction
}

// newStepBuilder makes the builder of one feature. A numeric feature's
// difference array ((nb+1)*k values), touched-bin bits ((nb+1+63)/64 words)
// and missing values (k) are the given slices, views into the row's flat
// arrays; a categorical feature ignores them.
func newStepBuilder(vc *valueClasses, k int, diff []float64, mark []uint64, missing []float64) *stepBuilder {
	b := &stepBuilder{vc: vc, k: k}
	if vc.categorical {
		b.sf.dense = make([]float64, vc.n*k)
	} else {
		b.diff, b.mark, b.sf.missing = diff, mark, missing
		b.sink = int32(vc.nb)
		b.sf.zero = make([]float64, k)
	}
	return b
}

// start prepares the builder for a new row.
func (b *stepBuilder) start() {
	b.used = false
	if b.vc.categorical {
		clear(b.sf.dense)
	} else {
		clear(b.sf.missing)
		clear(b.sf.zero)
	}
}

func (b *stepBuilder) touch(bin int32) {
	b.mark[bin>>6] |= 1 << (bin & 63)
}

// addNumeric adds delta d (for output class cls) on classes [lo, hi) and,
// when flagged, the missing and zero classes.
func (b *stepBuilder) addNumeric(lo, hi int32, m, z bool, cls int, d float64) {
	b.used = true
	if lo < hi {
		b.diff[int(lo)*b.k+cls] += d
		b.diff[int(hi)*b.k+cls] -= d
		b.touch(lo)
		b.touch(hi)
	}
	if m {
		b.sf.missing[cls] += d
	}
	if z {
		b.sf.zero[cls] += d
	}
}

// addSet adds d to every class whose bit is set.
func (b *stepBuilder) addSet(set []uint64, cls int, d float64) {
	b.used = true
	for w, word := range set {
		for word != 0 {
			c := w*64 + bits.TrailingZeros64(word)
			b.sf.dense[c*b.k+cls] += d
			word &= word - 1
		}
	}
}

// finish turns the accumulated pieces into the row's step function and
// clears the difference array for the next row.
func (b *stepBuilder) finish() *stepFunction {
	if b.vc.categorical {
		return &b.sf
	}
	k := b.k
	b.sf.starts = b.sf.starts[:0]
	b.sf.deltas = b.sf.deltas[:0]
	if k == 1 {
		c := 0.0
		for wi, word := range b.mark {
			for word != 0 {
				bin := int32(wi*64 + bits.TrailingZeros64(word))
				word &= word - 1
				v := b.diff[bin]
				b.diff[bin] = 0
				if v != 0 && bin != b.sink { // a zero sum leaves c as it is
					c += v
					b.sf.starts = append(b.sf.starts, bin)
					b.sf.deltas = append(b.sf.deltas, c)
				}
			}
			b.mark[wi] = 0
		}
		return &b.sf
	}
	cum := make([]float64, k)
	for wi, word := range b.mark {
		for word != 0 {
			bin := int32(wi*64 + bits.TrailingZeros64(word))
			word &= word - 1
			for c := 0; c < k; c++ {
				cum[c] += b.diff[int(bin)*k+c]
				b.diff[int(bin)*k+c] = 0
			}
			if bin == b.sink {
				continue
			}
			b.sf.starts = append(b.sf.starts, bin)
			b.sf.deltas = append(b.sf.deltas, cum...)
		}
		b.mark[wi] = 0
	}
	return &b.sf
}

// evalQueries writes into vals the margin change at each class of qs (the
// values of the step function there) and clears the builder for the next
// row, instead of finish: a single pass over the touched and asked bins,
// with no search. Classes at or above nb (missing, zero) read the special
// values. Numeric mode, one output class.
func (b *stepBuilder) evalQueries(qs []int32, vals []float64) {
	nb := int32(b.vc.nb)
	if b.qval == nil {
		b.qmark = make([]uint64, len(b.mark))
		b.qval = make([]float64, nb+1)
	}
	for _, q := range qs {
		if q < nb {
			b.qmark[q>>6] |= 1 << (q & 63)
		}
	}
	// every bin the diff array holds was touched, and untouched bins hold
	// zero, so the running sum needs no test; the sink is bin nb, past
	// every asked class
	c := 0.0
	for wi, m := range b.mark {
		u := m | b.qmark[wi]
		for u != 0 {
			bin := wi*64 + bits.TrailingZeros64(u)
			u &= u - 1
			c += b.diff[bin]
			b.diff[bin] = 0
			b.qval[bin] = c
		}
		b.mark[wi], b.qmark[wi] = 0, 0
	}
	for i, q := range qs {
		switch {
		case q < nb:
			vals[i] = b.qval[q]
		case q == nb:
			vals[i] = b.sf.missing[0]
		default:
			vals[i] = b.sf.zero[0]
		}
	}
}

// at writes the margin change for class c into dst (len k) and returns it.
func (s *stepFunction) at(vc *valueClasses, c int, k int, dst []float64) []float64 {
	if vc.categorical {
		copy(dst, s.dense[c*k:(c+1)*k])
		return dst
	}
	switch {
	case c == vc.nb:
		copy(dst, s.missing)
		return dst
	case c == vc.nb+1:
		copy(dst, s.zero)
		return dst
	}
	// last segment start <= c
	i := lastAtOrBelow(s.starts, int32(c))
	if i < 0 {
		clear(dst)
		return dst
	}
	copy(dst, s.deltas[i*k:(i+1)*k])
	return dst
}

// lastAtOrBelow returns the index of the last element of the ascending
// slice s that is at most c, or -1 when there is none (or s is empty). The
// search halves the range without branching on the comparisons, which are
// unpredictable here.
func lastAtOrBelow(s []int32, c int32) int {
	n := len(s)
	if n == 0 {
		return -1
	}
	lo := 0
	for n > 1 {
		half := n >> 1
		// all ones when s[lo+half] <= c (int64: no overflow); Go does not
		// compile a conditional add in a loop to a conditional move
		lo += half & int(^((int64(c) - int64(s[lo+half])) >> 63))
		n -= half
	}
	if s[lo] > c {
		return -1
	}
	return lo
}

// at1 is at for single-output models.
func (s *stepFunction) at1(vc *valueClasses, c int) float64 {
	if vc.categorical {
		return s.dense[c]
	}
	switch {
	case c == vc.nb:
		return s.missing[0]
	case c == vc.nb+1:
		return s.zero[0]
	}
	i := lastAtOrBelow(s.starts, int32(c))
	if i < 0 {
		return 0
	}
	return s.deltas[i]
}

// freeWalker walks one tree for one row with one feature left free: both
// branches at that feature's splits, the row's own branch elsewhere.
type freeWalker struct {
	e   *forest.Ensemble
	x   []float64 // the row, by feature
	xgb bool      // the ensemble compares float32(x) < threshold
}

// walkNumeric explores node i with class state [lo, hi) + missing/zero
// flags and emits (state, leaf value - own) pieces.
func (w *freeWalker) walkNumeric(t *forest.Tree, wn []wnode, f int32, i int32, lo, hi int32, m, z bool, own float64, b *stepBuilder) {
	for {
		n := &wn[i]
		if n.flags&wLeaf != 0 {
			if d := n.leafValue() - own; d != 0 {
				b.addNumeric(lo, hi, m, z, t.Class, d)
			}
			return
		}
		if n.feat != f {
			x := w.x[n.feat]
			switch {
			case n.flags&wSlow != 0:
				i = forest.Next(t, &t.Nodes[i], x, w.e.Rule)
			case x != x: // missing: the default branch
				if n.flags&wDefaultLeft != 0 {
					i = n.left
				} else {
					i = n.right
				}
			case w.xgb && float32(x) < n.thr, !w.xgb && x <= t.Nodes[i].Threshold:
				i = n.left
			default:
				i = n.right
			}
			continue
		}
		ml, zl := n.flags&wMissLeft != 0, n.flags&wZeroLeft != 0
		llo, lhi := lo, min(hi, n.cut)
		rlo, rhi := max(lo, n.cut), hi
		lm, rm := m && ml, m && !ml
		lz, rz := z && zl, z && !zl
		lok := llo < lhi || lm || lz
		rok := rlo < rhi || rm || rz
		switch {
		case lok && rok:
			w.walkNumeric(t, wn, f, n.left, llo, lhi, lm, lz, own, b)
			i, lo, hi, m, z = n.right, rlo, rhi, rm, rz
		case lok:
			i, lo, hi, m, z = n.left, llo, lhi, lm, lz
		case rok:
			i, lo, hi, m, z = n.right, rlo, rhi, rm, rz
		default:
			return
		}
	}
}

// walkSet is walkNumeric for categorical features: the state is a bitset of
// classes.
func (w *freeWalker) walkSet(t *forest.Tree, ns []nodeSplit, f int32, i int32, set []uint64, own float64, b *stepBuilder) {
	for {
		n := &t.Nodes[i]
		if n.Flags&forest.FlagLeaf != 0 {
			if d := t.Value[i] - own; d != 0 {
				b.addSet(set, t.Class, d)
			}
			return
		}
		if n.Feature != f {
			i = forest.Next(t, n, w.x[n.Feature], w.e.Rule)
			continue
		}
		ls := ns[i].leftSet
		left := make([]uint64, len(set))
		right := make([]uint64, len(set))
		lany, rany := false, false
		for j := range set {
			left[j] = set[j] & ls[j]
			right[j] = set[j] &^ ls[j]
			lany = lany || left[j] != 0
			rany = rany || right[j] != 0
		}
		switch {
		case lany && rany:
			w.walkSet(t, ns, f, n.Left, left, own, b)
			i, set = n.Right, right
		case lany:
			i, set = n.Left, left
		case rany:
			i, set = n.Right, right
		default:
			return
		}
	}
}
