package importance

import (
	"math/bits"

	"splitledger/importance/forest"
	"splitledger/importance/metrics"
	"splitledger/importance/parallel"
)

// rowState is one row's results from its pass over the ensemble.
type rowState struct {
	x        []float64 // the row, by feature
	cls      []int32   // the row's value class per feature
	wordIdx  []uint8   // the row's rows of the leaf-mask word-index tables (maskForest.rowOff)
	margin   []float64 // per output class
	tests    []float64 // per feature: tests on the row's paths
	builders []*stepBuilder
	// numeric features' difference arrays, touched-bin bits and missing
	// values, back to back (run.diffOff, run.markOff; k per feature): the
	// builders' slices are views into them
	diff    []float64
	mark    []uint64
	missing []float64
	// shuffled metrics (one output class): the mask pass writes each step
	// at the classes keepPerturbed will ask (the median's, then each
	// shuffle's) instead of over all classes. Per numeric feature, qmark
	// has a bit per asked class below nb (laid out as mark) and qrank the
	// number of bits in the words before each; qacc (qw slots a feature)
	// holds the changes by asked class in difference form (slot p: from
	// the p-th smallest on), its last slot the missing class's change.
	qmark  []uint64
	qrank  []int32
	qacc   []float64
	qw     int
	donors [][]int32 // the classes of each shuffle's donor row
}

// worker holds one goroutine's scratch space.
type worker struct {
	row      *rowState
	block    []*rowState // shuffled metrics: the rows of one block (maskBlock)
	rows     []int32     // shuffled metrics: the chunk's rows in unit order
	zero     []float64
	delta    []float64
	pathSeen []int32 // stamp per feature: tree index + 1 when met on the path
	onPath   []int32 // first path node of each feature met on the current tree's path, in order
	path     []int32 // internal nodes of the current tree's own path, root first
	state    []pathState
	loss     *rowLoss
	walker   freeWalker
	masks    maskScratch
	col      []float64 // additive metrics: the chunk's per-class loss sums (see run.colSums)
	// shuffled metrics: margins of the chunk's rows, per perturbation
	// layout [row][feature][0:miss 1:freeze 2..: repeats] (K=1 models)
	chunkScores []float64
	chunkBase   []float64
	queries     []int32   // shuffled metrics: the classes asked of one step function
	answers     []float64 // and its values there
	cumul       []float64 // keepPerturbed: running sums over the asked classes
	ndcg        metrics.NDCGScratch
	groupS      []float64
	groupL      []float64
	groupG      []float64
}

func (r *run) newWorker() *worker {
	nf := r.e.NumFeatures()
	k := r.e.NumClass
	w := &worker{
		zero:     make([]float64, k),
		delta:    make([]float64, k),
		pathSeen: make([]int32, nf),
		state:    make([]pathState, nf),
		loss:     newRowLoss(r.metric, r.e),
		answers:  make([]float64, 1+len(r.perms)),
		cumul:    make([]float64, len(r.perms)+3),
	}
	rs := r.newRowState()
	if !r.metric.additive() {
		w.block = make([]*rowState, maskBlock)
		w.block[0] = rs
		for i := 1; i < maskBlock; i++ {
			w.block[i] = r.newRowState()
		}
	}
	w.row = rs
	w.walker = freeWalker{e: r.e, xgb: r.e.Rule == forest.LessThanFloat32}
	return w
}

// newRowState allocates one row's state.
func (r *run) newRowState() *rowState {
	nf := r.e.NumFeatures()
	k := r.e.NumClass
	rs := &rowState{
		x:        make([]float64, nf),
		cls:      make([]int32, nf),
		wordIdx:  make([]uint8, r.masks.rowLen),
		margin:   make([]float64, k),
		tests:    make([]float64, nf),
		builders: make([]*stepBuilder, nf),
		diff:     make([]float64, r.diffOff[nf]),
		mark:     make([]uint64, r.markOff[nf]),
		missing:  make([]float64, nf*k),
	}
	if !r.metric.additive() {
		rs.qw = len(r.perms) + 3 // up to 1+R asked classes, one past them, the missing slot
		rs.qmark = make([]uint64, r.markOff[nf])
		rs.qrank = make([]int32, r.markOff[nf])
		rs.qacc = make([]float64, nf*rs.qw)
	}
	for j := range rs.builders {
		// views into the row's flat arrays, which the mask pass indexes
		// directly
		rs.builders[j] = newStepBuilder(&r.vc[j], k, rs.diff[r.diffOff[j]:r.diffOff[j+1]],
			rs.mark[r.markOff[j]:r.markOff[j+1]], rs.missing[j*k:(j+1)*k])
	}
	return rs
}

