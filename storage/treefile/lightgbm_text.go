package treefile

// LightGBM text model, as written by Booster.save_model (model versions v2,
// v3 and v4). The file is a header of key=value lines, one "Tree=N" block of
// key=value lines per tree, the line "end of trees", then feature
// importances, parameters and pandas_categorical, which this reader ignores.
//
// Facts this reader relies on (LightGBM's include/LightGBM/tree.h and
// src/io/tree.cpp, src/boosting/gbdt_model_text.cpp):
//   - A tree with L leaves has L-1 internal nodes numbered 0..L-2, node 0 is
//     the root; left_child/right_child hold an internal node index (>= 0) or
//     the bitwise complement ~leaf of a leaf index (< 0).
//   - decision_type bit 0 marks a categorical split, bit 1 default-left, bits
//     2-3 the missing type (0 none, 1 zero, 2 NaN).
//   - A numeric split goes left when x <= threshold in float64, after NaN is
//     replaced by 0 unless the missing type is NaN; missing type zero sends
//     |x| <= kZeroThreshold (and so NaN) to the default child, missing type
//     NaN sends NaN to the default child.
//   - A categorical split's threshold is an index i into cat_boundaries; the
//     bitset words are cat_threshold[cat_boundaries[i]:cat_boundaries[i+1]].
//     A category in the set goes left; NaN and negative values go right;
//     the missing type and the default-left bit play no part.
//   - leaf_value already includes the learning rate (shrinkage) and the
//     initial score LightGBM folds into the first trees.

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"splitledger/importance/forest"
)

// LightGBM decision_type bits (tree.h: kCategoricalMask, kDefaultLeftMask,
// GetMissingType).
const (
	lgbCategoricalBit = 1
	lgbDefaultLeftBit = 2
	lgbMissingShift   = 2
	lgbMissingNone    = 0
	lgbMissingZero    = 1
	lgbMissingNaN     = 2
)

// lgbKey enumerates the per-tree keys the reader uses; other keys
// (leaf_weight, internal_weight, shrinkage, ...) are skipped.
type lgbKey int

const (
	lgbNumLeaves lgbKey = iota
	lgbNumCat
	lgbSplitFeature
	lgbSplitGain
	lgbThreshold
	lgbDecisionType
	lgbLeftChild
	lgbRightChild
	lgbLeafValue
	lgbLeafCount
	lgbInternalValue
	lgbInternalCount
	lgbCatBoundaries
	lgbCatThreshold
	lgbIsLinear
	lgbNumKeys
)

// lgbKeyNames spells each lgbKey as it appears in the file.
var lgbKeyNames = [lgbNumKeys]string{
	lgbNumLeaves:     "num_leaves",
	lgbNumCat:        "num_cat",
	lgbSplitFeature:  "split_feature",
	lgbSplitGain:     "split_gain",
	lgbThreshold:     "threshold",
	lgbDecisionType:  "decision_type",
	lgbLeftChild:     "left_child",
	lgbRightChild:    "right_child",
	lgbLeafValue:     "leaf_value",
	lgbLeafCount:     "leaf_count",
	lgbInternalValue: "internal_value",
	lgbInternalCount: "internal_count",
	lgbCatBoundaries: "cat_boundaries",
	lgbCatThreshold:  "cat_threshold",
	lgbIsLinear:      "is_linear",
}

// lgbKeyOf maps a tree line's key to its lgbKey; ok is false for keys the
// reader skips.
func lgbKeyOf(key string) (k lgbKey, ok bool) {
	for i, nm := range lgbKeyNames {
		if nm == key {
			return lgbKey(i), true
		}
	}
	return 0, false
}

// lgbField is the value of one key=value line of a tree block.
type lgbField struct {
	val  string
	line int
	set  bool
}

// lgbBlock is the raw text of one "Tree=N" block.
type lgbBlock struct {
	line   int // line of "Tree=N"
	fields [lgbNumKeys]lgbField
}

// lgbHeader holds the header fields the reader uses.
type lgbHeader struct {
	numClass         int
	numTreePerIter   int
	maxFeatureIdx    int
	objective        string
	objectiveLine    int
	hasObjective     bool
	averageOutput    bool
	featureNames     []string
	featureInfos     []string
	treeSizes        int // number of entries of tree_sizes, -1 when absent
	treeSizesLine    int
	featureNamesLine int
}

// lgbLines walks the lines of a text file, counting from 1 and dropping the
// line break (\n or \r\n).
type lgbLines struct {
	text string
	pos  int
	no   int
}

