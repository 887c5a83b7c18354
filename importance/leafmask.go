package importance

import (
	"math/bits"
	"slices"

	"splitledger/importance/forest"
	"splitledger/importance/parallel"
)

// Leaf masks: a second way to find a row's step functions, for trees of at
// most 64 leaves whose splits are plain numeric threshold tests.
//
// The leaves of such a tree are numbered left to right, and every internal
// node carries the word of all leaves except those under its left child. A
// row's exit leaf is the lowest set bit of the AND of the words of the nodes
// that do not send the row left (the leftmost leaf none of them rules out;
// the exit-leaf rule of Lucchese et al., "QuickScorer", SIGIR 2015).
//
// The nodes are grouped by feature. Within a group, the nodes that send a
// value class right are those whose cut is at or below the class, so the
// AND of a group's words takes one of a few precomputed values: one per
// interval between the group's distinct cuts, and one for the missing
// class. Which one a class picks is read from a per-feature table, so a
// row's pass over a tree is one load and one AND per group.
//
// Changing one feature changes one group's word only. With the other
// groups' words fixed at the row's values, the leaf reached from interval k
// is the lowest set bit of others & word[k]. The interval words only lose
// bits as k grows, so that leaf can only move right, and it moves exactly
// at the first interval whose word lacks it (the group's kill index for
// that leaf): the feature's step function in this tree takes one step per
// distinct leaf reached, whatever the number of cuts.
//
// All qualifying trees share flat arrays laid out in tree order, so a pass
// over the ensemble reads them front to back.
type maskForest struct {
	trees  []maskTree // per tree of the ensemble; groups0 < 0 when it walks
	groups []maskGroup
	// per group, ncuts+1 intervals then the missing class: the AND of the
	// group's node words for each, and its first class (missing: nb)
	words  []uint64
	starts []int32
	cuts   []int32 // per group: its distinct cuts, ascending
	kill   []uint8 // per group, 64 entries (one per leaf bit): first interval lacking the leaf (ncuts+1: none)
	// per leaf, in tree order: its value, and where its path's groups start
	// in paths (leaf i's are paths[leafPath[i]:leafPath[i+1]]; one more
	// entry closes the last leaf)
	leafValue []float64
	leafPath  []int32
	paths     []uint16 // group<<8 | times the path tests that group
	// table holds, per feature and value class, the word index of each of
	// the feature's groups: feature f's block starts at tableOff[f] and has
	// one row of slots[f] bytes per class 0..nb (nb: missing).
	table    []uint8
	tableOff []int
	slots    []int
	// a row copies its rows of the tables into one buffer (rowState.wordIdx),
	// feature f's at rowOff[f]; refs gives each group's byte there (col),
	// and its first interval word, in the order of groups
	rowOff []int
	rowLen int
	refs   []maskWordRef
	walked int // trees that do not qualify (walked instead)
	// per group: its column in its feature's table, and its first cut
	slotOf, cutsAt []int32
}

// leafMasks turns the leaf-mask form on, and maskOnly (when set) limits it
// to the trees it accepts: tests use them to check the masks against the
// walks, alone and mixed in one ensemble.
var (
	leafMasks = true
	maskOnly  func(tree int) bool
)

// maxMaskTable bounds one feature's word-index table and maxMaskTables all
// of them (bytes): trees that test a feature whose table would not fit are
// walked. Variables so tests can force the mixed case.
var maxMaskTable, maxMaskTables = 64 << 20, 256 << 20

// maskTree locates one tree's records.
type maskTree struct {
	groups0, groups1 int32 // groups[groups0:groups1]
	leaves0          int32 // its leaves start at leafValue[leaves0]
	class            int32 // output class the tree adds to
}

// maskGroup is one feature's nodes in one tree.
// Its kill indexes are maskForest.kill[64*g:64*(g+1)] (g: its index in
// groups); its table column and cuts are kept apart (slotOf, cutsAt), as
// only the set-up reads them.
type maskGroup struct {
	words int32 // first interval in maskForest.words and .starts
	feat  int32
	// where the pass writes the feature's pieces for the tree's output
	// class in a row's flat arrays: its difference array (rowState.diff),
	// touched-bin bits (.mark) and missing-class change (.missing); set by
	// placeRow
	diff, mark, miss int32
	ncuts            uint8 // at most 63: a tree of at most 64 leaves
}

