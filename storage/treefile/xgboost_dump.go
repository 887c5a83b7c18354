package treefile

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"slices"
	"strconv"

	"splitledger/importance/forest"
)

// Shared by the two XGBoost dump readers (JSON and text): both parse into
// dumpNode values, then build the ensemble here.

// dumpNode is one node of a dump as written, before ids are resolved.
type dumpNode struct {
	id   int64
	line int // 1-based source line, 0 when unknown
	leaf bool
	// value is the leaf output.
	value float64
	// feature is the split feature as written ("beta" or "f3").
	feature string
	// threshold of a numeric split; cats lists the categories of a
	// categorical split (categorical when cats != nil).
	threshold    float64
	cats         []int64
	yes, no, mis int64
	gain, cover  float64
	hasGain      bool
	hasCover     bool
}

// dumpTree is one tree of a dump in source order.
type dumpTree struct {
	nodes []dumpNode
	line  int // line of the tree header, 0 when unknown
}

// indexName matches XGBoost's names for unnamed features.
var indexName = regexp.MustCompile(`^f(0|[1-9][0-9]{0,8})$`)

// featureResolver maps the feature names written in a dump to indexes.
type featureResolver struct {
	names  []string
	byName map[string]int // unused when indexed
	// given is true when the names came from Options.FeatureNames.
	given bool
	// indexed is true when the dump uses only f0, f1, ... and no names
	// were given: the names are then f0..f{max}.
	indexed bool
}

// newFeatureResolver settles the declared features of a dump. With given
// names: a dump name found in them takes its position; otherwise fN takes
// index N, which must be below len(given). Without given names: a dump that
// only uses fN names declares f0..f{max N}; a dump that uses other names
// declares the names it splits on, in order of first appearance (pass
// FeatureNames to declare unused features and the model's column order).
func newFeatureResolver(trees []dumpTree, given []string) (*featureResolver, error) {
	r := &featureResolver{byName: map[string]int{}}
	if given != nil {
		r.given = true
		r.names = append([]string(nil), given...)
		for j, nm := range given {
			if prev, dup := r.byName[nm]; dup {
				return nil, fmt.Errorf("%w: name %q given twice (features %d and %d)", ErrFeatureNames, nm, prev, j)
			}
			r.byName[nm] = j
		}
		return r, nil
	}
	r.indexed = true
	maxIndex := -1
	for _, t := range trees {
		for _, n := range t.nodes {
			if n.leaf {
				continue
			}
			if !indexName.MatchString(n.feature) {
				r.indexed = false
				continue
			}
			j, _ := strconv.Atoi(n.feature[1:])
			maxIndex = max(maxIndex, j)
		}
	}
	if r.indexed {
		if maxIndex >= MaxFeatures {
			return nil, fmt.Errorf("%w: feature f%d beyond the limit of %d features", ErrUnsupported, maxIndex, MaxFeatures)
		}
		r.names = indexNames(maxIndex + 1)
		return r, nil
	}
	for _, t := range trees {
		for _, n := range t.nodes {
			if n.leaf {
				continue
			}
			if _, ok := r.byName[n.feature]; !ok {
				r.byName[n.feature] = len(r.names)
				r.names = append(r.names, n.feature)
			}
		}
	}
	return r, nil
}

// index resolves one dump feature name.
func (r *featureResolver) index(name string) (int32, error) {
	if r.indexed {
		if !indexName.MatchString(name) {
			return 0, fmt.Errorf("feature %q unknown", name)
		}
		j, _ := strconv.Atoi(name[1:])
		return int32(j), nil
	}
	if j, ok := r.byName[name]; ok {
		return int32(j), nil
	}
	if r.given && indexName.MatchString(name) {
		j, _ := strconv.Atoi(name[1:])
		if j >= len(r.names) {
			return 0, fmt.Errorf("%w: feature %s but only %d names given", ErrFeatureNames, name, len(r.names))
		}
		return int32(j), nil
	}
	if r.given {
		return 0, fmt.Errorf("%w: feature %q is not among the %d names given", ErrFeatureNames, name, len(r.names))
	}
	return 0, fmt.Errorf("feature %q unknown", name)
}