// next returns the next line and its number; ok is false at the end.
func (l *lgbLines) next() (line string, no int, ok bool) {
	if l.pos >= len(l.text) {
		return "", l.no, false
	}
	rest := l.text[l.pos:]
	i := strings.IndexByte(rest, '\n')
	if i < 0 {
		line = rest
		l.pos = len(l.text)
	} else {
		line = rest[:i]
		l.pos += i + 1
	}
	l.no++
	return strings.TrimSuffix(line, "\r"), l.no, true
}

// lgbReader parses one LightGBM text model.
type lgbReader struct {
	name  string
	lines lgbLines
	// pending is a line read ahead and not yet consumed.
	pending     string
	pendingNo   int
	havePending bool
}

// next returns the pending line if any, else the next line of the file.
func (r *lgbReader) next() (string, int, bool) {
	if r.havePending {
		r.havePending = false
		return r.pending, r.pendingNo, true
	}
	return r.lines.next()
}

// unread makes line the next one next returns.
func (r *lgbReader) unread(line string, no int) {
	r.pending, r.pendingNo, r.havePending = line, no, true
}

// lineErr reports a problem at a line outside any tree.
func (r *lgbReader) lineErr(line int, format string, args ...any) *Error {
	return fileErr(r.name, line, fmt.Errorf(format, args...))
}

// treeErr reports a problem in tree ti (node -1: the whole tree) at a line.
func (r *lgbReader) treeErr(ti, node, line int, format string, args ...any) *Error {
	return &Error{File: r.name, Tree: ti, Node: node, Line: line, Err: fmt.Errorf(format, args...)}
}

// readLightGBMText parses a LightGBM text model (Booster.save_model) into
// a validated, indexed ensemble.
//
// Layout: tree t keeps LightGBM's internal nodes at indexes 0..L-2 (the
// root is 0) and puts leaf l at index L-1+l, so LightGBM's leaf index of a
// row (pred_leaf) is the reached node index minus L-1. A one-leaf tree is a
// single leaf node. Value holds leaf_value on leaves and internal_value on
// internal nodes (0 when the file has none); Gain holds split_gain (0 on
// leaves); Cover holds the training row counts internal_count and leaf_count.
// Gain or Cover is nil for a tree whose file block lacks those arrays.
//
// Split semantics (forest.Next with forest.LessEqualFloat64): missing type
// none sets FlagNaNAsZero and drops the meaningless default-left bit;
// missing type zero sets FlagNaNAsZero|FlagZeroIsMissing and keeps the
// default-left bit; missing type NaN keeps the default-left bit so NaN takes
// the default child. Categorical splits set FlagCategorical|FlagInSetLeft and
// never default left, so NaN goes right as in LightGBM; tree.CatSets[i] is
// the i-th bitset of the tree and the node's CatSet is the threshold index.
//
// Objective (Task, Link): binary and cross_entropy give TaskBinary with the
// logistic link; the margins stay LightGBM's raw scores even when the
// objective carries sigmoid:s with s != 1, where LightGBM's probability is
// 1/(1+exp(-s*m)) and Ensemble.Transform (which uses s = 1) differs from it.
// multiclass gives TaskMulticlass with softmax; multiclassova gives
// TaskMulticlass with the logistic link applied to each class margin (same
// sigmoid caveat). regression, regression_l1, huber, fair, quantile and mape
// give TaskRegression with identity; poisson, gamma and tweedie give
// TaskRegression with exp; lambdarank and rank_xendcg give TaskRanking with
// identity. A file without objective (custom objective) or with "custom"
// gives identity with TaskRegression (TaskMulticlass when the model has
// several outputs). The sqrt option of regression objectives and
// cross_entropy_lambda have no forest link and are rejected with
// ErrUnsupported.
//
// Trees belong to class t % num_tree_per_iteration; BaseMargin is zero
// because LightGBM folds the initial score into the trees. A random-forest
// model (average_output) has every Value divided by the number of
// iterations, so the sum over trees equals LightGBM's averaged raw score,
// to which current LightGBM applies the link. LightGBM releases before its
// pull request #1906 (December 2018) stored random-forest leaves after the
// output transform and returned the plain average; such files look the same
// and their Transform output is wrong (their margins are right).
// Linear trees (is_linear=1) are rejected with ErrUnsupported.
//
// Feature names come from feature_names. opts.FeatureNames, when given,
// must equal them, except that LightGBM's automatic names Column_0,
// Column_1, ... are replaced by opts.FeatureNames of the same length;
// otherwise the error wraps ErrFeatureNames. Categorical marks the features
// whose feature_infos entry is a category list or that a categorical split
// tests; it is nil when there are none.
func readLightGBMText(data []byte, name string, opts Options) (*forest.Ensemble, error) {
	text := strings.TrimPrefix(string(data), "\ufeff") // byte order mark
	r := &lgbReader{name: name, lines: lgbLines{text: text}}
	h, err := r.header()
	if err != nil {
		return nil, err
	}
	blocks, err := r.treeBlocks()
	if err != nil {
		return nil, err
	}
	if len(blocks) == 0 {
		return nil, r.lineErr(0, "no Tree= blocks")
	}
	if h.treeSizes >= 0 && h.treeSizes != len(blocks) {
		return nil, r.lineErr(h.treeSizesLine, "tree_sizes lists %d trees, the file has %d (truncated or edited file)", h.treeSizes, len(blocks))
	}
	if len(blocks)%h.numTreePerIter != 0 {
		return nil, r.lineErr(0, "%d trees is not a multiple of num_tree_per_iteration=%d", len(blocks), h.numTreePerIter)
	}
	names, err := r.featureNames(h, opts.FeatureNames)
	if err != nil {
		return nil, err
	}
	task, link, err := r.objective(h)
	if err != nil {
		return nil, err
	}
	e := &forest.Ensemble{
		Format:       string(FormatLightGBMText),
		Objective:    h.objective,
		Task:         task,
		Link:         link,
		Rule:         forest.LessEqualFloat64,
		NumClass:     h.numTreePerIter,
		BaseMargin:   make([]float64, h.numTreePerIter),
		FeatureNames: names,
		Trees:        make([]forest.Tree, len(blocks)),
	}
	categorical := make([]bool, len(names))
	anyCategorical := false
	for j, info := range h.featureInfos {
		if lgbCategoricalInfo(info) {
			categorical[j] = true
			anyCategorical = true
		}
	}
	lines := make([][]int, len(blocks))
	for ti := range blocks {
		b := &blocks[ti]
		if err := r.buildTree(&e.Trees[ti], b, ti, h, categorical, &anyCategorical); err != nil {
			return nil, err
		}
		e.Trees[ti].Class = ti % h.numTreePerIter
		ln := make([]int, len(e.Trees[ti].Nodes))
		for i := range ln {
			ln[i] = b.line
		}
		lines[ti] = ln
	}
	if anyCategorical {
		e.Categorical = categorical
	}
	if h.averageOutput {
		// LightGBM's random forest divides the summed raw score by the
		// number of iterations (GBDT::PredictRaw with average_output).
		iters := float64(len(blocks) / h.numTreePerIter)
		for ti := range e.Trees {
			v := e.Trees[ti].Value
			for i := range v {
				v[i] /= iters
			}
		}
	}
	return finish(e, name, opts, lines)
}