// maskWordRef is what the group-word pass needs of one group: where its
// word index sits in the row's buffer and where its interval words start.
type maskWordRef struct {
	col, words int32
}

// maskable reports whether tree t can take the leaf-mask form: at most 64
// leaves (so at most 63 groups and path counts below 64, which fit the
// 8-bit fields of paths and kill) and only numeric threshold splits (NaN
// may go its own way or zero's) on features without category sets or a
// zero class.
func maskable(t *forest.Tree, vc []valueClasses, tooBig []bool) bool {
	leaves := 0
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			leaves++
			continue
		}
		c := &vc[n.Feature]
		// LightGBM's NaN-as-zero nodes qualify: the missing class takes
		// zero's branch there, which nodeSplit.missingLeft already says
		if n.Flags&(forest.FlagCategorical|forest.FlagZeroIsMissing) != 0 || c.categorical || c.zeroMode || tooBig[n.Feature] {
			return false
		}
	}
	return leaves <= 64
}

// compileMasks builds the mask form of every qualifying tree (the tables on
// at most workers goroutines; <= 0: all cores).
func compileMasks(e *forest.Ensemble, ns [][]nodeSplit, vc []valueClasses, workers int) *maskForest {
	nf := len(vc)
	tooBig := make([]bool, nf)
	ok := make([]bool, len(e.Trees))
	// groups per feature among the qualifying trees; a feature whose table
	// would be too large disqualifies its trees (counts only fall, so one
	// recount settles it)
	for round := 0; round < 2; round++ {
		groups := make([]int, nf)
		for ti := range e.Trees {
			ok[ti] = leafMasks && (maskOnly == nil || maskOnly(ti)) && maskable(&e.Trees[ti], vc, tooBig)
			if ok[ti] {
				seen := map[int32]bool{}
				for i := range e.Trees[ti].Nodes {
					n := &e.Trees[ti].Nodes[i]
					if !n.IsLeaf() && !seen[n.Feature] {
						seen[n.Feature] = true
						groups[n.Feature]++
					}
				}
			}
		}
		// the smallest tables first, until the budget is spent
		order := make([]int, nf)
		for j := range order {
			order[j] = j
		}
		size := func(j int) int { return (vc[j].nb + 1) * groups[j] }
		slices.SortStableFunc(order, func(a, b int) int { return size(a) - size(b) })
		total := 0
		for _, j := range order {
			total += size(j)
			if size(j) > maxMaskTable || total > maxMaskTables {
				tooBig[j] = true
			}
		}
	}
	mf := &maskForest{trees: make([]maskTree, len(e.Trees)), tableOff: make([]int, nf), slots: make([]int, nf)}
	for ti := range e.Trees {
		mf.trees[ti] = maskTree{groups0: -1}
		if ok[ti] {
			mf.add(ti, &e.Trees[ti], ns[ti], vc)
		} else {
			mf.walked++
		}
	}
	size := 0
	mf.rowOff = make([]int, nf)
	for j := range vc {
		mf.tableOff[j] = size
		mf.rowOff[j] = mf.rowLen
		if mf.slots[j] > 0 {
			size += (vc[j].nb + 1) * mf.slots[j]
			mf.rowLen += mf.slots[j]
		}
	}
	mf.refs = make([]maskWordRef, len(mf.groups))
	for g, gr := range mf.groups {
		mf.refs[g] = maskWordRef{col: int32(mf.rowOff[gr.feat]) + mf.slotOf[g], words: gr.words}
	}
	mf.table = make([]uint8, size)
	// each feature's block row by row (writing it column by column would
	// touch a new cache line at every byte), the features in parallel
	bySlot := make([][]int32, nf) // per feature, its groups in slot order
	for g, gr := range mf.groups {
		bySlot[gr.feat] = append(bySlot[gr.feat], int32(g))
	}
	parallel.Chunks(nf, 1, workers, func(_, j, _ int) {
		gs := bySlot[j]
		if len(gs) == 0 {
			return
		}
		nb, s := vc[j].nb, len(gs)
		block := mf.table[mf.tableOff[j] : mf.tableOff[j]+(nb+1)*s]
		next := make([]int32, s) // per slot: its cuts at or below the class
		for c := 0; c < nb; c++ {
			row := block[c*s : (c+1)*s]
			for slot, g := range gs {
				gr := &mf.groups[g]
				cs := mf.cuts[mf.cutsAt[g] : mf.cutsAt[g]+int32(gr.ncuts)]
				k := next[slot]
				for int(k) < len(cs) && cs[k] <= int32(c) {
					k++
				}
				next[slot] = k
				row[slot] = uint8(k)
			}
		}
		for slot, g := range gs {
			block[nb*s+slot] = uint8(mf.groups[g].ncuts + 1)
		}
	})
	return mf
}

