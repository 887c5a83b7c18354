package treefile

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"splitledger/importance/forest"
)

// parityTol is the absolute tolerance on margins and predictions. XGBoost
// 1.7.4 sums leaves in float32 and margins.csv prints 9 significant digits,
// so float64 sums differ from it by a few float32 ulps of the margin.
const parityTol = 1e-5

// fixtures lists the XGBoost 1.7.4 reference models of testdata/models.
var fixtures = []string{"binary", "missing", "regression", "ranking", "multiclass", "categorical"}

// dumpOptions returns the options a dump needs, from the fixture's meta.json
// (the parameters it was trained with; base_score default 0.5 as saved by
// XGBoost 1.7.4).
func dumpOptions(m fixtureMeta, names []string) Options {
	return Options{Objective: m.Objective, BaseScore: m.BaseScore, NumClass: m.NumClass, FeatureNames: names}
}

// checkParity scores rows.csv and compares with margins.csv and preds.csv.
func checkParity(t *testing.T, dir string, e *forest.Ensemble) {
	t.Helper()
	cols, n := readRows(t, filepath.Join(dir, "rows.csv"), e)
	// Reference: XGBoost 1.7.4 predict(output_margin=True), margins.csv.
	want, rows, width := readMatrix(t, filepath.Join(dir, "margins.csv"))
	if rows != n || width != e.NumClass {
		t.Fatalf("margins.csv is %dx%d, want %dx%d", rows, width, n, e.NumClass)
	}
	got := make([]float64, n*e.NumClass)
	e.Margins(got, cols, n, 0)
	bad := 0
	for i := range got {
		if !within(got[i], want[i], parityTol) {
			if bad < 5 {
				t.Errorf("row %d output %d: margin %.9g, XGBoost 1.7.4 %.9g", i/e.NumClass, i%e.NumClass, got[i], want[i])
			}
			bad++
		}
	}
	if bad > 0 {
		t.Fatalf("%d of %d margins differ by more than %g", bad, len(got), parityTol)
	}
	// Reference: XGBoost 1.7.4 predict(), preds.csv.
	wantP, _, _ := readMatrix(t, filepath.Join(dir, "preds.csv"))
	e.Transform(got)
	for i := range got {
		if !within(got[i], wantP[i], parityTol) {
			t.Fatalf("row %d output %d: prediction %.9g, XGBoost 1.7.4 %.9g", i/e.NumClass, i%e.NumClass, got[i], wantP[i])
		}
	}
}

func TestXGBoostParity(t *testing.T) {
	for _, fx := range fixtures {
		dir := filepath.Join(modelsDir, fx)
		meta := readMeta(t, dir)
		names, err := ReadNames(filepath.Join(dir, "features.txt"))
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct {
			name   string
			file   string
			format Format
			opts   Options
		}{
			{"json", "model.json", FormatXGBoostJSON, Options{}},
			{"json-names", "model.json", FormatXGBoostJSON, Options{FeatureNames: names}},
			{"dump-json", "dump.json", FormatXGBoostDumpJSON, dumpOptions(meta, names)},
			{"dump-text", "dump.txt", FormatXGBoostDumpText, dumpOptions(meta, names)},
			{"dump-json-no-names", "dump.json", FormatXGBoostDumpJSON, dumpOptions(meta, nil)},
			{"dump-text-no-names", "dump.txt", FormatXGBoostDumpText, dumpOptions(meta, nil)},
		} {
			t.Run(fx+"/"+c.name, func(t *testing.T) {
				e, err := ReadFile(filepath.Join(dir, c.file), c.opts)
				if err != nil {
					t.Fatal(err)
				}
				if e.Format != string(c.format) {
					t.Errorf("format %q, want %q (sniffed)", e.Format, c.format)
				}
				if e.Objective != meta.Objective {
					t.Errorf("objective %q, want %q", e.Objective, meta.Objective)
				}
				checkParity(t, dir, e)
			})
		}
	}
}

func ptr(v float64) *float64 { return &v }

