package treeshap

import (
	"fmt"
	"math"

	"splitledger/importance/forest"
)

// A leaf's path, after merging repeated tests of one feature, is a list of d
// elements; element p has feature f_p and zero fraction z_p, the product of
// cover(child)/cover(parent) over the path's edges at f_p's tests. For a row,
// element p is hot (one fraction 1) when the row takes every one of those
// edges and cold (0) otherwise. With m the hot set, the leaf's share of the
// path-dependent value function for a coalition S is
//
//	g(S) = v · Π_{p∈S∩m} 1 · Π_{p∈S\m} 0 · Π_{p∉S} z_p,
//
// and its Shapley value for element i (only the d path features play) is
//
//	φ_i = Σ_{S⊆P\{i}} w(|S|, d)·(g(S∪{i}) − g(S)),   w(s, d) = s!(d−1−s)!/d!
//	    = v·(o_i − z_i) · Π_{p∉m, p≠i} z_p · Q(m\{i}),
//	Q(h) = Σ_{S⊆h} w(|S|, d)·Π_{p∈h\S} z_p,
//
// because every S that holds a cold element contributes 0. So a cold element
// gets −v·Zcold(m)·Q(m) and a hot one v·(1−z_i)·Zcold(m)·Q(m\{i}), with
// Zcold(m) = Π_{p∉m} z_p. This is the quantity that EXTEND and UNWIND of
// Lundberg, Erion & Lee (2018), Algorithm 2, accumulate along the path; Q(h)
// is Σ_s w(s, d)·e_{|h|−s}(z_h) with e_j the elementary symmetric
// polynomials of the hot elements' zero fractions.

// Sibling leaves are handled as one pair. Below internal node q both leaves
// have the same path elements; their hot sets m1 and m2 differ at most in
// q's element b, which at most one of them holds. With u = m1|m2 and
// t = [b ∈ m1], the pair's index i = u + t·2^d picks
//
//	U[i] = W1[m1] + W2[m2]    and    V[i] = leaf 1's + leaf 2's value at b,
//
// and every other element p, having the same z and the same bit in m1 and
// m2, gets −U[i] when cold and (1−z_p)/z_p·U[i with bit p flipped] when hot.
// This halves the per-row work of full trees.

// builder walks each tree once, depth first, keeping the current path.
type builder struct {
	feat    []int32   // path element features
	zero    []float64 // path element zero fractions
	visited []bool
	poly    []float64
	w1, w2  []float64 // the W tables of a sibling pair
	u, v    []float64 // its U and V tables
}

// grow returns buf resized to n, reallocated when too small.
func grow(buf []float64, n int) []float64 {
	if cap(buf) < n {
		return make([]float64, n)
	}
	return buf[:n]
}

// addTree appends tree ti's ops, leaves and pairs to x.
func (b *builder) addTree(x *Explainer, ti int) error {
	e := x.e
	t := &e.Trees[ti]
	n := len(t.Nodes)
	st := &x.trees[ti]
	st.tree = t
	if n == 0 {
		return fmt.Errorf("%w: tree %d has no nodes", ErrModel, ti)
	}
	if len(t.Value) != n {
		return fmt.Errorf("%w: tree %d has %d values for %d nodes", ErrModel, ti, len(t.Value), n)
	}
	if t.Class < 0 || t.Class >= x.classes {
		return fmt.Errorf("%w: tree %d adds to class %d of %d", ErrModel, ti, t.Class, x.classes)
	}
	if t.Nodes[0].IsLeaf() {
		if v := t.Value[0]; math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%w: tree %d node 0: leaf value %v", ErrModel, ti, v)
		}
		st.single = true
		x.bias[t.Class] += t.Value[0]
		return nil
	}
	if t.Cover == nil {
		return fmt.Errorf("%w: tree %d", ErrNoCover, ti)
	}
	if len(t.Cover) != n {
		return fmt.Errorf("%w: tree %d has %d covers for %d nodes", ErrModel, ti, len(t.Cover), n)
	}
	if cap(b.visited) < n {
		b.visited = make([]bool, n)
	}
	b.visited = b.visited[:n]
	clear(b.visited)
	b.feat = b.feat[:0]
	b.zero = b.zero[:0]
	st.opLo = int32(len(x.ops))
	bias := 0.0
	if err := b.walk(x, ti, 0, 0, 0, &bias); err != nil {
		return err
	}
	st.opHi = int32(len(x.ops))
	x.bias[t.Class] += bias
	return nil
}

// visit marks node ni of tree ti as reached, failing on a second visit.
func (b *builder) visit(ti int, ni int32) error {
	if b.visited[ni] {
		return fmt.Errorf("%w: tree %d node %d is reached twice (cycle or shared child)", ErrModel, ti, ni)
	}
	b.visited[ni] = true
	return nil
}