// header reads the key=value lines before the first tree.
func (r *lgbReader) header() (*lgbHeader, error) {
	h := &lgbHeader{treeSizes: -1, maxFeatureIdx: -1}
	seen := map[string]int{}
	first := true
	var numClassLine, ntpiLine, maxFeatLine, infosLine int
	var numClassStr, ntpiStr, maxFeatStr, infosStr, namesStr string
	haveNTPI, haveInfos := false, false
	for {
		line, no, ok := r.next()
		if !ok {
			break
		}
		if strings.HasPrefix(line, "Tree=") || line == "end of trees" {
			r.unread(line, no)
			break
		}
		if strings.TrimSpace(line) == "" {
			continue
		}
		if first {
			first = false
			if strings.TrimRight(line, " \t") != "tree" {
				return nil, r.lineErr(no, "%w: first line %q, a LightGBM text model starts with \"tree\"", ErrUnknownFormat, lgbShort(line))
			}
			continue
		}
		key, val, hasEq := strings.Cut(line, "=")
		if prev, dup := seen[key]; dup {
			return nil, r.lineErr(no, "header key %q repeated (first on line %d)", lgbShort(key), prev)
		}
		seen[key] = no
		if !hasEq {
			if key == "average_output" {
				h.averageOutput = true
			}
			continue // other bare words carry nothing this reader uses
		}
		switch key {
		case "version":
			switch val {
			case "v2", "v3", "v4":
			default:
				return nil, r.lineErr(no, "%w: LightGBM model version %q (this reader knows v2, v3, v4)", ErrUnsupported, lgbShort(val))
			}
		case "num_class":
			numClassStr, numClassLine = val, no
		case "num_tree_per_iteration":
			ntpiStr, ntpiLine, haveNTPI = val, no, true
		case "max_feature_idx":
			maxFeatStr, maxFeatLine = val, no
		case "objective":
			h.objective, h.objectiveLine, h.hasObjective = val, no, true
		case "feature_names":
			namesStr, h.featureNamesLine = val, no
		case "feature_infos":
			infosStr, infosLine, haveInfos = val, no, true
		case "tree_sizes":
			h.treeSizes, h.treeSizesLine = len(strings.Fields(val)), no
		}
	}
	if first {
		return nil, r.lineErr(0, "%w: empty file", ErrUnknownFormat)
	}
	var err error
	if _, ok := seen["num_class"]; !ok {
		return nil, r.lineErr(0, "header has no num_class")
	}
	if h.numClass, err = strconv.Atoi(numClassStr); err != nil || h.numClass < 1 {
		return nil, r.lineErr(numClassLine, "num_class %q: want an integer >= 1", lgbShort(numClassStr))
	}
	h.numTreePerIter = h.numClass
	if haveNTPI {
		if h.numTreePerIter, err = strconv.Atoi(ntpiStr); err != nil || h.numTreePerIter < 1 {
			return nil, r.lineErr(ntpiLine, "num_tree_per_iteration %q: want an integer >= 1", lgbShort(ntpiStr))
		}
		if h.numTreePerIter != h.numClass {
			return nil, r.lineErr(ntpiLine, "%w: num_tree_per_iteration=%d differs from num_class=%d", ErrUnsupported, h.numTreePerIter, h.numClass)
		}
	}
	if _, ok := seen["max_feature_idx"]; !ok {
		return nil, r.lineErr(0, "header has no max_feature_idx")
	}
	if h.maxFeatureIdx, err = strconv.Atoi(maxFeatStr); err != nil || h.maxFeatureIdx < 0 {
		return nil, r.lineErr(maxFeatLine, "max_feature_idx %q: want an integer >= 0", lgbShort(maxFeatStr))
	}
	if h.featureNamesLine == 0 {
		return nil, r.lineErr(0, "header has no feature_names")
	}
	h.featureNames = strings.Fields(namesStr)
	if len(h.featureNames) != h.maxFeatureIdx+1 {
		return nil, r.lineErr(h.featureNamesLine, "feature_names has %d names, max_feature_idx=%d wants %d", len(h.featureNames), h.maxFeatureIdx, h.maxFeatureIdx+1)
	}
	if haveInfos {
		h.featureInfos = strings.Fields(infosStr)
		if len(h.featureInfos) != h.maxFeatureIdx+1 {
			return nil, r.lineErr(infosLine, "feature_infos has %d entries, max_feature_idx=%d wants %d", len(h.featureInfos), h.maxFeatureIdx, h.maxFeatureIdx+1)
		}
	}
	return h, nil
}