// dumpError locates a problem at a dump node: by line for text dumps, by
// tree and node id otherwise.
func dumpError(name string, tree int, n *dumpNode, err error) *Error {
	e := nodeErr(name, tree, int(n.id), err)
	e.Line = n.line
	if n.id > math.MaxInt32 {
		e.Node = -1
	}
	return e
}

// buildDumpEnsemble turns parsed dump trees into a validated ensemble.
//
// Semantics (XGBoost 1.7 dumps): a numeric split "f<t" sends yes (x < t)
// left and no right; a categorical split "f:{c...}" lists the categories
// that go to yes, which XGBoost's predictor sends right, so yes is the right
// child there; missing names the default child. Node ids are sorted and
// renumbered densely, so contiguous ids (every XGBoost dump) keep their
// numbers. Values and thresholds are rounded to float32, as XGBoost holds
// them, and so are gain and cover; dumps print 9 significant digits, enough
// to recover every float32 exactly. Internal nodes get Value 0.
func buildDumpEnsemble(trees []dumpTree, format Format, name string, opts Options, withLines bool) (*forest.Ensemble, error) {
	if len(trees) == 0 {
		return nil, fileErr(name, 0, errors.New("no trees"))
	}
	objName := opts.Objective
	if objName == "" {
		objName = DefaultDumpObjective
	}
	sem, err := xgbObjectiveOf(objName)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	numClass := opts.NumClass
	if numClass < 0 {
		return nil, fileErr(name, 0, fmt.Errorf("NumClass %d is negative", numClass))
	}
	if sem.task == forest.TaskMulticlass && numClass < 2 {
		return nil, fileErr(name, 0, fmt.Errorf("multi-class objective %q needs NumClass >= 2 for a dump", objName))
	}
	numClass = max(numClass, 1)
	if len(trees)%numClass != 0 {
		return nil, fileErr(name, 0, fmt.Errorf("%d trees is not a multiple of %d classes", len(trees), numClass))
	}
	baseScore := DefaultDumpBaseScore
	if opts.BaseScore != nil {
		baseScore = *opts.BaseScore
	}
	bm, err := sem.baseMargin(baseScore)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	res, err := newFeatureResolver(trees, opts.FeatureNames)
	if err != nil {
		return nil, fileErr(name, 0, err)
	}
	e := &forest.Ensemble{
		Format:       string(format),
		Objective:    objName,
		Task:         sem.task,
		Link:         sem.link,
		Rule:         forest.LessThanFloat32,
		NumClass:     numClass,
		BaseMargin:   make([]float64, numClass),
		FeatureNames: res.names,
		Trees:        make([]forest.Tree, len(trees)),
	}
	for k := range e.BaseMargin {
		e.BaseMargin[k] = bm
	}
	var lines [][]int
	if withLines {
		lines = make([][]int, len(trees))
	}
	var categorical []bool
	for ti := range trees {
		t, tl, err := buildDumpTree(&trees[ti], ti, ti%numClass, res, name)
		if err != nil {
			return nil, err
		}
		for i := range t.Nodes {
			if t.Nodes[i].Flags&forest.FlagCategorical != 0 {
				if categorical == nil {
					categorical = make([]bool, len(res.names))
				}
				categorical[t.Nodes[i].Feature] = true
			}
		}
		e.Trees[ti] = t
		if withLines {
			lines[ti] = tl
		}
	}
	e.Categorical = categorical
	return finish(e, name, opts, lines)
}