// maskBlock is the number of rows the shuffled metrics' pass takes through
// each mask tree in turn, so that a tree's records are read once for all of
// them; their states (a few kB each, plus their word-index rows) stay in
// cache from tree to tree.
const maskBlock = 16

// compute fills r.sums: one pass over the rows, chunk by chunk.
func (r *run) compute() {
	workers := make(chan *worker, parallel.Workers(r.cfg.Workers))
	parallel.Chunks(len(r.chunks), 1, r.cfg.Workers, func(c, _, _ int) {
		var w *worker
		select {
		case w = <-workers:
		default:
			w = r.newWorker()
		}
		if r.colSums != nil {
			r.colSums[c] = make([]float64, r.colOff[len(r.colOff)-1])
			w.col = r.colSums[c]
		}
		r.chunk(w, r.chunks[c][0], r.chunks[c][1])
		workers <- w
	})
}

// perturbations per feature for shuffled metrics: missing, freeze, repeats
func (r *run) nPert() int { return 2 + len(r.perms) }

// chunk processes units [u0, u1): row by row for the additive metrics, in
// blocks of rows for the shuffled ones (chunkShuffled).
func (r *run) chunk(w *worker, u0, u1 int) {
	if !r.metric.additive() {
		r.chunkShuffled(w, u0, u1)
		return
	}
	f, lay := r.f, &r.lay
	rs := w.row
	for u := u0; u < u1; u++ {
		out := r.sums[u*lay.cols : (u+1)*lay.cols]
		for _, row := range r.units[u] {
			r.scoreRow(w, rs, int(row))
			y := 0.0
			if f.Label != nil {
				y = f.Label[row]
			}
			wt := r.rowTotals(rs, int(row), out)
			r.additiveRow(w, rs, out, wt, y)
		}
	}
}

// rowTotals adds one row's weight, path usage and |SHAP| to its unit's
// sums, and returns the row's weight.
func (r *run) rowTotals(rs *rowState, row int, out []float64) float64 {
	lay := &r.lay
	nf := len(rs.tests)
	wt := 1.0
	if r.f.Weight != nil {
		wt = r.f.Weight[row]
	}
	out[lay.denRows] += wt
	for j := 0; j < nf; j++ {
		if rs.tests[j] > 0 { // some path tests it
			out[lay.path+j] += wt
		}
		out[lay.tests+j] += wt * rs.tests[j]
	}
	if r.shapAt != nil && r.shapAt[row] >= 0 {
		abs := r.shapAbs[r.shapAt[row] : int(r.shapAt[row])+nf]
		out[lay.denSHAP] += wt
		for j := 0; j < nf; j++ {
			out[lay.shap+j] += wt * abs[j]
		}
	}
	return wt
}

// chunkShuffled processes units [u0, u1) for the shuffled metrics. The
// chunk's rows, in unit order, go in blocks of maskBlock: every mask tree
// takes the whole block in turn (scoreMaskQueries), then each row its
// walked trees and keepPerturbed. For NDCG a unit's terms follow its last
// row, while its perturbed margins are still in cache.
func (r *run) chunkShuffled(w *worker, u0, u1 int) {
	lay := &r.lay
	nf := r.e.NumFeatures()
	np := r.nPert()
	rows := w.rows[:0]
	for u := u0; u < u1; u++ {
		rows = append(rows, r.units[u]...)
	}
	w.rows = rows
	if cap(w.chunkScores) < len(rows)*nf*np {
		w.chunkScores = make([]float64, len(rows)*nf*np)
		w.chunkBase = make([]float64, len(rows))
	}
	w.chunkScores = w.chunkScores[:len(rows)*nf*np]
	w.chunkBase = w.chunkBase[:len(rows)]
	u, first := u0, 0 // the unit of the next row, and its first local row
	for b0 := 0; b0 < len(rows); b0 += maskBlock {
		blk := rows[b0:min(b0+maskBlock, len(rows))]
		for i, row := range blk {
			r.startRow(w.block[i], int(row))
			r.askClasses(w, w.block[i], int(row))
		}
		for ti := range r.masks.trees {
			if m := &r.masks.trees[ti]; m.groups0 >= 0 {
				for i := range blk {
					r.masks.scoreMaskQueries(&w.masks, w.block[i], m)
				}
			}
		}
		for i, row := range blk {
			rs := w.block[i]
			if r.masks.walked > 0 {
				r.walkTrees(w, rs)
			}
			out := r.sums[u*lay.cols : (u+1)*lay.cols]
			wt := r.rowTotals(rs, int(row), out)
			if r.metric == MetricAUC { // AUC is computed over the sample after the pass
				out[lay.denMetric] += wt
			}
			local := b0 + i
			r.keepPerturbed(w, rs, int(row), local)
			if local+1 == first+len(r.units[u]) { // the unit's last row
				if r.metric == MetricNDCG {
					r.ndcgUnit(w, u, out, first)
				}
				u, first = u+1, local+1
			}
		}
	}
}

