package treefile

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"splitledger/importance/forest"
)

// XGBoost JSON model (Booster.save_model to a .json file), as described by
// XGBoost's doc/model.schema and written by versions 1.6 to 2.x. Only the
// fields needed for scoring and the structural measures are read.

type xgbModel struct {
	Learner *xgbLearner `json:"learner"`
	Version jsonInts    `json:"version"`
}

type xgbLearner struct {
	FeatureNames      []string        `json:"feature_names"`
	FeatureTypes      []string        `json:"feature_types"`
	GradientBooster   *xgbBooster     `json:"gradient_booster"`
	LearnerModelParam xgbLearnerParam `json:"learner_model_param"`
	Objective         struct {
		Name looseString `json:"name"`
	} `json:"objective"`
}

type xgbLearnerParam struct {
	BaseScore  looseString `json:"base_score"`
	NumClass   looseString `json:"num_class"`
	NumFeature looseString `json:"num_feature"`
	NumTarget  looseString `json:"num_target"`
}

// xgbBooster is a gbtree booster, or a dart booster wrapping one.
type xgbBooster struct {
	Name       looseString   `json:"name"`
	Model      *xgbTreeModel `json:"model"`
	GBTree     *xgbBooster   `json:"gbtree"`
	WeightDrop jsonFloats    `json:"weight_drop"`
}

type xgbTreeModel struct {
	Param struct {
		NumTrees       looseString `json:"num_trees"`
		SizeLeafVector looseString `json:"size_leaf_vector"`
	} `json:"gbtree_model_param"`
	Trees    []xgbTree `json:"trees"`
	TreeInfo jsonInts  `json:"tree_info"`
}

type xgbTree struct {
	TreeParam struct {
		NumNodes       looseString `json:"num_nodes"`
		SizeLeafVector looseString `json:"size_leaf_vector"`
	} `json:"tree_param"`
	LossChanges        jsonFloats `json:"loss_changes"`
	SumHessian         jsonFloats `json:"sum_hessian"`
	SplitConditions    jsonFloats `json:"split_conditions"`
	LeftChildren       jsonInts   `json:"left_children"`
	RightChildren      jsonInts   `json:"right_children"`
	SplitIndices       jsonInts   `json:"split_indices"`
	SplitType          jsonInts   `json:"split_type"`
	DefaultLeft        jsonInts   `json:"default_left"`
	Categories         jsonInts   `json:"categories"`
	CategoriesNodes    jsonInts   `json:"categories_nodes"`
	CategoriesSegments jsonInts   `json:"categories_segments"`
	CategoriesSizes    jsonInts   `json:"categories_sizes"`
}

// maxCategory bounds category codes read from a model. XGBoost's category
// codes are small non-negative integers held exactly in float32 (below
// 2^24); the bound also caps the memory of one category bitset at 2 MiB.
const maxCategory = 1 << 24