// treeBlocks reads every "Tree=N" block up to the "end of trees" line.
func (r *lgbReader) treeBlocks() ([]lgbBlock, error) {
	var blocks []lgbBlock
	for {
		line, no, ok := r.next()
		if !ok {
			return nil, r.lineErr(no, "no \"end of trees\" line after %d trees (truncated file?)", len(blocks))
		}
		switch {
		case line == "end of trees":
			return blocks, nil
		case strings.TrimSpace(line) == "":
			continue
		case strings.HasPrefix(line, "Tree="):
			id, err := strconv.Atoi(line[len("Tree="):])
			if err != nil || id != len(blocks) {
				return nil, r.lineErr(no, "tree header %q, want \"Tree=%d\"", lgbShort(line), len(blocks))
			}
			blocks = append(blocks, lgbBlock{line: no})
			if err := r.treeFields(&blocks[len(blocks)-1], len(blocks)-1); err != nil {
				return nil, err
			}
		default:
			return nil, r.lineErr(no, "unexpected line %q between trees", lgbShort(line))
		}
	}
}

// treeFields reads the key=value lines of tree ti into b, up to a blank
// line, the next tree or the end of the trees.
func (r *lgbReader) treeFields(b *lgbBlock, ti int) error {
	for {
		line, no, ok := r.next()
		if !ok {
			return nil
		}
		if strings.TrimSpace(line) == "" {
			return nil
		}
		if strings.HasPrefix(line, "Tree=") || line == "end of trees" {
			r.unread(line, no)
			return nil
		}
		key, val, hasEq := strings.Cut(line, "=")
		if !hasEq {
			return r.treeErr(ti, -1, no, "line %q is not key=value", lgbShort(line))
		}
		k, known := lgbKeyOf(key)
		if !known {
			continue
		}
		f := &b.fields[k]
		if f.set {
			return r.treeErr(ti, -1, no, "%s repeated (first on line %d)", key, f.line)
		}
		*f = lgbField{val: val, line: no, set: true}
	}
}