// keepPerturbed stores the margins of one row (local index in the chunk)
// under every perturbation, for the shuffled metrics.
func (r *run) keepPerturbed(w *worker, rs *rowState, row, local int) {
	nf := r.e.NumFeatures()
	np := r.nPert()
	w.chunkBase[local] = rs.margin[0]
	base := local * nf * np
	qw := rs.qw
	for j := 0; j < nf; j++ {
		s := w.chunkScores[base+j*np : base+(j+1)*np]
		b := rs.builders[j]
		if !b.used && rs.tests[j] == 0 { // no path tests it
			for i := range s {
				s[i] = rs.margin[0]
			}
			r.clearAsked(rs, j)
			continue
		}
		sf := &b.sf
		vc := &r.vc[j]
		m, own := rs.margin[0], int32(rs.cls[j])
		qs := r.asked(w.queries, rs, j)
		w.queries = qs
		vals := w.answers[:len(qs)]
		miss := 0.0
		switch {
		case !b.used: // no walked tree wrote steps
			clear(vals)
		case vc.categorical:
			for i, c := range qs {
				vals[i] = sf.at1(vc, int(c))
			}
			miss = sf.at1(vc, vc.missingClass())
		default:
			b.evalQueries(qs, vals)
			miss = sf.missing[0]
		}
		if !vc.categorical {
			// the mask trees' part: running sums over the asked classes
			// in ascending order, read at each one's rank
			acc := rs.qacc[j*qw : (j+1)*qw]
			mo := int(r.markOff[j])
			nb := int32(vc.nb)
			cum := w.cumul[:qw]
			c := 0.0
			for p := range cum {
				c += acc[p]
				cum[p] = c
			}
			for i, q := range qs {
				switch {
				case q < nb:
					wi := mo + int(q>>6)
					vals[i] += cum[int(rs.qrank[wi])+bits.OnesCount64(rs.qmark[wi]&(1<<(q&63)-1))]
				case q == nb:
					vals[i] += acc[qw-1]
				}
			}
			miss += acc[qw-1]
			clear(acc)
			r.clearAsked(rs, j)
		}
		s[0] = m + miss
		for i, c := range qs {
			// the row's own class changes nothing, exactly (the step
			// sums may carry rounding there)
			if c == own {
				s[1+i] = m
			} else {
				s[1+i] = m + vals[i]
			}
		}
	}
	if r.aucScores != nil {
		r.aucBase[row] = rs.margin[0]
		for j := 0; j < nf; j++ {
			s := w.chunkScores[base+j*np : base+(j+1)*np]
			for i, v := range s {
				r.aucScores[j*np+i][row] = v
			}
		}
	}
}

// askClasses sets, before a row's pass, the classes keepPerturbed will
// ask of each numeric feature (rowState.qmark, .qrank), and finds each
// shuffle's donor row (rowState.donors).
func (r *run) askClasses(w *worker, rs *rowState, row int) {
	nf := len(rs.x)
	donors := rs.donors[:0]
	for _, p := range r.perms {
		donors = append(donors, r.rowClass[int(p[row])*nf:int(p[row]+1)*nf])
	}
	rs.donors = donors
	for j := range r.vc {
		vc := &r.vc[j]
		if vc.categorical {
			continue
		}
		nb := int32(vc.nb)
		q := rs.qmark[r.markOff[j]:r.markOff[j+1]]
		w.queries = r.asked(w.queries, rs, j)
		for _, c := range w.queries {
			if c < nb {
				q[c>>6] |= 1 << (c & 63)
			}
		}
		rank := rs.qrank[r.markOff[j]:r.markOff[j+1]]
		n := int32(0)
		for wi, word := range q {
			rank[wi] = n
			n += int32(bits.OnesCount64(word))
		}
	}
}

