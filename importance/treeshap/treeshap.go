// Package treeshap computes exact path-dependent TreeSHAP values of a tree
// ensemble: per row, per output class, one additive contribution per feature
// plus the bias (the expected value), so that bias + sum of contributions
// equals the row's raw margin.
//
// The value function is the one of Lundberg, Erion & Lee, "Consistent
// Individualized Feature Attribution for Tree Ensembles" (2018), Algorithm 2:
// a feature in the coalition follows the row's branch, a feature outside it
// averages both branches weighted by the training covers held in the model
// (forest.Tree.Cover: XGBoost's sum of hessians, LightGBM's row counts). When
// a feature is tested twice on one root-to-leaf path the two tests form one
// path element, as the paper's unwinding of the earlier occurrence does: its
// zero fraction is the product of the cover ratios of its edges and its one
// fraction says whether the row takes every one of them.
//
// The paper runs EXTEND and UNWIND over every path for every row, O(L·D²) per
// tree and row. Here the work that does not depend on the row is done once
// per leaf in New: a leaf's path has d distinct features, each with a fixed
// zero fraction z, and a row only decides which of them are hot (one
// fraction 1) and which are cold (0). For every one of the 2^d hot sets the
// leaf keeps the sum that EXTEND and UNWIND would produce (path.go), so a row
// costs O(d) per leaf, O(L·D) per tree; sibling leaves share one table and
// one pass. Paths with more than a few distinct features are evaluated per
// row in O(d²) instead. Which branch a row takes, missing values and
// category sets included, is forest.Next's decision, the one source of split
// semantics (plain numeric splits on present values are compared in place,
// as forest.SlowFlags documents).
package treeshap

import (
	"errors"
	"fmt"
	"math"
	"sync"

	"splitledger/importance/forest"
	"splitledger/importance/parallel"
)

// ErrNoCover is returned by New when a tree with splits carries no node
// covers: path-dependent TreeSHAP cannot be computed without them.
var ErrNoCover = errors.New("treeshap: model has no node covers")

// ErrModel is returned by New when the ensemble is not a well-formed model
// (bad child index, cycle, bad cover or leaf value, feature or class out of
// range).
var ErrModel = errors.New("treeshap: malformed model")

// MaxPathFeatures is the largest number of distinct features one
// root-to-leaf path may test; New returns an error beyond it.
const MaxPathFeatures = 64

// MaxDepth is the deepest node New accepts (the root is at depth 0).
const MaxDepth = 1024

// tableMaxFeatures is the largest number of distinct path features for which
// a leaf keeps a table of 2^d float64 values (a sibling pair 4·2^d); longer
// paths are evaluated per row in O(d²). 10 bounds a pair's tables at 32 KiB.
var tableMaxFeatures = 10

// tableMinZero is the smallest zero fraction a tabled path may have: the
// tables divide by z, so paths through an (almost) empty child are
// evaluated per row instead. Products of up to tableMaxFeatures such factors
// stay far from underflow.
const tableMinZero = 1e-30

// tableBudget bounds the total size of the tables (float64 values, 128
// MiB); leaves met after it is spent are evaluated per row.
var tableBudget = 1 << 24

// The chunk of rows explained together is as large as maskBytes of hot
// sets and outBytes of outputs allow, within [minChunk, maxChunk]: a
// chunk's rows share each tree's tables while they are in cache.
const (
	maskBytes = 64 << 10
	outBytes  = 256 << 10
	maxChunk  = 512
	minChunk  = 16
)