func TestXGBoostExtraParity(t *testing.T) {
	// Reference: XGBoost 1.7.4 predict(output_margin=True) and predict(),
	// written by testdata/treefile/make_fixtures.py.
	for _, c := range []struct {
		name, dir, file string
		opts            Options
	}{
		// dart: each tree's leaves scaled by weight_drop.
		{"dart", "dart", "dart/model.json", Options{}},
		// count:poisson: base_score 2 becomes the margin log(2); no names
		// stored, so features are f0..f7.
		{"poisson json", "poisson", "poisson/model.json", Options{}},
		{"poisson dump text", "poisson", "poisson/dump.txt", Options{Objective: "count:poisson", BaseScore: ptr(2)}},
		{"poisson dump json", "poisson", "poisson/dump.json", Options{Objective: "count:poisson", BaseScore: ptr(2)}},
	} {
		t.Run(c.name, func(t *testing.T) {
			e, err := ReadFile(filepath.Join(fixtureDir, c.file), c.opts)
			if err != nil {
				t.Fatal(err)
			}
			checkParity(t, filepath.Join(fixtureDir, c.dir), e)
		})
	}
}

func TestXGBoostUnseenCategories(t *testing.T) {
	// Reference: XGBoost 1.7.4 margins of the categorical fixture on rows
	// whose category code is unseen (6, 7, 31, 32, 100), negative (-1,
	// -0.5), fractional (2.5, 4.9, 0.2) or missing; written by
	// testdata/treefile/make_fixtures.py. XGBoost sends every code outside
	// a node's set left, truncates fractions, and uses default_left for NaN.
	dir := filepath.Join(fixtureDir, "categorical_edge")
	for _, file := range []string{"model.json", "dump.json", "dump.txt"} {
		t.Run(file, func(t *testing.T) {
			meta := readMeta(t, filepath.Join(modelsDir, "categorical"))
			e, err := ReadFile(filepath.Join(modelsDir, "categorical", file), dumpOptions(meta, nil))
			if err != nil {
				t.Fatal(err)
			}
			cols, n := readRows(t, filepath.Join(dir, "rows.csv"), e)
			want, rows, _ := readMatrix(t, filepath.Join(dir, "margins.csv"))
			if rows != n {
				t.Fatalf("margins.csv has %d rows, rows.csv %d", rows, n)
			}
			got := make([]float64, n)
			e.Margins(got, cols, n, 1)
			for r := range got {
				if !within(got[r], want[r], parityTol) {
					t.Errorf("row %d (category %v): margin %.9g, XGBoost 1.7.4 %.9g", r, cols[7][r], got[r], want[r])
				}
			}
		})
	}
}

func TestXGBoostFormatsAgree(t *testing.T) {
	// The JSON model and both dumps of one booster must compile to the same
	// trees: same layout, thresholds, leaf values, gain and cover (dumps print
	// 9 significant digits, which recover every float32 exactly).
	for _, fx := range fixtures {
		t.Run(fx, func(t *testing.T) {
			dir := filepath.Join(modelsDir, fx)
			meta := readMeta(t, dir)
			names, err := ReadNames(filepath.Join(dir, "features.txt"))
			if err != nil {
				t.Fatal(err)
			}
			ref, err := ReadFile(filepath.Join(dir, "model.json"), Options{})
			if err != nil {
				t.Fatal(err)
			}
			for _, file := range []string{"dump.json", "dump.txt"} {
				e, err := ReadFile(filepath.Join(dir, file), dumpOptions(meta, names))
				if err != nil {
					t.Fatal(err)
				}
				if !reflect.DeepEqual(e.FeatureNames, ref.FeatureNames) || !reflect.DeepEqual(e.BaseMargin, ref.BaseMargin) ||
					e.NumClass != ref.NumClass || e.Task != ref.Task || e.Link != ref.Link {
					t.Fatalf("%s: header differs from model.json", file)
				}
				if !reflect.DeepEqual(e.Categorical, ref.Categorical) {
					t.Errorf("%s: categorical flags %v, model.json %v", file, e.Categorical, ref.Categorical)
				}
				for ti := range ref.Trees {
					a, b := &e.Trees[ti], &ref.Trees[ti]
					for _, f := range []struct {
						field string
						same  bool
					}{
						{"nodes", reflect.DeepEqual(a.Nodes, b.Nodes)},
						{"values", reflect.DeepEqual(a.Value, b.Value)},
						{"gain", reflect.DeepEqual(a.Gain, b.Gain)},
						{"cover", reflect.DeepEqual(a.Cover, b.Cover)},
						{"category sets", reflect.DeepEqual(a.CatSets, b.CatSets)},
						{"class", a.Class == b.Class},
					} {
						if !f.same {
							t.Fatalf("%s: tree %d: %s differ from model.json", file, ti, f.field)
						}
					}
				}
				if !reflect.DeepEqual(e.ByFeature, ref.ByFeature) {
					t.Errorf("%s: ByFeature differs", file)
				}
			}
		})
	}
}