// readXGBoostJSON builds an ensemble from an XGBoost JSON model.
//
// Semantics (XGBoost 1.7 predictor): a node with left child -1 is a leaf and
// its split_conditions entry is the leaf value (already scaled by the
// learning rate); numeric splits go left when float32(x) < threshold;
// missing values follow default_left; categorical splits (split_type 1)
// send the categories listed for the node right and every other value
// (unlisted, negative or beyond the largest listed code) left;
// tree i adds to output tree_info[i]. Leaf values and thresholds are rounded
// to float32 as XGBoost holds them. A dart booster scales each tree's leaves
// by its weight_drop entry (in float32, as XGBoost's dart predictor does).
// Internal nodes get Value 0 (their base_weights are not used for scoring),
// Gain = loss_changes (0 on leaves) and Cover = sum_hessian, both rounded to
// the float32 values XGBoost holds.
func readXGBoostJSON(data []byte, name string, opts Options) (*forest.Ensemble, error) {
	clean := quoteNonFinite(data)
	var m xgbModel
	if err := json.Unmarshal(clean, &m); err != nil {
		return nil, fileErr(name, jsonErrorLine(clean, err), fmt.Errorf("invalid XGBoost JSON model: %w", err))
	}
	if m.Learner == nil {
		return nil, fileErr(name, 0, fmt.Errorf("%w: no \"learner\" object", ErrUnknownFormat))
	}
	l := m.Learner
	if l.GradientBooster == nil {
		return nil, fileErr(name, 0, errors.New("no \"gradient_booster\" object"))
	}
	model, weightDrop, err := xgbTreesOf(l.GradientBooster)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}

	obj := string(l.Objective.Name)
	sem, err := xgbObjectiveOf(obj)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	p := l.LearnerModelParam
	numClass, err := paramInt(p.NumClass, "num_class", 0)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	numTarget, err := paramInt(p.NumTarget, "num_target", 1)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	outputs := max(numClass, 1)
	if numTarget > 1 {
		if numClass > 1 {
			return nil, fileErr(name, 0, fmt.Errorf("%w: num_class %d with num_target %d", ErrUnsupported, numClass, numTarget))
		}
		outputs = numTarget
	}
	if outputs > 1<<16 {
		return nil, fileErr(name, 0, fmt.Errorf("%d outputs per row is implausible", outputs))
	}
	numFeature, err := paramInt(p.NumFeature, "num_feature", 0)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	if numFeature > MaxFeatures || len(l.FeatureNames) > MaxFeatures {
		return nil, fileErr(name, 0, fmt.Errorf("%w: more than %d features", ErrUnsupported, MaxFeatures))
	}
	names, err := xgbFeatureNames(l.FeatureNames, numFeature, opts.FeatureNames)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	base, err := parseBaseScore(string(p.BaseScore), outputs, sem)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}

	if len(model.TreeInfo) != len(model.Trees) {
		return nil, fileErr(name, 0, fmt.Errorf("tree_info has %d entries for %d trees", len(model.TreeInfo), len(model.Trees)))
	}
	if weightDrop != nil && len(weightDrop) != len(model.Trees) {
		return nil, fileErr(name, 0, fmt.Errorf("dart weight_drop has %d entries for %d trees", len(weightDrop), len(model.Trees)))
	}
	if v, err := paramInt(model.Param.SizeLeafVector, "size_leaf_vector", 0); err != nil || v > 1 {
		if err == nil {
			err = fmt.Errorf("%w: vector leaves (size_leaf_vector %d, multi_strategy=multi_output_tree)", ErrUnsupported, v)
		}
		return nil, fileErr(name, 0, err)
	}

	e := &forest.Ensemble{
		Format:       string(FormatXGBoostJSON),
		Objective:    obj,
		Task:         sem.task,
		Link:         sem.link,
		Rule:         forest.LessThanFloat32,
		NumClass:     outputs,
		BaseMargin:   base,
		FeatureNames: names,
		Trees:        make([]forest.Tree, len(model.Trees)),
	}
	categorical := make([]bool, len(names))
	anyCategorical := false
	for j, ft := range l.FeatureTypes {
		if ft == "c" && j < len(categorical) {
			categorical[j] = true
			anyCategorical = true
		}
	}
	for ti := range model.Trees {
		cls := model.TreeInfo[ti]
		if cls < 0 || cls >= int64(outputs) {
			return nil, nodeErr(name, ti, -1, fmt.Errorf("tree_info class %d out of range [0, %d)", cls, outputs))
		}
		w := float32(1)
		if weightDrop != nil {
			w = float32(weightDrop[ti])
		}
		t, ni, err := xgbTreeOf(&model.Trees[ti], int(cls), w)
		if err != nil {
			return nil, nodeErr(name, ti, ni, err)
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.Flags&forest.FlagCategorical != 0 && n.Feature >= 0 && int(n.Feature) < len(categorical) {
				categorical[n.Feature] = true
				anyCategorical = true
			}
		}
		e.Trees[ti] = t
	}
	if anyCategorical {
		e.Categorical = categorical
	}
	return finish(e, name, opts, nil)
}

// xgbTreesOf finds the tree model inside a gbtree or dart booster and
// returns dart's per-tree weights (nil for gbtree).
func xgbTreesOf(b *xgbBooster) (*xgbTreeModel, []float64, error) {
	switch b.Name {
	case "gbtree":
		if b.Model == nil {
			return nil, nil, errors.New("gbtree booster without \"model\"")
		}
		return b.Model, nil, nil
	case "dart":
		if b.GBTree == nil || b.GBTree.Model == nil {
			return nil, nil, errors.New("dart booster without \"gbtree\" model")
		}
		if b.WeightDrop == nil {
			return nil, nil, errors.New("dart booster without \"weight_drop\"")
		}
		for i, w := range b.WeightDrop {
			if math.IsNaN(w) || math.IsInf(w, 0) {
				return nil, nil, fmt.Errorf("dart weight_drop[%d] is %v", i, w)
			}
		}
		return b.GBTree.Model, b.WeightDrop, nil
	case "gblinear":
		return nil, nil, fmt.Errorf("%w: gblinear booster (a linear model, not trees)", ErrUnsupported)
	}
	return nil, nil, fmt.Errorf("%w: booster %q", ErrUnsupported, string(b.Name))
}