// walk visits node ni, whose hot sets are in slot src, with the current
// path in b.feat/b.zero, and appends the subtree's ops in preorder; bias
// accumulates value·Π z over the leaves. level is ni's depth.
func (b *builder) walk(x *Explainer, ti int, ni int32, level int, src uint16, bias *float64) error {
	t := &x.e.Trees[ti]
	if err := b.visit(ti, ni); err != nil {
		return err
	}
	nd := &t.Nodes[ni]
	if nd.IsLeaf() {
		return b.leaf(x, ti, ni, src, bias)
	}
	if level >= MaxDepth {
		return fmt.Errorf("%w: tree %d node %d: children deeper than %d", ErrModel, ti, ni, MaxDepth)
	}
	n := int32(len(t.Nodes))
	if nd.Left <= 0 || nd.Left >= n || nd.Right <= 0 || nd.Right >= n || nd.Left == nd.Right {
		return fmt.Errorf("%w: tree %d node %d: children %d and %d out of range (tree has %d nodes)", ErrModel, ti, ni, nd.Left, nd.Right, n)
	}
	if nd.Feature < 0 || int(nd.Feature) >= x.features {
		return fmt.Errorf("%w: tree %d node %d: feature %d out of range (model has %d)", ErrModel, ti, ni, nd.Feature, x.features)
	}
	if nd.Flags&forest.FlagCategorical != 0 && (nd.CatSet < 0 || int(nd.CatSet) >= len(t.CatSets)) {
		return fmt.Errorf("%w: tree %d node %d: category set %d out of range", ErrModel, ti, ni, nd.CatSet)
	}
	c, cl, cr := t.Cover[ni], t.Cover[nd.Left], t.Cover[nd.Right]
	if !(c > 0) || math.IsInf(c, 0) {
		return fmt.Errorf("%w: tree %d node %d: split cover %v must be positive and finite", ErrModel, ti, ni, c)
	}
	for _, cc := range []float64{cl, cr} {
		if !(cc >= 0) || math.IsInf(cc, 0) {
			return fmt.Errorf("%w: tree %d node %d: child cover %v must be non-negative and finite", ErrModel, ti, ni, cc)
		}
	}
	p := -1
	for i, f := range b.feat {
		if f == nd.Feature {
			p = i
			break
		}
	}
	set := uint64(0)
	if p < 0 {
		p = len(b.feat)
		if p >= MaxPathFeatures {
			return fmt.Errorf("%w: tree %d node %d: path tests more than %d distinct features", ErrModel, ti, ni, MaxPathFeatures)
		}
		set = 1 << p
		b.feat = append(b.feat, nd.Feature)
		b.zero = append(b.zero, 1)
	}
	saved := b.zero[p]
	zl, zr := saved*(cl/c), saved*(cr/c)
	paired := false
	if t.Nodes[nd.Left].IsLeaf() && t.Nodes[nd.Right].IsLeaf() {
		var err error
		if paired, err = b.pair(x, ti, nd, p, zl, zr, bias); err != nil {
			return err
		}
		if paired {
			x.ops = append(x.ops, op{kind: opPair, node: ni, set: set, src: src, ref: int32(len(x.pairWidth) - 1)})
		}
	}
	if !paired {
		left := uint16(2 * (level + 1))
		x.slots = max(x.slots, int(left)+2)
		x.ops = append(x.ops, op{kind: opSplit, node: ni, set: set, clear: ^(uint64(1) << p), src: src, left: left, right: left + 1})
		b.zero[p] = zl
		if err := b.walk(x, ti, nd.Left, level+1, left, bias); err != nil {
			return err
		}
		b.zero[p] = zr
		if err := b.walk(x, ti, nd.Right, level+1, left+1, bias); err != nil {
			return err
		}
	}
	b.zero[p] = saved
	if set != 0 {
		b.feat = b.feat[:p]
		b.zero = b.zero[:p]
	}
	return nil
}

// leafValue returns leaf ni's value, failing when it is not finite.
func leafValue(t *forest.Tree, ti int, ni int32) (float64, error) {
	v := t.Value[ni]
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w: tree %d node %d: leaf value %v", ErrModel, ti, ni, v)
	}
	return v, nil
}

// pathWeight returns Π z over the current path.
func (b *builder) pathWeight() float64 {
	all := 1.0
	for _, z := range b.zero {
		all *= z
	}
	return all
}

// tabulable reports whether the current path, with element p's zero
// fraction replaced by each of zs, can use tables of size entries.
func (b *builder) tabulable(x *Explainer, p int, size int, zs ...float64) bool {
	if len(b.feat) > tableMaxFeatures || len(x.table)+size > tableBudget {
		return false
	}
	for i, z := range b.zero {
		if i != p && !(z >= tableMinZero) {
			return false
		}
	}
	for _, z := range zs {
		if !(z >= tableMinZero) {
			return false
		}
	}
	return true
}