// buildTree turns block b into tree t. categorical is updated for features
// tested by categorical splits.
func (r *lgbReader) buildTree(t *forest.Tree, b *lgbBlock, ti int, h *lgbHeader, categorical []bool, anyCategorical *bool) error {
	f := &b.fields
	numLeaves, err := r.scalarInt(ti, b, lgbNumLeaves, 1)
	if err != nil {
		return err
	}
	numCat, err := r.scalarInt(ti, b, lgbNumCat, 0)
	if err != nil {
		return err
	}
	if fl := f[lgbIsLinear]; fl.set && strings.TrimSpace(fl.val) != "0" {
		return r.treeErr(ti, -1, fl.line, "%w: linear tree (is_linear=%s)", ErrUnsupported, lgbShort(fl.val))
	}
	nIn := numLeaves - 1
	leafValue, err := r.floats(ti, b, lgbLeafValue, numLeaves, nIn, true, true)
	if err != nil {
		return err
	}
	// Arrays over internal nodes: required ones must be present unless the
	// tree is a single leaf.
	left, err := r.ints(ti, b, lgbLeftChild, nIn, 0, nIn > 0)
	if err != nil {
		return err
	}
	right, err := r.ints(ti, b, lgbRightChild, nIn, 0, nIn > 0)
	if err != nil {
		return err
	}
	feature, err := r.ints(ti, b, lgbSplitFeature, nIn, 0, nIn > 0)
	if err != nil {
		return err
	}
	threshold, err := r.floats(ti, b, lgbThreshold, nIn, 0, nIn > 0, false)
	if err != nil {
		return err
	}
	decision, err := r.ints(ti, b, lgbDecisionType, nIn, 0, false)
	if err != nil {
		return err
	}
	gain, err := r.floats(ti, b, lgbSplitGain, nIn, 0, false, true)
	if err != nil {
		return err
	}
	internalValue, err := r.floats(ti, b, lgbInternalValue, nIn, 0, false, true)
	if err != nil {
		return err
	}
	internalCount, err := r.ints(ti, b, lgbInternalCount, nIn, 0, false)
	if err != nil {
		return err
	}
	leafCount, err := r.ints(ti, b, lgbLeafCount, numLeaves, nIn, false)
	if err != nil {
		return err
	}
	var boundaries, words []int64
	if numCat > 0 {
		if boundaries, err = r.ints(ti, b, lgbCatBoundaries, numCat+1, -1, true); err != nil {
			return err
		}
		line := f[lgbCatBoundaries].line
		if boundaries[0] != 0 {
			return r.treeErr(ti, -1, line, "cat_boundaries starts at %d, want 0", boundaries[0])
		}
		for i := 1; i < len(boundaries); i++ {
			if boundaries[i] < boundaries[i-1] {
				return r.treeErr(ti, -1, line, "cat_boundaries decreases at entry %d (%d after %d)", i, boundaries[i], boundaries[i-1])
			}
		}
		last := boundaries[numCat]
		if last > int64(len(f[lgbCatThreshold].val)) { // each word takes at least one byte
			return r.treeErr(ti, -1, line, "cat_boundaries ends at %d, more words than cat_threshold can hold", last)
		}
		if words, err = r.ints(ti, b, lgbCatThreshold, int(last), -1, true); err != nil {
			return err
		}
		for i, w := range words {
			if w < 0 || w > math.MaxUint32 {
				return r.treeErr(ti, -1, f[lgbCatThreshold].line, "cat_threshold word %d is %d, not a 32-bit unsigned integer", i, w)
			}
		}
	}

	n := nIn + numLeaves
	t.Nodes = make([]forest.Node, n)
	t.Value = make([]float64, n)
	if gain != nil || nIn == 0 {
		t.Gain = make([]float64, n)
		copy(t.Gain, gain)
	}
	if leafCount != nil && (internalCount != nil || nIn == 0) {
		t.Cover = make([]float64, n)
		for i, c := range internalCount {
			if c < 0 {
				return r.treeErr(ti, i, f[lgbInternalCount].line, "internal_count %d is negative", c)
			}
			t.Cover[i] = float64(c)
		}
		for l, c := range leafCount {
			if c < 0 {
				return r.treeErr(ti, nIn+l, f[lgbLeafCount].line, "leaf_count %d is negative", c)
			}
			t.Cover[nIn+l] = float64(c)
		}
	}
	copy(t.Value, internalValue)
	for l, v := range leafValue {
		t.Nodes[nIn+l] = forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
		t.Value[nIn+l] = v
	}
	if numCat > 0 {
		t.CatSets = make([][]uint32, numCat)
		for i := range numCat {
			set := make([]uint32, boundaries[i+1]-boundaries[i])
			for j := range set {
				set[j] = uint32(words[boundaries[i]+int64(j)])
			}
			t.CatSets[i] = set
		}
	}

	// Children: every node but the root must be referenced exactly once.
	referenced := make([]bool, n)
	child := func(node int, c int64, side string, line int) (int32, error) {
		var idx int64
		if c >= 0 {
			if c == 0 || c >= int64(nIn) {
				return 0, r.treeErr(ti, node, line, "%s child %d is the root or past the last internal node %d", side, c, nIn-1)
			}
			idx = c
		} else {
			leaf := ^c
			if leaf >= int64(numLeaves) {
				return 0, r.treeErr(ti, node, line, "%s child %d is leaf %d, out of range (tree has %d leaves)", side, c, leaf, numLeaves)
			}
			idx = int64(nIn) + leaf
		}
		if referenced[idx] {
			return 0, r.treeErr(ti, node, line, "%s child %d has two parents", side, c)
		}
		referenced[idx] = true
		return int32(idx), nil
	}
	for i := range nIn {
		nd := forest.Node{CatSet: -1}
		if nd.Left, err = child(i, left[i], "left", f[lgbLeftChild].line); err != nil {
			return err
		}
		if nd.Right, err = child(i, right[i], "right", f[lgbRightChild].line); err != nil {
			return err
		}
		fi := feature[i]
		if fi < 0 || fi > int64(h.maxFeatureIdx) {
			return r.treeErr(ti, i, f[lgbSplitFeature].line, "split_feature %d out of range [0, %d] (max_feature_idx)", fi, h.maxFeatureIdx)
		}
		nd.Feature = int32(fi)
		var dt int64
		if decision != nil {
			dt = decision[i]
		}
		if dt < 0 || dt > 15 {
			return r.treeErr(ti, i, f[lgbDecisionType].line, "decision_type %d has unknown bits", dt)
		}
		missing := (dt >> lgbMissingShift) & 3
		th := threshold[i]
		if dt&lgbCategoricalBit != 0 {
			ci := int64(th)
			if th != float64(ci) || ci < 0 || ci >= int64(numCat) {
				return r.treeErr(ti, i, f[lgbThreshold].line, "categorical split threshold %v is not a category-set index in [0, %d) (num_cat)", th, numCat)
			}
			nd.CatSet = int32(ci)
			nd.Flags = forest.FlagCategorical | forest.FlagInSetLeft
			categorical[fi] = true
			*anyCategorical = true
		} else {
			if math.IsNaN(th) || math.IsInf(th, 0) {
				return r.treeErr(ti, i, f[lgbThreshold].line, "threshold %v is not finite", th)
			}
			nd.Threshold = th
			switch missing {
			case lgbMissingNone:
				nd.Flags = forest.FlagNaNAsZero
			case lgbMissingZero:
				nd.Flags = forest.FlagNaNAsZero | forest.FlagZeroIsMissing
			case lgbMissingNaN:
			default:
				return r.treeErr(ti, i, f[lgbDecisionType].line, "decision_type %d has unknown missing type %d", dt, missing)
			}
			if missing != lgbMissingNone && dt&lgbDefaultLeftBit != 0 {
				nd.Flags |= forest.FlagDefaultLeft
			}
		}
		t.Nodes[i] = nd
	}
	// With every non-root node referenced once, a node unreachable from the
	// root means a cycle away from it.
	if nIn > 0 {
		stack := []int32{0}
		reached := 0
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			reached++
			if nd := &t.Nodes[i]; !nd.IsLeaf() {
				stack = append(stack, nd.Left, nd.Right)
			}
		}
		if reached != n {
			return r.treeErr(ti, -1, f[lgbLeftChild].line, "only %d of %d nodes reachable from the root (cycle)", reached, n)
		}
	}
	return nil
}