// paramInt parses an integer parameter stored as a string; empty gives def.
func paramInt(s looseString, field string, def int) (int, error) {
	t := strings.TrimSpace(string(s))
	if t == "" {
		return def, nil
	}
	v, err := strconv.Atoi(t)
	if err != nil || v < 0 {
		return 0, fmt.Errorf("%s %q is not a non-negative integer", field, t)
	}
	return v, nil
}

// xgbFeatureNames settles the declared feature names of a JSON model: the
// stored names when present (opts names must then agree), else the opts
// names (their count must equal num_feature), else f0..f{num_feature-1}.
func xgbFeatureNames(stored []string, numFeature int, given []string) ([]string, error) {
	if len(stored) > 0 {
		if numFeature != 0 && len(stored) != numFeature {
			return nil, fmt.Errorf("%d feature names for num_feature %d", len(stored), numFeature)
		}
		if given != nil {
			if len(given) != len(stored) {
				return nil, fmt.Errorf("%w: %d names given, the model stores %d", ErrFeatureNames, len(given), len(stored))
			}
			for j := range given {
				if given[j] != stored[j] {
					return nil, fmt.Errorf("%w: feature %d is %q in the model, %q in the names given", ErrFeatureNames, j, stored[j], given[j])
				}
			}
		}
		return append([]string(nil), stored...), nil
	}
	if given != nil {
		if len(given) != numFeature {
			return nil, fmt.Errorf("%w: %d names given for num_feature %d", ErrFeatureNames, len(given), numFeature)
		}
		return append([]string(nil), given...), nil
	}
	return indexNames(numFeature), nil
}

// indexNames returns f0..f{n-1}, XGBoost's names for unnamed features.
func indexNames(n int) []string {
	out := make([]string, n)
	for j := range out {
		out[j] = "f" + strconv.Itoa(j)
	}
	return out
}

// parseBaseScore reads base_score ("5E-1" in 1.x, "[5E-1]" or a vector of
// one value per output in 2.x and later) and converts it to base margins,
// one per output. A single value is used for every output.
func parseBaseScore(s string, outputs int, sem xgbObjective) ([]float64, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return nil, errors.New("no base_score")
	}
	if strings.HasPrefix(t, "[") {
		if !strings.HasSuffix(t, "]") {
			return nil, fmt.Errorf("base_score %q: unterminated list", s)
		}
		t = t[1 : len(t)-1]
	}
	parts := strings.Split(t, ",")
	if len(parts) != 1 && len(parts) != outputs {
		return nil, fmt.Errorf("base_score has %d values for %d outputs", len(parts), outputs)
	}
	out := make([]float64, outputs)
	for k := range out {
		part := strings.TrimSpace(parts[min(k, len(parts)-1)])
		v, err := strconv.ParseFloat(part, 64)
		if err != nil {
			return nil, fmt.Errorf("base_score %q: bad number %q", s, part)
		}
		out[k], err = sem.baseMargin(v)
		if err != nil {
			return nil, err
		}
	}
	return out, nil
}