// add appends qualifying tree ti.
func (mf *maskForest) add(ti int, t *forest.Tree, ns []nodeSplit, vc []valueClasses) {
	// leaf numbers, left to right, and the leaves under each node
	leafOf := make([]int32, len(t.Nodes))
	under := make([]uint64, len(t.Nodes))
	var values []float64
	var number func(i int32)
	number = func(i int32) {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			leafOf[i] = int32(len(values))
			under[i] = 1 << uint(len(values))
			values = append(values, t.Value[i])
			return
		}
		number(n.Left)
		number(n.Right)
		under[i] = under[n.Left] | under[n.Right]
	}
	number(0)
	// groups in node order
	groupOf := map[int32]int32{}
	var members [][]int32
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			continue
		}
		g, ok := groupOf[n.Feature]
		if !ok {
			g = int32(len(members))
			groupOf[n.Feature] = g
			members = append(members, nil)
		}
		members[g] = append(members[g], int32(i))
	}
	hdr := maskTree{groups0: int32(len(mf.groups)), leaves0: int32(len(mf.leafValue)), class: int32(t.Class)}
	for _, nodes := range members {
		feat := t.Nodes[nodes[0]].Feature
		var cs []int32
		for _, i := range nodes {
			cs = append(cs, ns[i].cut)
		}
		slices.Sort(cs)
		cs = slices.Compact(cs)
		gr := maskGroup{feat: feat, ncuts: uint8(len(cs)), words: int32(len(mf.words))}
		mf.slotOf = append(mf.slotOf, int32(mf.slots[feat]))
		mf.cutsAt = append(mf.cutsAt, int32(len(mf.cuts)))
		mf.slots[feat]++ // the running count: the table width once all trees are in
		mf.cuts = append(mf.cuts, cs...)
		// interval k holds the classes in [cs[k-1], cs[k]): the nodes with
		// a cut at or below cs[k-1] send them right
		for k := 0; k <= len(cs); k++ {
			w, start := ^uint64(0), int32(0)
			if k > 0 {
				start = cs[k-1]
			}
			for _, i := range nodes {
				if k > 0 && ns[i].cut <= cs[k-1] {
					w &^= under[t.Nodes[i].Left]
				}
			}
			mf.words = append(mf.words, w)
			mf.starts = append(mf.starts, start)
		}
		w := ^uint64(0)
		for _, i := range nodes {
			if !ns[i].missingLeft {
				w &^= under[t.Nodes[i].Left]
			}
		}
		mf.words = append(mf.words, w)
		mf.starts = append(mf.starts, int32(vc[feat].nb))
		for l := range 64 { // 64 entries, so the hot loop indexes without a check
			k := len(cs) + 1
			for j := 0; j <= len(cs); j++ {
				if mf.words[int(gr.words)+j]&(1<<uint(l)) == 0 {
					k = j
					break
				}
			}
			mf.kill = append(mf.kill, uint8(k))
		}
		mf.groups = append(mf.groups, gr)
	}
	hdr.groups1 = int32(len(mf.groups))
	// each leaf's path: the groups it tests, in path order, with counts
	paths := make([][]uint16, len(values))
	var path []int32
	var walk func(i int32)
	walk = func(i int32) {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			l := leafOf[i]
		next:
			for _, g := range path {
				for k, e := range paths[l] {
					if int32(e>>8) == g {
						paths[l][k]++
						continue next
					}
				}
				paths[l] = append(paths[l], uint16(g)<<8|1)
			}
			return
		}
		path = append(path, groupOf[n.Feature])
		walk(n.Left)
		walk(n.Right)
		path = path[:len(path)-1]
	}
	walk(0)
	if len(mf.leafPath) > 0 {
		mf.leafPath = mf.leafPath[:len(mf.leafPath)-1] // reopen: this tree's first leaf closes the last
	}
	for l, v := range values {
		mf.leafValue = append(mf.leafValue, v)
		mf.leafPath = append(mf.leafPath, int32(len(mf.paths)))
		mf.paths = append(mf.paths, paths[l]...)
	}
	mf.leafPath = append(mf.leafPath, int32(len(mf.paths)))
	mf.trees[ti] = hdr
}