// scalarInt parses the required integer key k of tree ti, at least min.
func (r *lgbReader) scalarInt(ti int, b *lgbBlock, k lgbKey, min int) (int, error) {
	f := b.fields[k]
	if !f.set {
		return 0, r.treeErr(ti, -1, b.line, "no %s", lgbKeyNames[k])
	}
	v, err := strconv.Atoi(strings.TrimSpace(f.val))
	if err != nil || v < min {
		return 0, r.treeErr(ti, -1, f.line, "%s %q: want an integer >= %d", lgbKeyNames[k], lgbShort(f.val), min)
	}
	return v, nil
}

// lgbCount counts the space-separated tokens of s.
func lgbCount(s string) int {
	n := 0
	in := false
	for i := 0; i < len(s); i++ {
		if s[i] == ' ' || s[i] == '\t' {
			in = false
		} else if !in {
			in = true
			n++
		}
	}
	return n
}

// lgbToken returns the first space-separated token of s at or after byte
// i and the byte after it; tok is "" when none is left.
func lgbToken(s string, i int) (tok string, next int) {
	for i < len(s) && (s[i] == ' ' || s[i] == '\t') {
		i++
	}
	j := i
	for j < len(s) && s[j] != ' ' && s[j] != '\t' {
		j++
	}
	return s[i:j], j
}