// asked returns, in dst's space, the classes keepPerturbed asks of
// feature j for the row: the median's, then each shuffle's (from
// rowState.donors).
func (r *run) asked(dst []int32, rs *rowState, j int) []int32 {
	dst = append(dst[:0], int32(r.medianC[j]))
	for _, d := range rs.donors {
		dst = append(dst, d[j])
	}
	return dst
}

// clearAsked clears feature j's asked-class bits for the next row.
func (r *run) clearAsked(rs *rowState, j int) {
	if !r.vc[j].categorical {
		clear(rs.qmark[r.markOff[j]:r.markOff[j+1]])
	}
}

// scoreRow runs one row through every tree for the additive metrics: its
// margin, path usage and every feature's whole step function (only features
// met on the row's own paths can move its leaves). Leaf-mask trees go first,
// then the walked ones. The shuffled metrics go by blocks (chunkShuffled).
func (r *run) scoreRow(w *worker, rs *rowState, row int) {
	r.startRow(rs, row)
	for ti := range r.masks.trees {
		if m := &r.masks.trees[ti]; m.groups0 >= 0 {
			r.masks.scoreMaskTree(&w.masks, rs, m)
		}
	}
	if r.masks.walked > 0 {
		r.walkTrees(w, rs)
	}
	for j, b := range rs.builders {
		// a feature on a mask tree's path wrote steps (maybe all zero)
		b.used = b.used || rs.tests[j] > 0
	}
	for _, b := range rs.builders {
		if b.used {
			b.finish()
		}
	}
}

// startRow loads one row into rs: values, classes, zero test counts, empty
// builders, the base margin and its rows of the word-index tables.
func (r *run) startRow(rs *rowState, row int) {
	for j := range rs.x {
		rs.x[j] = r.cols[j][row]
		rs.tests[j] = 0
		rs.builders[j].start()
		if r.rowClass != nil {
			rs.cls[j] = r.rowClass[row*len(rs.x)+j]
		} else {
			rs.cls[j] = int32(r.vc[j].classOf(rs.x[j]))
		}
	}
	copy(rs.margin, r.e.BaseMargin)
	r.masks.rowTable(rs)
}

// walkTrees adds one row's part of the trees that do not take the leaf-mask
// form (category sets, LightGBM's zero-as-missing splits, more than 64
// leaves): the row's own path, then free walks of the features met on it.
func (r *run) walkTrees(w *worker, rs *rowState) {
	e := r.e
	for j := range w.pathSeen {
		w.pathSeen[j] = 0
		w.state[j].tree = 0
	}
	w.walker.x = rs.x
	xgb := e.Rule == forest.LessThanFloat32
	for ti := range e.Trees {
		if r.masks.trees[ti].groups0 >= 0 {
			continue
		}
		t := &e.Trees[ti]
		ns := r.splits[ti]
		stamp := int32(ti + 1)
		w.onPath = w.onPath[:0]
		w.path = w.path[:0]
		// own path
		wn := r.walk[ti]
		i := int32(0)
		for {
			n := &wn[i]
			if n.flags&wLeaf != 0 {
				break
			}
			fj := n.feat
			w.path = append(w.path, i)
			rs.tests[fj]++
			if w.pathSeen[fj] != stamp {
				w.pathSeen[fj] = stamp
				w.onPath = append(w.onPath, i)
			}
			x := rs.x[fj]
			switch {
			case n.flags&wSlow != 0:
				i = forest.Next(t, &t.Nodes[i], x, e.Rule)
			case x != x: // missing: the default branch
				if n.flags&wDefaultLeft != 0 {
					i = n.left
				} else {
					i = n.right
				}
			case xgb && float32(x) < n.thr, !xgb && x <= t.Nodes[i].Threshold:
				i = n.left
			default:
				i = n.right
			}
		}
		own := wn[i].leafValue()
		rs.margin[t.Class] += own
		// categorical features: one set walk from their first path node
		for _, start := range w.onPath {
			fj := wn[start].feat
			vc := &r.vc[fj]
			if vc.categorical {
				w.walker.walkSet(t, ns, fj, start, vc.all, own, rs.builders[fj])
			}
		}
		// numeric features: one pass along the path. Only a feature's own
		// nodes on the path matter to it (elsewhere the row follows its own
		// branch whatever the feature's value), so each feature keeps the
		// classes still on the path and walks only the branches that leave
		// it; classes that stay on the path end at the own leaf (change 0).
		for p, ni := range w.path {
			n := &wn[ni]
			if n.flags&wCatFeature != 0 {
				continue
			}
			fj := n.feat
			st := &w.state[fj]
			if st.tree != stamp {
				*st = r.init[fj]
				st.tree = stamp
			}
			if !(st.lo < st.hi || st.m || st.z) {
				continue
			}
			next := i
			if p+1 < len(w.path) {
				next = w.path[p+1]
			}
			ml, zl := n.flags&wMissLeft != 0, n.flags&wZeroLeft != 0
			llo, lhi := st.lo, min(st.hi, n.cut)
			rlo, rhi := max(st.lo, n.cut), st.hi
			lm, rm := st.m && ml, st.m && !ml
			lz, rz := st.z && zl, st.z && !zl
			b := rs.builders[fj]
			if next == n.left {
				if rlo < rhi || rm || rz {
					w.walker.walkNumeric(t, wn, fj, n.right, rlo, rhi, rm, rz, own, b)
				}
				st.lo, st.hi, st.m, st.z = llo, lhi, lm, lz
			} else {
				if llo < lhi || lm || lz {
					w.walker.walkNumeric(t, wn, fj, n.left, llo, lhi, lm, lz, own, b)
				}
				st.lo, st.hi, st.m, st.z = rlo, rhi, rm, rz
			}
		}
	}
}