// placeRow records in every group where its feature's pieces go in a
// row's flat arrays: feature f's difference array starts at diffOff[f] and
// its touched-bin bits at markOff[f], k values per class.
func (mf *maskForest) placeRow(diffOff, markOff []int32, k int) {
	for _, m := range mf.trees {
		if m.groups0 < 0 {
			continue
		}
		for g := m.groups0; g < m.groups1; g++ {
			gr := &mf.groups[g]
			gr.diff = diffOff[gr.feat] + m.class
			gr.mark = markOff[gr.feat]
			gr.miss = gr.feat*int32(k) + m.class
		}
	}
}

// maskScratch is one worker's space for mask evaluation.
type maskScratch struct {
	pre, suf [64]uint64
}

// rowTable copies the row's rows of the word-index tables into its buffer,
// so the group-word pass reads each group's index at a fixed place.
func (mf *maskForest) rowTable(rs *rowState) {
	for j, s := range mf.slots {
		if s > 0 {
			off := mf.tableOff[j] + int(rs.cls[j])*s
			copy(rs.wordIdx[mf.rowOff[j]:mf.rowOff[j]+s], mf.table[off:off+s])
		}
	}
}

// scoreMaskTree adds one mask tree's part of a row: the margin, path usage
// and the step-function pieces of every feature on the row's path.
func (mf *maskForest) scoreMaskTree(sc *maskScratch, rs *rowState, m *maskTree) {
	own, p0, p1 := mf.exitLeaf(sc, rs, m)
	if p0 == p1 {
		return
	}
	// the arrays in locals: the stores below could alias them otherwise,
	// and the compiler would reload every header each iteration
	groups := mf.groups[m.groups0:m.groups1]
	allWords := mf.words
	ng := len(groups)
	pre, suf := sc.pre[:ng], sc.suf[:ng]
	values := mf.leafValue[m.leaves0:]
	allStarts, allKill := mf.starts, mf.kill
	g0 := int(m.groups0)
	tests, diffAll, markAll, missing := rs.tests, rs.diff, rs.mark, rs.missing
	stride := len(rs.margin)
	// the arrays are indexed at offsets rather than sliced per group:
	// making five slices a group cost more than the work they frame
	for _, pe := range mf.paths[p0:p1] {
		g := int(pe >> 8)
		gr := &groups[g]
		f := gr.feat
		tests[f] += float64(pe & 0xff) // scoreRow marks the builder used
		others := pre[g] & suf[g]
		n := int(gr.ncuts)
		wb, kb := int(gr.words), (g0+g)*64
		db, mb := int(gr.diff), int(gr.mark)
		// one step per distinct leaf, left to right: each adds the change
		// from the leaf before to every class from its interval's start
		leaf := bits.TrailingZeros64(others) // interval 0's word is all ones: no node sends it right
		d := values[leaf] - own
		diffAll[db] += d
		markAll[mb] |= 1
		for {
			k := int(allKill[kb+leaf&63])
			if k > n {
				break
			}
			leaf = bits.TrailingZeros64(others & allWords[wb+k])
			next := values[leaf] - own
			bin := int(allStarts[wb+k])
			diffAll[db+bin*stride] += next - d
			markAll[mb+bin>>6] |= 1 << (bin & 63)
			d = next
		}
		missing[gr.miss] += values[bits.TrailingZeros64(others&allWords[wb+n+1])] - own
	}
}