// checkCount verifies that key k of tree ti has want values. An absent
// key, or an empty one when it is optional, yields present == false; a
// required key must be present unless want is 0.
func (r *lgbReader) checkCount(ti int, b *lgbBlock, k lgbKey, want int, required bool) (present bool, err error) {
	f := b.fields[k]
	if !f.set {
		if required && want > 0 {
			return false, r.treeErr(ti, -1, b.line, "no %s", lgbKeyNames[k])
		}
		return false, nil
	}
	got := lgbCount(f.val)
	if got == 0 && (!required || want == 0) {
		return false, nil
	}
	if got != want {
		return false, r.treeErr(ti, -1, f.line, "%s has %d values, want %d", lgbKeyNames[k], got, want)
	}
	return true, nil
}

// ints parses key k of tree ti as want integers; nil when absent and not
// required. nodeBase is added to a value's position to name its node in
// errors (-1: values are not per node).
func (r *lgbReader) ints(ti int, b *lgbBlock, k lgbKey, want, nodeBase int, required bool) ([]int64, error) {
	present, err := r.checkCount(ti, b, k, want, required)
	if err != nil || !present {
		return nil, err
	}
	f := b.fields[k]
	out := make([]int64, want)
	pos := 0
	for i := range out {
		var tok string
		tok, pos = lgbToken(f.val, pos)
		v, err := strconv.ParseInt(tok, 10, 64)
		if err != nil || v < math.MinInt32 || v > math.MaxUint32 {
			return nil, r.treeErr(ti, lgbNode(nodeBase, i), f.line, "%s value %d %q is not a 32-bit integer", lgbKeyNames[k], i, lgbShort(tok))
		}
		out[i] = v
	}
	return out, nil
}

// floats parses key k of tree ti as want numbers; nil when absent and not
// required. finite rejects NaN and infinities.
func (r *lgbReader) floats(ti int, b *lgbBlock, k lgbKey, want, nodeBase int, required, finite bool) ([]float64, error) {
	present, err := r.checkCount(ti, b, k, want, required)
	if err != nil || !present {
		return nil, err
	}
	f := b.fields[k]
	out := make([]float64, want)
	pos := 0
	for i := range out {
		var tok string
		tok, pos = lgbToken(f.val, pos)
		v, err := strconv.ParseFloat(tok, 64)
		if err != nil && !errors.Is(err, strconv.ErrRange) {
			return nil, r.treeErr(ti, lgbNode(nodeBase, i), f.line, "%s value %d %q is not a number", lgbKeyNames[k], i, lgbShort(tok))
		}
		if finite && (math.IsNaN(v) || math.IsInf(v, 0)) {
			return nil, r.treeErr(ti, lgbNode(nodeBase, i), f.line, "%s value %d is %v, want a finite number", lgbKeyNames[k], i, v)
		}
		out[i] = v
	}
	return out, nil
}

// lgbNode is the node index of value i of an array whose first value
// belongs to node base (-1: not per node).
func lgbNode(base, i int) int {
	if base < 0 {
		return -1
	}
	return base + i
}

// featureNames returns the ensemble's feature names: the file's, or the
// caller's when the file only has LightGBM's automatic Column_i names.
func (r *lgbReader) featureNames(h *lgbHeader, given []string) ([]string, error) {
	file := h.featureNames
	if len(given) == 0 {
		return append([]string(nil), file...), nil
	}
	if len(given) != len(file) {
		return nil, r.lineErr(h.featureNamesLine, "%w: %d names given, the model declares %d features", ErrFeatureNames, len(given), len(file))
	}
	auto := true
	for j, nm := range file {
		if nm != "Column_"+strconv.Itoa(j) {
			auto = false
			break
		}
	}
	if auto {
		return append([]string(nil), given...), nil
	}
	for j := range file {
		if file[j] != given[j] {
			return nil, r.lineErr(h.featureNamesLine, "%w: feature %d is %q in the model, %q given", ErrFeatureNames, j, file[j], given[j])
		}
	}
	return append([]string(nil), file...), nil
}