// additiveRow adds one row's metric terms: base, and per feature the exact
// permutation expectation, the missing-break and the freeze values.
func (r *run) additiveRow(w *worker, rs *rowState, out []float64, wt, y float64) {
	lay := &r.lay
	K := r.e.NumClass
	clear(w.zero)
	l0 := w.loss.eval(rs.margin, w.zero, y)
	out[lay.denMetric] += wt
	out[lay.base] += wt * l0
	for j := range rs.builders {
		b := rs.builders[j]
		d := out[lay.drop+3*j : lay.drop+3*j+3]
		col := w.col[r.colOff[j]:r.colOff[j+1]]
		if !b.used {
			d[0] += wt * l0
			d[1] += wt * l0
			d[2] += wt * l0
			col[len(col)-1] += wt * l0
			continue
		}
		vc := &r.vc[j]
		sf := &b.sf
		// missing-break and freeze
		d[1] += wt * w.loss.eval(rs.margin, sf.at(vc, vc.missingClass(), K, w.delta), y)
		d[2] += wt * w.loss.eval(rs.margin, sf.at(vc, r.medianC[j], K, w.delta), y)
		// exact permutation expectation: sum over classes of mass x loss
		exp := 0.0
		if vc.categorical {
			for c, p := range r.pClass[j] {
				if p > 0 {
					l := w.loss.eval(rs.margin, sf.at(vc, c, K, w.delta), y)
					exp += p * l
					col[c] += wt * l
				}
			}
		} else {
			pre := r.prefix[j]
			prev := int32(0)
			cur := w.zero
			seg := func(a, b int32, delta []float64) {
				if m := pre[b] - pre[a]; m > 0 {
					l := w.loss.eval(rs.margin, delta, y)
					exp += m * l
					col[a] += wt * l
					col[b] -= wt * l
				}
			}
			for s, start := range sf.starts {
				seg(prev, start, cur)
				prev = start
				cur = sf.deltas[s*K : (s+1)*K]
			}
			seg(prev, int32(vc.nb), cur)
			if p := r.pClass[j][0]; p > 0 {
				l := w.loss.eval(rs.margin, sf.missing, y)
				exp += p * l
				col[vc.nb+1] += wt * l
			}
			if len(r.pClass[j]) > 1 {
				if p := r.pClass[j][1]; p > 0 {
					l := w.loss.eval(rs.margin, sf.zero, y)
					exp += p * l
					col[vc.nb+2] += wt * l
				}
			}
		}
		d[0] += wt * exp
	}
}