// scoreMaskQueries is scoreMaskTree for the shuffled metrics (one output
// class): a step adds its change at the asked classes from its start on
// (rowState.qacc, at the number of asked classes below the start: a count
// of bits, rowState.qmark and .qrank) rather than over all classes, so
// nothing is left to sum over the classes afterwards.
func (mf *maskForest) scoreMaskQueries(sc *maskScratch, rs *rowState, m *maskTree) {
	own, p0, p1 := mf.exitLeaf(sc, rs, m)
	if p0 == p1 {
		return
	}
	// the arrays in locals: the stores below could alias them otherwise,
	// and the compiler would reload every header each iteration
	groups := mf.groups[m.groups0:m.groups1]
	allWords := mf.words
	ng := len(groups)
	pre, suf := sc.pre[:ng], sc.suf[:ng]
	values := mf.leafValue[m.leaves0:]
	allStarts, allKill := mf.starts, mf.kill
	g0 := int(m.groups0)
	tests, qmark, qrank, qacc := rs.tests, rs.qmark, rs.qrank, rs.qacc
	qw := rs.qw
	// the arrays are indexed at offsets rather than sliced per group:
	// making five slices a group cost more than the work they frame
	for _, pe := range mf.paths[p0:p1] {
		g := int(pe >> 8)
		gr := &groups[g]
		f := gr.feat
		tests[f] += float64(pe & 0xff)
		others := pre[g] & suf[g]
		n := int(gr.ncuts)
		wb, kb := int(gr.words), (g0+g)*64
		ab, mb := int(f)*qw, int(gr.mark)
		// one step per distinct leaf, left to right: each adds the change
		// from the leaf before to every class from its interval's start
		leaf := bits.TrailingZeros64(others) // interval 0's word is all ones: no node sends it right
		d := values[leaf] - own
		qacc[ab] += d
		for {
			k := int(allKill[kb+leaf&63])
			if k > n {
				break
			}
			leaf = bits.TrailingZeros64(others & allWords[wb+k])
			next := values[leaf] - own
			bin := int(allStarts[wb+k])
			wi := mb + bin>>6
			qacc[ab+int(qrank[wi])+bits.OnesCount64(qmark[wi]&(1<<(bin&63)-1))] += next - d
			d = next
		}
		qacc[ab+qw-1] += values[bits.TrailingZeros64(others&allWords[wb+n+1])] - own
	}
}

// exitLeaf runs one row through mask tree m: it adds the exit leaf's value
// to the row's margin and returns that value and the range of the leaf's
// path groups in paths, and leaves in sc, for every group g, the AND of the
// words of the groups before it (pre[g]) and after it (suf[g]). Not
// inlined: its loops keep every value in a register, where inlined into
// the expansion they spilled to the stack.
//
//go:noinline
func (mf *maskForest) exitLeaf(sc *maskScratch, rs *rowState, m *maskTree) (own float64, p0, p1 int32) {
	refs, words, wordIdx := mf.refs[m.groups0:m.groups1], mf.words, rs.wordIdx
	pre, suf := sc.pre[:len(refs)], sc.suf[:len(refs)]
	acc := ^uint64(0)
	for g, ref := range refs {
		word := words[int(ref.words)+int(wordIdx[ref.col])]
		pre[g] = acc
		suf[g] = word
		acc &= word
	}
	after := ^uint64(0)
	for g := len(suf) - 1; g >= 0; g-- {
		word := suf[g]
		suf[g] = after
		after &= word
	}
	leaf := int(m.leaves0) + bits.TrailingZeros64(acc)
	own = mf.leafValue[leaf]
	rs.margin[m.class] += own
	return own, mf.leafPath[leaf], mf.leafPath[leaf+1]
}