// lgbCategoricalInfo reports whether a feature_infos entry describes a
// categorical feature: numeric features read "[min:max]", unused ones
// "none", categorical ones list their categories as "c1:c2:...".
func lgbCategoricalInfo(info string) bool {
	return info != "none" && !strings.HasPrefix(info, "[")
}

// objective maps the header's objective to the forest task and link.
func (r *lgbReader) objective(h *lgbHeader) (forest.Task, forest.Link, error) {
	line := h.objectiveLine
	fields := strings.Fields(h.objective)
	multi := h.numTreePerIter > 1
	if !h.hasObjective || len(fields) == 0 || fields[0] == "custom" {
		if multi {
			return forest.TaskMulticlass, forest.LinkIdentity, nil
		}
		return forest.TaskRegression, forest.LinkIdentity, nil
	}
	name, params := fields[0], fields[1:]
	param := func(key string) (string, bool) {
		for _, p := range params {
			if k, v, ok := strings.Cut(p, ":"); ok && k == key {
				return v, true
			}
		}
		return "", false
	}
	for _, p := range params {
		if p == "sqrt" {
			return 0, 0, r.lineErr(line, "%w: objective %q: the sqrt output transform has no forest link", ErrUnsupported, lgbShort(h.objective))
		}
	}
	single := func(task forest.Task, link forest.Link) (forest.Task, forest.Link, error) {
		if multi {
			return 0, 0, r.lineErr(line, "objective %q with num_tree_per_iteration=%d, want 1", lgbShort(h.objective), h.numTreePerIter)
		}
		return task, link, nil
	}
	checkSigmoid := func() error {
		v, ok := param("sigmoid")
		if !ok {
			return nil
		}
		s, err := strconv.ParseFloat(v, 64)
		if err != nil || !(s > 0) || math.IsInf(s, 0) {
			return r.lineErr(line, "objective %q: sigmoid %q, want a finite number > 0", lgbShort(h.objective), lgbShort(v))
		}
		return nil
	}
	checkClasses := func() error {
		v, ok := param("num_class")
		if !ok {
			return nil
		}
		k, err := strconv.Atoi(v)
		if err != nil || k != h.numClass {
			return r.lineErr(line, "objective %q: num_class %q disagrees with the header's num_class=%d", lgbShort(h.objective), lgbShort(v), h.numClass)
		}
		return nil
	}
	switch name {
	case "binary":
		if err := checkSigmoid(); err != nil {
			return 0, 0, err
		}
		return single(forest.TaskBinary, forest.LinkLogistic)
	case "cross_entropy", "xentropy":
		return single(forest.TaskBinary, forest.LinkLogistic)
	case "regression", "regression_l2", "regression_l1", "huber", "fair", "quantile", "mape":
		return single(forest.TaskRegression, forest.LinkIdentity)
	case "poisson", "gamma", "tweedie":
		return single(forest.TaskRegression, forest.LinkExp)
	case "lambdarank", "rank_xendcg":
		return single(forest.TaskRanking, forest.LinkIdentity)
	case "multiclass", "multiclassova":
		if err := checkClasses(); err != nil {
			return 0, 0, err
		}
		if h.numClass < 2 {
			return 0, 0, r.lineErr(line, "objective %q with num_class=%d, want at least 2", lgbShort(h.objective), h.numClass)
		}
		if name == "multiclass" {
			return forest.TaskMulticlass, forest.LinkSoftmax, nil
		}
		if err := checkSigmoid(); err != nil {
			return 0, 0, err
		}
		return forest.TaskMulticlass, forest.LinkLogistic, nil
	case "cross_entropy_lambda", "xentlambda":
		return 0, 0, r.lineErr(line, "%w: objective %q: its output transform log(1+exp(m)) has no forest link", ErrUnsupported, lgbShort(h.objective))
	default:
		return 0, 0, r.lineErr(line, "%w: objective %q", ErrUnsupported, lgbShort(h.objective))
	}
}

// lgbShort truncates s for error messages.
func lgbShort(s string) string {
	const max = 60
	if len(s) <= max {
		return s
	}
	return s[:max] + "..."
}