// xgbTreeOf converts one JSON tree. On error it also returns the node index
// concerned (-1 for the whole tree).
func xgbTreeOf(j *xgbTree, class int, weight float32) (forest.Tree, int, error) {
	n := len(j.LeftChildren)
	if n == 0 {
		return forest.Tree{}, -1, errors.New("no nodes")
	}
	if v, err := paramInt(j.TreeParam.SizeLeafVector, "size_leaf_vector", 0); err != nil || v > 1 {
		if err == nil {
			err = fmt.Errorf("%w: vector leaves (size_leaf_vector %d)", ErrUnsupported, v)
		}
		return forest.Tree{}, -1, err
	}
	for _, a := range []struct {
		field string
		got   int
		need  bool
	}{
		{"right_children", len(j.RightChildren), true},
		{"split_indices", len(j.SplitIndices), true},
		{"split_conditions", len(j.SplitConditions), true},
		{"default_left", len(j.DefaultLeft), true},
		{"split_type", len(j.SplitType), false},
		{"loss_changes", len(j.LossChanges), false},
		{"sum_hessian", len(j.SumHessian), false},
	} {
		if (a.need || a.got != 0) && a.got != n {
			return forest.Tree{}, -1, fmt.Errorf("%s has %d entries for %d nodes", a.field, a.got, n)
		}
	}
	t := forest.Tree{
		Nodes: make([]forest.Node, n),
		Value: make([]float64, n),
		Class: class,
	}
	if j.LossChanges != nil {
		t.Gain = make([]float64, n)
	}
	if j.SumHessian != nil {
		t.Cover = make([]float64, n)
		for i, v := range j.SumHessian {
			t.Cover[i] = float64(float32(v))
		}
	}
	catSet, err := xgbCategorySets(j, n, &t)
	if err != nil {
		return forest.Tree{}, -1, err
	}
	for i := 0; i < n; i++ {
		nd := &t.Nodes[i]
		left, right := j.LeftChildren[i], j.RightChildren[i]
		if left == -1 {
			if right != -1 {
				return forest.Tree{}, i, fmt.Errorf("left child -1 but right child %d", right)
			}
			*nd = forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
			t.Value[i] = float64(weight * float32(j.SplitConditions[i]))
			continue
		}
		for _, c := range [2]int64{left, right} {
			if c < 0 || c >= int64(n) {
				return forest.Tree{}, i, fmt.Errorf("child index %d out of range (tree has %d nodes)", c, n)
			}
		}
		f := j.SplitIndices[i]
		if f < 0 || f > math.MaxInt32 {
			return forest.Tree{}, i, fmt.Errorf("feature index %d out of range", f)
		}
		*nd = forest.Node{Feature: int32(f), Left: int32(left), Right: int32(right), CatSet: -1}
		if j.DefaultLeft[i] != 0 {
			nd.Flags |= forest.FlagDefaultLeft
		}
		st := int64(0)
		if j.SplitType != nil {
			st = j.SplitType[i]
		}
		switch st {
		case 0:
			nd.Threshold = float64(float32(j.SplitConditions[i]))
			if c := j.SplitConditions[i]; !math.IsNaN(c) && !math.IsInf(c, 0) && math.Abs(c) > math.MaxFloat32 {
				nd.Threshold = c // left out of float32 range on purpose: Validate reports it
			}
		case 1:
			nd.Flags |= forest.FlagCategorical
			nd.CatSet = catSet[i]
			if nd.CatSet < 0 {
				// A categorical split with no listed categories sends every
				// value left.
				nd.CatSet = int32(len(t.CatSets))
				t.CatSets = append(t.CatSets, nil)
			}
		default:
			return forest.Tree{}, i, fmt.Errorf("split_type %d unknown (0 numeric, 1 categorical)", st)
		}
		if t.Gain != nil {
			t.Gain[i] = float64(float32(j.LossChanges[i]))
		}
	}
	return t, -1, nil
}

// xgbCategorySets builds the bitsets of a tree's categorical splits into
// t.CatSets and returns, per node, the index of its set (-1: none).
func xgbCategorySets(j *xgbTree, n int, t *forest.Tree) ([]int32, error) {
	k := len(j.CategoriesNodes)
	if len(j.CategoriesSegments) != k || len(j.CategoriesSizes) != k {
		return nil, fmt.Errorf("categories_nodes, categories_segments and categories_sizes have %d, %d and %d entries",
			k, len(j.CategoriesSegments), len(j.CategoriesSizes))
	}
	catSet := constMinusOne(n)
	if k == 0 {
		return catSet, nil
	}
	for s := 0; s < k; s++ {
		node, seg, size := j.CategoriesNodes[s], j.CategoriesSegments[s], j.CategoriesSizes[s]
		if node < 0 || node >= int64(n) {
			return nil, fmt.Errorf("categories_nodes[%d] = %d out of range (tree has %d nodes)", s, node, n)
		}
		if catSet[node] >= 0 {
			return nil, fmt.Errorf("node %d listed twice in categories_nodes", node)
		}
		if seg < 0 || size < 0 || seg > int64(len(j.Categories)) || size > int64(len(j.Categories))-seg {
			return nil, fmt.Errorf("categories segment [%d, %d+%d) out of range (%d categories)", seg, seg, size, len(j.Categories))
		}
		bits, err := categoryBits(j.Categories[seg : seg+size])
		if err != nil {
			return nil, fmt.Errorf("node %d: %w", node, err)
		}
		catSet[node] = int32(len(t.CatSets))
		t.CatSets = append(t.CatSets, bits)
	}
	return catSet, nil
}

// constMinusOne returns n entries of -1.
func constMinusOne(n int) []int32 {
	out := make([]int32, n)
	for i := range out {
		out[i] = -1
	}
	return out
}