// buildDumpTree flattens one dump tree; it also returns the source line of
// each flat node.
func buildDumpTree(dt *dumpTree, ti, class int, res *featureResolver, name string) (forest.Tree, []int, error) {
	n := len(dt.nodes)
	if n == 0 {
		e := nodeErr(name, ti, -1, errors.New("no nodes"))
		e.Line = dt.line
		return forest.Tree{}, nil, e
	}
	ids := make([]int64, n)
	for i := range dt.nodes {
		if dt.nodes[i].id < 0 {
			return forest.Tree{}, nil, dumpError(name, ti, &dt.nodes[i], fmt.Errorf("negative node id %d", dt.nodes[i].id))
		}
		ids[i] = dt.nodes[i].id
	}
	slices.Sort(ids)
	for i := 1; i < n; i++ {
		if ids[i] == ids[i-1] {
			for k := range dt.nodes {
				if dt.nodes[k].id == ids[i] {
					return forest.Tree{}, nil, dumpError(name, ti, &dt.nodes[k], fmt.Errorf("node id %d appears twice", ids[i]))
				}
			}
		}
	}
	if ids[0] != 0 {
		e := nodeErr(name, ti, -1, fmt.Errorf("no root node (id 0); lowest id is %d", ids[0]))
		e.Line = dt.line
		return forest.Tree{}, nil, e
	}
	contiguous := ids[n-1] == int64(n-1)
	flat := func(id int64) (int32, bool) {
		if contiguous {
			return int32(id), id >= 0 && id < int64(n)
		}
		k, ok := slices.BinarySearch(ids, id)
		return int32(k), ok
	}
	stats := dt.nodes[0].hasCover
	t := forest.Tree{Nodes: make([]forest.Node, n), Value: make([]float64, n), Class: class}
	if stats {
		t.Gain = make([]float64, n)
		t.Cover = make([]float64, n)
	}
	lines := make([]int, n)
	var catBits [][]uint32
	for k := range dt.nodes {
		dn := &dt.nodes[k]
		i, _ := flat(dn.id)
		lines[i] = dn.line
		if dn.hasCover != stats {
			return forest.Tree{}, nil, dumpError(name, ti, dn, errors.New("statistics (cover) on some nodes only"))
		}
		if stats {
			t.Cover[i] = float64(float32(dn.cover))
		}
		if dn.leaf {
			t.Nodes[i] = forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
			t.Value[i] = float64(float32(dn.value))
			continue
		}
		if stats {
			if !dn.hasGain {
				return forest.Tree{}, nil, dumpError(name, ti, dn, errors.New("split without gain in a dump with statistics"))
			}
			t.Gain[i] = float64(float32(dn.gain))
		}
		f, err := res.index(dn.feature)
		if err != nil {
			return forest.Tree{}, nil, dumpError(name, ti, dn, err)
		}
		yes, ok1 := flat(dn.yes)
		no, ok2 := flat(dn.no)
		if !ok1 || !ok2 {
			bad := dn.yes
			if ok1 {
				bad = dn.no
			}
			return forest.Tree{}, nil, dumpError(name, ti, dn, fmt.Errorf("child id %d not in the tree", bad))
		}
		if dn.mis != dn.yes && dn.mis != dn.no {
			return forest.Tree{}, nil, dumpError(name, ti, dn, fmt.Errorf("missing=%d is neither yes=%d nor no=%d", dn.mis, dn.yes, dn.no))
		}
		nd := forest.Node{Feature: f, CatSet: -1}
		if dn.cats == nil {
			nd.Left, nd.Right = yes, no
			nd.Threshold = float64(float32(dn.threshold))
			if math.Abs(dn.threshold) > math.MaxFloat32 {
				nd.Threshold = dn.threshold // Validate reports it
			}
			if dn.mis == dn.yes {
				nd.Flags |= forest.FlagDefaultLeft
			}
		} else {
			nd.Left, nd.Right = no, yes
			nd.Flags |= forest.FlagCategorical
			if dn.mis == dn.no {
				nd.Flags |= forest.FlagDefaultLeft
			}
			bits, err := categoryBits(dn.cats)
			if err != nil {
				return forest.Tree{}, nil, dumpError(name, ti, dn, err)
			}
			if catBits == nil {
				catBits = make([][]uint32, n)
			}
			catBits[i] = bits
		}
		t.Nodes[i] = nd
	}
	// Category sets are numbered in node order, as the JSON model lists them.
	for i, bits := range catBits {
		if bits != nil {
			t.Nodes[i].CatSet = int32(len(t.CatSets))
			t.CatSets = append(t.CatSets, bits)
		}
	}
	return t, lines, nil
}

// categoryBits builds a bitset from category codes in [0, maxCategory).
func categoryBits(cats []int64) ([]uint32, error) {
	hi := int64(0)
	for _, c := range cats {
		if c < 0 || c >= maxCategory {
			return nil, fmt.Errorf("category %d out of range [0, %d)", c, maxCategory)
		}
		hi = max(hi, c)
	}
	bits := make([]uint32, hi/32+1)
	for _, c := range cats {
		bits[c/32] |= 1 << (uint(c) % 32)
	}
	return bits, nil
}