// ndcgUnit computes one query group's NDCG terms from the chunk's stored
// perturbed margins; first is the group's first local row.
func (r *run) ndcgUnit(w *worker, u int, out []float64, first int) {
	rows := r.units[u]
	n := len(rows)
	nf := r.e.NumFeatures()
	np := r.nPert()
	lay := &r.lay
	if cap(w.groupS) < n {
		w.groupS = make([]float64, n)
		w.groupL = make([]float64, n)
	}
	s, lab := w.groupS[:n], w.groupL[:n]
	wt := 1.0
	if r.f.Weight != nil {
		wt = 0
		for _, row := range rows {
			wt += r.f.Weight[row]
		}
		wt /= float64(n)
	}
	for i, row := range rows {
		lab[i] = r.f.Label[row]
	}
	ideal := metrics.IdealDCG(lab, r.k, r.cfg.Gain, &w.ndcg)
	if !(ideal > 0) {
		if r.cfg.NoRelevant == metrics.NoRelevantZero {
			out[lay.denMetric] += wt
		}
		return
	}
	out[lay.denMetric] += wt
	if cap(w.groupG) < n {
		w.groupG = make([]float64, n)
	}
	gains := w.groupG[:n]
	for i, l := range lab {
		gains[i] = r.cfg.Gain.Of(l)
	}
	dcg := func() float64 { return metrics.DCGGains(s, gains, r.k, &w.ndcg) / ideal }
	copy(s, w.chunkBase[first:first+n])
	base := dcg()
	out[lay.base] += wt * base
	for j := 0; j < nf; j++ {
		d := out[lay.drop+3*j : lay.drop+3*j+3]
		vals := [3]float64{}
		for p := 0; p < np; p++ {
			same := true
			for i := 0; i < n; i++ {
				v := w.chunkScores[(first+i)*nf*np+j*np+p]
				if v != w.chunkBase[first+i] {
					same = false
				}
				s[i] = v
			}
			v := base
			if !same {
				v = dcg()
			}
			switch p {
			case 0:
				vals[1] = v
			case 1:
				vals[2] = v
			default:
				vals[0] += v / float64(np-2)
			}
		}
		d[0] += wt * vals[0]
		d[1] += wt * vals[1]
		d[2] += wt * vals[2]
	}
}

// pathState is one feature's classes still on the row's own path in the
// current tree (tree is the tree's stamp, so stale states reset).
type pathState struct {
	tree   int32
	lo, hi int32
	m, z   bool
}

// linearizePermutation adds to every unit's permutation terms the second
// half of the V-statistic's influence function. The exact permutation
// expectation is theta = (1/W²) Σ_r Σ_s w_r w_s L(r, x_s): row r's loss
// with row s's value of the feature. Reweighting only the first index (as
// the per-row terms alone would) ignores that a bootstrap replicate also
// changes which values are drawn; the first-order (Hoeffding) expansion
// gives each row the influence A_r + B_r − theta, where
// A_r = Σ_s w_s L(r, x_s)/W is its own expected loss and
// B_r = Σ_s w_s L(s, x_r)/W the loss its value causes in the others (the
// column sums gathered per value class during the pass). The point value is
// unchanged (the added terms sum to 0); the intervals then reflect both.
func (r *run) linearizePermutation() {
	nf := r.lay.nf
	cols := r.lay.cols
	total := make([]float64, r.colOff[nf])
	for _, c := range r.colSums { // chunk order: deterministic
		for i, v := range c {
			total[i] += v
		}
	}
	r.colSums = nil
	wTot, theta := 0.0, make([]float64, nf)
	for u := range r.units {
		wTot += r.sums[u*cols+r.lay.denMetric]
		for j := 0; j < nf; j++ {
			theta[j] += r.sums[u*cols+r.lay.drop+3*j]
		}
	}
	if !(wTot > 0) {
		return
	}
	// per feature: column loss sum per class, divided by W
	colMean := make([][]float64, nf)
	for j := 0; j < nf; j++ {
		theta[j] /= wTot
		vc := &r.vc[j]
		t := total[r.colOff[j]:r.colOff[j+1]]
		constant := t[len(t)-1]
		m := make([]float64, vc.n)
		if vc.categorical {
			for c := range m {
				m[c] = (t[c] + constant) / wTot
			}
		} else {
			acc := 0.0
			for b := 0; b < vc.nb; b++ {
				acc += t[b]
				m[b] = (acc + constant) / wTot
			}
			m[vc.nb] = (t[vc.nb+1] + constant) / wTot
			if vc.zeroMode {
				m[vc.nb+1] = (t[vc.nb+2] + constant) / wTot
			}
		}
		colMean[j] = m
	}
	parallel.Chunks(len(r.chunks), 1, r.cfg.Workers, func(c, _, _ int) {
		for u := r.chunks[c][0]; u < r.chunks[c][1]; u++ {
			out := r.sums[u*cols : (u+1)*cols]
			for _, row := range r.units[u] {
				wt := 1.0
				if r.f.Weight != nil {
					wt = r.f.Weight[row]
				}
				for j := 0; j < nf; j++ {
					cl := r.vc[j].classOf(r.cols[j][row])
					out[r.lay.drop+3*j] += wt * (colMean[j][cl] - theta[j])
				}
			}
		}
	})
}