// Explainer holds the per-leaf tables of an ensemble. It is safe for
// concurrent use; it keeps a pointer to the ensemble, which must not be
// changed while the Explainer is in use.
type Explainer struct {
	e        *forest.Ensemble
	classes  int
	features int
	stride   int // features + 1
	bias     []float64
	slots    int // hot-set buffers: two per tree level
	chunk    int // rows explained together

	trees []shapTree
	ops   []op // every tree's program, each tree's in preorder

	// Leaves walked alone.
	leafWidth []uint8 // d: distinct features on the path
	leafTable []int32 // offset of W in table, -1 when evaluated per row
	leafPos   []int32 // offset in the pos* slices
	leafValue []float64

	// Path elements of the leaves walked alone, in order of first test.
	posOut      []int32   // output offset class*(features+1)+feature
	posZero     []float64 // zero fraction z (product of cover ratios)
	posOneMinus []float64 // 1 - z
	posFast     []element // (1-z)/z and output offset, for tabled leaves

	// Sibling leaf pairs (see path.go).
	pairWidth []uint8 // d
	pairBit   []uint8 // the parent's path element
	pairOut   []int32 // its output offset
	pairPos   []int32 // offset in pairEls (d-1 elements)
	pairTable []int32 // offset of U in table; V follows
	pairEls   []element

	// table holds, per tabled leaf and hot set m (bit p = path element p is
	// hot), W[m] = v·Zcold(m)·Q(m), and per pair U and V (see path.go).
	table []float64

	pool sync.Pool // *scratch
}

// element is a path element as the tables are read.
type element struct {
	ratio float64 // (1-z)/z
	out   int32   // output offset class*(features+1)+feature
	bit   uint8   // its position in the path's hot sets
}

// Kinds of op.
const (
	opSplit = iota // write both children's hot sets
	opPair         // decide the split and add its two leaves
	opLeaf         // add one leaf
)

// op is one step of a tree's program. Hot sets live in slots, two per tree
// level: a node's children write level k+1's pair of slots, and the left
// subtree only writes deeper levels before the right child is read.
type op struct {
	set, clear  uint64 // hot child: | set (first test, else 0); cold child: & clear
	node        int32  // the split node (opSplit, opPair)
	ref         int32  // leaf or pair index
	kind        uint8
	src         uint16 // slot of this node's hot sets
	left, right uint16 // slots of the children's (opSplit)
}

// shapTree is one tree's range of ops.
type shapTree struct {
	tree       *forest.Tree
	opLo, opHi int32
	single     bool // the root is a leaf: the tree only adds to the bias
}

type scratch struct {
	masks []uint64    // slots × chunk hot sets
	right []uint64    // per row of the chunk: all ones when it goes right
	one   [][]float64 // column views of a single row, for Row
	out   []float64   // chunk rows of classes*(features+1), for AbsRows
	poly  []float64   // per-row evaluation: elementary symmetric polynomials
	defl  []float64
}

// New checks e and precomputes, for every leaf, the data TreeSHAP needs
// that does not depend on the row. It returns ErrNoCover (wrapped with the
// tree index) when a tree with splits has no covers, and an error wrapping
// ErrModel naming the tree and node when a cover is negative, not finite,
// or zero on a split node, when a leaf value is not finite, when an index is
// out of range, when a tree has a cycle or a node deeper than MaxDepth, or
// when a path tests more than MaxPathFeatures distinct features. e is not
// modified.
func New(e *forest.Ensemble) (*Explainer, error) {
	if e == nil {
		return nil, fmt.Errorf("%w: nil ensemble", ErrModel)
	}
	k := e.NumClass
	if k < 1 {
		return nil, fmt.Errorf("%w: %d classes", ErrModel, k)
	}
	if len(e.BaseMargin) != k {
		return nil, fmt.Errorf("%w: %d base margins for %d classes", ErrModel, len(e.BaseMargin), k)
	}
	f := e.NumFeatures()
	x := &Explainer{e: e, classes: k, features: f, stride: f + 1, slots: 2}
	x.bias = append([]float64(nil), e.BaseMargin...)
	x.trees = make([]shapTree, len(e.Trees))
	var b builder
	for ti := range e.Trees {
		if err := b.addTree(x, ti); err != nil {
			return nil, err
		}
	}
	x.chunk = max(minChunk, min(maxChunk, maskBytes/(8*x.slots), outBytes/(8*x.RowLen())))
	x.pool.New = func() any {
		return &scratch{
			masks: make([]uint64, x.slots*x.chunk),
			right: make([]uint64, x.chunk),
			one:   make([][]float64, x.features),
			out:   make([]float64, x.chunk*x.RowLen()),
			poly:  make([]float64, MaxPathFeatures+1),
			defl:  make([]float64, MaxPathFeatures+1),
		}
	}
	return x, nil
}

// NumClass is the number of outputs per row (1 unless multi-class).
func (x *Explainer) NumClass() int { return x.classes }