func TestXGBoostStructureMatchesGetScore(t *testing.T) {
	// Reference: XGBoost 1.7.4 Booster.get_score in score.json: "weight" is
	// the split count per feature, "total_gain" the sum of loss_changes and
	// "total_cover" the sum of sum_hessian over the feature's splits. XGBoost
	// sums in float32, hence the relative tolerance.
	const rel = 1e-5
	for _, fx := range fixtures {
		t.Run(fx, func(t *testing.T) {
			dir := filepath.Join(modelsDir, fx)
			e, err := ReadFile(filepath.Join(dir, "model.json"), Options{})
			if err != nil {
				t.Fatal(err)
			}
			data, err := os.ReadFile(filepath.Join(dir, "score.json"))
			if err != nil {
				t.Fatalf("reference fixture missing: %v", err)
			}
			var score map[string]map[string]float64
			if err := json.Unmarshal(data, &score); err != nil {
				t.Fatal(err)
			}
			s := forest.Summarize(e)
			gain := make([]float64, e.NumFeatures())
			cover := make([]float64, e.NumFeatures())
			for _, tr := range e.Trees {
				for i, n := range tr.Nodes {
					if !n.IsLeaf() {
						gain[n.Feature] += tr.Gain[i]
						cover[n.Feature] += tr.Cover[i]
					}
				}
			}
			for j, nm := range e.FeatureNames {
				if w := score["weight"][nm]; float64(s.SplitCount[j]) != w {
					t.Errorf("%s: split count %d, get_score weight %v", nm, s.SplitCount[j], w)
				}
				if w := score["total_gain"][nm]; !within(gain[j], w, rel*math.Abs(w)) {
					t.Errorf("%s: total gain %v, get_score total_gain %v", nm, gain[j], w)
				}
				if w := score["total_cover"][nm]; !within(cover[j], w, rel*math.Abs(w)) {
					t.Errorf("%s: total cover %v, get_score total_cover %v", nm, cover[j], w)
				}
			}
			if s.FeaturesUsed != len(score["weight"]) {
				t.Errorf("%d features used, get_score lists %d", s.FeaturesUsed, len(score["weight"]))
			}
		})
	}
}