// pair records the two leaf children of nd as a sibling pair when their
// path can be tabulated; p is nd's path element and zl, zr its zero
// fraction on the way to the left and right leaf. It reports false, having
// recorded nothing, when the pair must be walked leaf by leaf.
func (b *builder) pair(x *Explainer, ti int, nd *forest.Node, p int, zl, zr float64, bias *float64) (bool, error) {
	d := len(b.feat)
	if !b.tabulable(x, p, 4<<d, zl, zr) {
		return false, nil
	}
	t := &x.e.Trees[ti]
	for _, ni := range []int32{nd.Left, nd.Right} {
		if err := b.visit(ti, ni); err != nil {
			return false, err
		}
	}
	v1, err := leafValue(t, ti, nd.Left)
	if err != nil {
		return false, err
	}
	v2, err := leafValue(t, ti, nd.Right)
	if err != nil {
		return false, err
	}
	b.zero[p] = zl
	*bias += v1 * b.pathWeight()
	b.w1 = b.weights(b.w1[:0], v1)
	b.zero[p] = zr
	*bias += v2 * b.pathWeight()
	b.w2 = b.weights(b.w2[:0], v2)

	out := int32(t.Class * x.stride)
	x.pairWidth = append(x.pairWidth, uint8(d))
	x.pairBit = append(x.pairBit, uint8(p))
	x.pairOut = append(x.pairOut, out+b.feat[p])
	x.pairPos = append(x.pairPos, int32(len(x.pairEls)))
	for i, f := range b.feat {
		if i != p {
			z := b.zero[i]
			x.pairEls = append(x.pairEls, element{ratio: (1 - z) / z, out: out + f, bit: uint8(i)})
		}
	}
	x.pairTable = append(x.pairTable, int32(len(x.table)))
	full := uint64(1)<<d - 1
	bq := uint64(1) << p
	r1, r2 := (1-zl)/zl, (1-zr)/zr
	// value is a leaf's contribution at element p for hot set m.
	value := func(w []float64, m uint64, r float64) float64 {
		if m&bq != 0 {
			return r * w[m^bq]
		}
		return -w[m]
	}
	u, vq := grow(b.u, 2<<d), grow(b.v, 2<<d)
	b.u, b.v = u, vq
	for i := range u {
		m, left := uint64(i)&full, i>>d == 1
		m1, m2 := m, m
		switch {
		case m&bq == 0 && left:
			u[i], vq[i] = 0, 0 // no row has this state
			continue
		case m&bq != 0 && left:
			m2 = m &^ bq
		case m&bq != 0:
			m1 = m &^ bq
		}
		u[i] = b.w1[m1] + b.w2[m2]
		vq[i] = value(b.w1, m1, r1) + value(b.w2, m2, r2)
	}
	x.table = append(x.table, u...)
	x.table = append(x.table, vq...)
	return true, nil
}

// weights appends to dst the table W[m] = v·Zcold(m)·Q(m) of a leaf with
// value v on the current path, for every hot set m of its d elements. A hot
// element p's value v·(1-z_p)·Zcold(m)·Q(m\{p}) is (1-z_p)/z_p·W[m\{p}],
// because making p cold multiplies Zcold by z_p. W of the full set is never
// read (no element is cold) and is stored as 0.
func (b *builder) weights(dst []float64, v float64) []float64 {
	d := len(b.feat)
	full := uint64(1)<<d - 1
	if cap(b.poly) < d+1 {
		b.poly = make([]float64, d+1)
	}
	for m := uint64(0); m <= full; m++ {
		zc := 1.0
		e := b.poly[:1]
		e[0] = 1
		for p := 0; p < d; p++ {
			z := b.zero[p]
			if m>>p&1 == 0 {
				zc *= z
				continue
			}
			e = append(e, 0)
			for j := len(e) - 1; j > 0; j-- {
				e[j] += z * e[j-1]
			}
		}
		w := 0.0
		if m != full {
			w = v * zc * weighted(e, len(e)-1, d)
		}
		dst = append(dst, w)
	}
	return dst
}

// leaf records leaf ni, walked alone, with the current path and, when the
// path can be tabulated, its W table.
func (b *builder) leaf(x *Explainer, ti int, ni int32, src uint16, bias *float64) error {
	t := &x.e.Trees[ti]
	v, err := leafValue(t, ti, ni)
	if err != nil {
		return err
	}
	d := len(b.feat)
	out := int32(t.Class * x.stride)
	x.ops = append(x.ops, op{kind: opLeaf, src: src, ref: int32(len(x.leafWidth))})
	x.leafWidth = append(x.leafWidth, uint8(d))
	x.leafPos = append(x.leafPos, int32(len(x.posOut)))
	x.leafValue = append(x.leafValue, v)
	tabled := b.tabulable(x, -1, 1<<d)
	for p, f := range b.feat {
		z := b.zero[p]
		x.posOut = append(x.posOut, out+f)
		x.posZero = append(x.posZero, z)
		x.posOneMinus = append(x.posOneMinus, 1-z)
		ratio := 0.0
		if tabled {
			ratio = (1 - z) / z
		}
		x.posFast = append(x.posFast, element{ratio: ratio, out: out + f, bit: uint8(p)})
	}
	*bias += v * b.pathWeight()
	if !tabled {
		x.leafTable = append(x.leafTable, -1)
		return nil
	}
	x.leafTable = append(x.leafTable, int32(len(x.table)))
	x.table = b.weights(x.table, v)
	return nil
}