// NumFeatures is the number of model features F.
func (x *Explainer) NumFeatures() int { return x.features }

// RowLen is the length of one row's output: NumClass·(NumFeatures+1).
func (x *Explainer) RowLen() int { return x.classes * x.stride }

// Bias returns a copy of the expected raw margin per class: the base margin
// plus, over the class's trees, the cover-weighted mean leaf value
// Σ_leaf value·cover(leaf)/cover(root). It is the last entry of each class
// block written by Row and Rows.
func (x *Explainer) Bias() []float64 { return append([]float64(nil), x.bias...) }

// Row writes the SHAP values of one row into dst, which must have RowLen
// entries: for class c, dst[c*(F+1)+j] is feature j's contribution and
// dst[c*(F+1)+F] the bias, the layout of XGBoost's predict(pred_contribs=True).
// row is indexed by feature (len >= NumFeatures); NaN means missing and
// takes the node's default branch. A feature no tree tests gets exactly 0.
// The values are bit-for-bit those Rows writes for the same row. Row panics
// when dst or row is too short (a programmer error).
func (x *Explainer) Row(dst []float64, row []float64) {
	if len(dst) < x.RowLen() {
		panic("treeshap: Row dst too short")
	}
	if len(row) < x.features {
		panic("treeshap: Row row too short")
	}
	s := x.pool.Get().(*scratch)
	for j := range s.one {
		s.one[j] = row[j : j+1]
	}
	x.explain(dst[:x.RowLen()], s.one, 0, 1, s)
	clear(s.one)
	x.pool.Put(s)
}

// Rows writes the SHAP values of n rows into dst, row-major: row r's block of
// RowLen values starts at dst[r*RowLen()] and is laid out as in Row. cols is
// column-major (cols[j][r] is feature j of row r, NaN for missing) with at
// least NumFeatures columns of at least n values. workers <= 0 uses every
// core; the result is bit-for-bit the same for any worker count. n <= 0
// writes nothing. Rows panics when dst or cols is too short.
func (x *Explainer) Rows(dst []float64, cols [][]float64, n, workers int) {
	if n <= 0 {
		return
	}
	rl := x.RowLen()
	x.checkCols(cols, n)
	if len(dst) < n*rl {
		panic("treeshap: Rows dst too short")
	}
	parallel.Chunks(n, x.chunkFor(n, workers), workers, func(_, lo, hi int) {
		s := x.pool.Get().(*scratch)
		x.explain(dst[lo*rl:hi*rl], cols, lo, hi-lo, s)
		x.pool.Put(s)
	})
}

// AbsRows writes, for n rows, the absolute SHAP value of each feature summed
// over classes, dst[r*F+j] = Σ_c |φ_c,j(r)|, without the bias: the per-row
// input of a mean-|SHAP| measure, F values per row (a feature no tree tests
// gets 0). cols, n and workers are as in Rows; dst must have n*NumFeatures
// entries. Deterministic for any worker count.
func (x *Explainer) AbsRows(dst []float64, cols [][]float64, n, workers int) {
	if n <= 0 {
		return
	}
	f := x.features
	x.checkCols(cols, n)
	if len(dst) < n*f {
		panic("treeshap: AbsRows dst too short")
	}
	rl := x.RowLen()
	parallel.Chunks(n, x.chunkFor(n, workers), workers, func(_, lo, hi int) {
		s := x.pool.Get().(*scratch)
		m := hi - lo
		out := s.out[:m*rl]
		x.explain(out, cols, lo, m, s)
		for i := 0; i < m; i++ {
			d := dst[(lo+i)*f : (lo+i+1)*f]
			o := out[i*rl : (i+1)*rl]
			for j := range d {
				d[j] = math.Abs(o[j])
			}
			for c := 1; c < x.classes; c++ {
				oc := o[c*x.stride : c*x.stride+f]
				for j := range d {
					d[j] += math.Abs(oc[j])
				}
			}
		}
		x.pool.Put(s)
	})
}

// chunkFor returns the rows per task: at most x.chunk, and small enough
// that every worker gets some rows. Results do not depend on it.
func (x *Explainer) chunkFor(n, workers int) int {
	w := parallel.Workers(workers)
	return max(1, min(x.chunk, (n+2*w-1)/(2*w)))
}