func TestXGBoostModelHeader(t *testing.T) {
	// Reference: the parameters in make_models.py / meta.json (XGBoost 1.7.4
	// saves base_score 0.5 unless set; num_class 3 for multiclass; the
	// categorical fixture declares theta categorical).
	for _, c := range []struct {
		fx            string
		task          forest.Task
		link          forest.Link
		numClass      int
		base          float64 // margin
		trees         int
		categoricalIx int // -1: none
	}{
		{"binary", forest.TaskBinary, forest.LinkLogistic, 1, 0, 20, -1},
		{"missing", forest.TaskBinary, forest.LinkLogistic, 1, float64(float32(math.Log(0.3 / 0.7))), 15, -1},
		{"regression", forest.TaskRegression, forest.LinkIdentity, 1, 0.5, 25, -1},
		{"ranking", forest.TaskRanking, forest.LinkIdentity, 1, 0.5, 20, -1},
		{"multiclass", forest.TaskMulticlass, forest.LinkSoftmax, 3, 0.5, 30, -1},
		{"categorical", forest.TaskBinary, forest.LinkLogistic, 1, 0, 15, 7},
	} {
		t.Run(c.fx, func(t *testing.T) {
			e, err := ReadFile(filepath.Join(modelsDir, c.fx, "model.json"), Options{})
			if err != nil {
				t.Fatal(err)
			}
			if e.Task != c.task || e.Link != c.link || e.NumClass != c.numClass || len(e.Trees) != c.trees || e.Rule != forest.LessThanFloat32 {
				t.Errorf("task %v link %v classes %d trees %d rule %v", e.Task, e.Link, e.NumClass, len(e.Trees), e.Rule)
			}
			for k, m := range e.BaseMargin {
				if !within(m, c.base, 1e-7) {
					t.Errorf("base margin[%d] = %v, want %v", k, m, c.base)
				}
			}
			if c.categoricalIx < 0 && e.Categorical != nil {
				t.Errorf("categorical flags %v, want none", e.Categorical)
			}
			if c.categoricalIx >= 0 && (e.Categorical == nil || !e.Categorical[c.categoricalIx]) {
				t.Errorf("feature %d not marked categorical: %v", c.categoricalIx, e.Categorical)
			}
			s := forest.Summarize(e)
			for k, n := range s.TreesPerClass {
				if n != c.trees/c.numClass {
					t.Errorf("class %d has %d trees, want %d (round-robin)", k, n, c.trees/c.numClass)
				}
			}
		})
	}
}

func TestXGBoostGzipAndVersion2BaseScore(t *testing.T) {
	dir := filepath.Join(modelsDir, "missing")
	raw, err := os.ReadFile(filepath.Join(dir, "model.json"))
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write(raw)
	zw.Close()
	// XGBoost 2.x writes base_score as a one-element list ("[3E-1]").
	const from = `"base_score":"3E-1"`
	if !bytes.Contains(raw, []byte(from)) {
		t.Fatalf("fixture does not hold %s", from)
	}
	v2 := bytes.Replace(raw, []byte(from), []byte(`"base_score":"[3E-1]"`), 1)
	for _, c := range []struct {
		name string
		data []byte
	}{
		{"gzip", gz.Bytes()},
		{"base_score list", v2},
	} {
		t.Run(c.name, func(t *testing.T) {
			e, err := Read(bytes.NewReader(c.data), "models/cand.json.gz", Options{})
			if err != nil {
				t.Fatal(err)
			}
			checkParity(t, dir, e)
		})
	}
}

func TestDumpFeatureNames(t *testing.T) {
	dir := filepath.Join(modelsDir, "binary")
	meta := readMeta(t, dir)
	for _, c := range []struct {
		name  string
		file  string
		names []string
		want  []string // declared names; nil when an error is expected
		msg   string
	}{
		{"names given", "dump.txt", []string{"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta"},
			[]string{"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta"}, ""},
		{"name absent from the list", "dump.txt", []string{"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta"},
			nil, `not among the 7 names given`},
		{"index dump needs enough names", "../../treefile/poisson/dump.txt", []string{"a", "b", "c"},
			nil, "only 3 names given"},
		{"duplicate given name", "dump.json", []string{"alpha", "alpha"}, nil, `name "alpha" given twice`},
	} {
		t.Run(c.name, func(t *testing.T) {
			e, err := ReadFile(filepath.Join(dir, c.file), dumpOptions(meta, c.names))
			if c.want == nil {
				if err == nil || !strings.Contains(err.Error(), c.msg) {
					t.Fatalf("error %v, want one containing %q", err, c.msg)
				}
				if !errors.Is(err, ErrFeatureNames) {
					t.Errorf("error %v does not wrap ErrFeatureNames", err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(e.FeatureNames, c.want) {
				t.Errorf("names %v, want %v", e.FeatureNames, c.want)
			}
		})
	}
	// Index dump without names: f0..f{max used}.
	e, err := ReadFile(filepath.Join(fixtureDir, "poisson", "dump.txt"), Options{Objective: "count:poisson", BaseScore: ptr(2)})
	if err != nil {
		t.Fatal(err)
	}
	if got := e.FeatureNames[len(e.FeatureNames)-1]; got != "f"+strconv.Itoa(len(e.FeatureNames)-1) {
		t.Errorf("index dump names end with %q", got)
	}
}