func (x *Explainer) checkCols(cols [][]float64, n int) {
	if len(cols) < x.features {
		panic("treeshap: fewer columns than model features")
	}
	for j := 0; j < x.features; j++ {
		if len(cols[j]) < n {
			panic("treeshap: column shorter than n")
		}
	}
}

// explain writes the SHAP values of the m rows starting at row lo of the
// column-major cols into out (m*RowLen). Trees are the outer loop, so that a
// tree's tables serve every row of the chunk from cache; inside a tree the
// rows are the inner loop, so that updates of one row's output do not wait
// on each other. Each row adds its trees in model order, so the result does
// not depend on the chunk.
func (x *Explainer) explain(out []float64, cols [][]float64, lo, m int, s *scratch) {
	rl := x.RowLen()
	f := x.features
	clear(out[:m*rl])
	rule := x.e.Rule
	masks := s.masks
	clear(masks[:m]) // slot 0: the root's hot set is empty
	for ti := range x.trees {
		st := &x.trees[ti]
		if st.single {
			continue // only the bias changes
		}
		t := st.tree
		nodes := t.Nodes
		for oi := st.opLo; oi < st.opHi; oi++ {
			o := &x.ops[oi]
			src := masks[int(o.src)*m : int(o.src)*m+m]
			switch o.kind {
			case opSplit:
				// The hot child adds the node's path element (first test)
				// or keeps it (a repeat); the cold child drops it.
				nd := &nodes[o.node]
				dir := decide(s.right[:m], t, nd, cols[nd.Feature][lo:lo+m], rule)
				left := masks[int(o.left)*m : int(o.left)*m+m]
				right := masks[int(o.right)*m : int(o.right)*m+m]
				set, clr := o.set, o.clear
				for r, rightHot := range dir {
					mk := src[r]
					hot, cold := mk|set, mk&clr
					flip := (hot ^ cold) & rightHot
					left[r] = hot ^ flip
					right[r] = cold ^ flip
				}
			case opPair:
				nd := &nodes[o.node]
				x.addPair(out, decide(s.right[:m], t, nd, cols[nd.Feature][lo:lo+m], rule), o, src)
			case opLeaf:
				x.addLeaf(out, o.ref, src, s)
			}
		}
	}
	for r := 0; r < m; r++ {
		phi := out[r*rl : (r+1)*rl]
		for c := 0; c < x.classes; c++ {
			phi[c*x.stride+f] = x.bias[c]
		}
	}
}

// decide writes into dst, for each value of col, all ones when it goes
// right at split nd and 0 when it goes left, and returns dst[:len(col)].
// The branch is forest.Next's: numeric splits on present values are
// compared in place as forest.SlowFlags documents (x < t in float32 for
// XGBoost, x <= t for LightGBM) and everything else is left to forest.Next.
func decide(dst []uint64, t *forest.Tree, nd *forest.Node, col []float64, rule forest.Rule) []uint64 {
	dst = dst[:len(col)]
	slow := func(v float64) uint64 {
		d := forest.Next(t, nd, v, rule) ^ nd.Left // 0 when left
		return uint64(int64((d | -d) >> 31))
	}
	switch {
	case nd.Flags&forest.SlowFlags != 0:
		for r, v := range col {
			dst[r] = slow(v)
		}
	case rule == forest.LessThanFloat32:
		th := float32(nd.Threshold)
		for r, v := range col {
			if v != v {
				dst[r] = slow(v)
				continue
			}
			dst[r] = -b2u(!(float32(v) < th))
		}
	default:
		th := nd.Threshold
		for r, v := range col {
			if v != v {
				dst[r] = slow(v)
				continue
			}
			dst[r] = -b2u(!(v <= th))
		}
	}
	return dst
}

func b2u(b bool) uint64 {
	var v uint64
	if b {
		v = 1
	}
	return v
}

// addPair adds the two leaves of split o.ref for each row; dir says which
// rows go right. With
// hot = the hot child's set, the pair's table index is hot plus 2^d when
// the left leaf holds the split's element (path.go). A cold element p gets
// -U[i]; a hot one (1-z_p)/z_p·U[i^p]; the split's own element V[i].
func (x *Explainer) addPair(out []float64, dir []uint64, o *op, src []uint64) {
	rl := x.RowLen()
	pr := o.ref
	d := uint(x.pairWidth[pr])
	q := uint(x.pairBit[pr])
	oq := x.pairOut[pr]
	pos := int(x.pairPos[pr])
	els := x.pairEls[pos : pos+int(d)-1]
	off := int(x.pairTable[pr])
	u := x.table[off : off+2<<d]
	v := x.table[off+2<<d : off+4<<d]
	set := o.set
	for r, rightHot := range dir {
		hot := src[r] | set
		i := hot | (hot>>q&1&^rightHot)<<d
		phi := out[r*rl : (r+1)*rl]
		phi[oq] += v[i]
		coldBits := math.Float64bits(-u[i])
		for _, el := range els {
			h := el.ratio * u[i^(1<<el.bit)]
			sel := -(hot >> el.bit & 1) // all ones when el is hot
			phi[el.out] += math.Float64frombits(math.Float64bits(h)&sel | coldBits&^sel)
		}
	}
}

// addLeaf adds leaf l's contributions for each row's hot set. A cold
// element gets -W[m], a hot element p (1-z_p)/z_p·W[m^p] (path.go).
func (x *Explainer) addLeaf(out []float64, l int32, src []uint64, s *scratch) {
	rl := x.RowLen()
	off := x.leafTable[l]
	if off < 0 {
		for r, mk := range src {
			x.addLeafDirect(out[r*rl:(r+1)*rl], l, mk, s)
		}
		return
	}
	d := int(x.leafWidth[l])
	pos := int(x.leafPos[l])
	els := x.posFast[pos : pos+d]
	w := x.table[off : int(off)+1<<d]
	for r, mk := range src {
		phi := out[r*rl : (r+1)*rl]
		coldBits := math.Float64bits(-w[mk])
		for _, el := range els {
			h := el.ratio * w[mk^(1<<el.bit)]
			sel := -(mk >> el.bit & 1) // all ones when el is hot
			phi[el.out] += math.Float64frombits(math.Float64bits(h)&sel | coldBits&^sel)
		}
	}
}

// addLeafDirect adds leaf l's contributions for hot set mk without tables,
// in O(d²): for paths too long to tabulate.
func (x *Explainer) addLeafDirect(phi []float64, l int32, mk uint64, s *scratch) {
	d := int(x.leafWidth[l])
	pos := x.leafPos[l]
	outs := x.posOut[pos : pos+int32(d)]
	z := x.posZero[pos : pos+int32(d)]
	omz := x.posOneMinus[pos : pos+int32(d)]
	v := x.leafValue[l]
	// e holds the elementary symmetric polynomials of the hot elements'
	// zero fractions; zc the product of the cold ones.
	e := s.poly[:1]
	e[0] = 1
	zc := 1.0
	for p := 0; p < d; p++ {
		if mk>>p&1 == 0 {
			zc *= z[p]
			continue
		}
		e = append(e, 0)
		for j := len(e) - 1; j > 0; j-- {
			e[j] += z[p] * e[j-1]
		}
	}
	h := len(e) - 1
	cold := -zc * v * weighted(e, h, d)
	ed := s.defl[:h]
	for p, o := range outs {
		if mk>>p&1 == 0 {
			phi[o] += cold
			continue
		}
		// Remove element p from e: e_j = ed_j + z_p·ed_{j-1}. With every z
		// at most 1 the recurrence does not amplify rounding.
		ed[0] = 1
		for j := 1; j < h; j++ {
			ed[j] = e[j] - z[p]*ed[j-1]
		}
		phi[o] += omz[p] * zc * v * weighted(ed, h-1, d)
	}
}

// weighted returns Σ_{s=0}^{h} w(s, d)·e[h-s] with the Shapley weight
// w(s, d) = s!(d-1-s)!/d!: the sum over subsets S of an h-element hot set of
// w(|S|, d) times the product of z over the hot elements outside S. h < d.
func weighted(e []float64, h, d int) float64 {
	w := 1 / float64(d) // w(0, d)
	sum := 0.0
	for s := 0; s <= h; s++ {
		sum += w * e[h-s]
		if s+1 < d {
			w *= float64(s+1) / float64(d-1-s)
		}
	}
	return sum
}
