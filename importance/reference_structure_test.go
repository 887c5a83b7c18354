package importance

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"splitledger/storage/treefile"
	"splitledger/storage/treefile/leavesref"
)

// closeRel reports whether got is within rel of want, relative to
// max(|want|, 1e-300) so that a zero reference demands an exact zero. NaN
// never passes.
func closeRel(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Max(math.Abs(want), 1e-300)
}

// TestStructureMatchesXGBoostGetScore compares the structure measures with
// XGBoost 1.7.4 Booster.get_score for its five importance types, written to
// testdata/models/<name>/score.json by testdata/models/make_models.py:
//
//	weight      = SplitCount   (splits on the feature, over every tree)
//	total_gain  = TotalGain    (sum of loss_chg of those splits)
//	gain        = MeanGain     (total_gain / weight)
//	total_cover = TotalCover   (sum of sum_hessian of those splits)
//	cover       = MeanCover    (total_cover / weight)
//
// For multi-class models get_score sums over the trees of every class, as
// MeasureStructure does. get_score leaves out features that no split uses;
// ours must be 0 there. Tolerance 1e-6 relative: XGBoost keeps the node
// statistics in float32.
func TestStructureMatchesXGBoostGetScore(t *testing.T) {
	for _, name := range []string{"binary", "missing", "regression", "ranking", "multiclass", "categorical"} {
		t.Run(name, func(t *testing.T) {
			e, _ := loadFixture(t, name)
			raw, err := os.ReadFile(filepath.Join("..", "testdata", "models", name, "score.json"))
			if err != nil {
				t.Fatalf("fixture %s: %v", name, err)
			}
			var score map[string]map[string]float64
			if err := json.Unmarshal(raw, &score); err != nil {
				t.Fatalf("fixture %s score.json: %v", name, err)
			}
			st := MeasureStructure(e)
			index := map[string]int{}
			for j, nm := range e.FeatureNames {
				index[nm] = j
			}
			ours := map[string][]float64{
				"weight":      make([]float64, len(st.SplitCount)),
				"total_gain":  st.TotalGain,
				"gain":        st.MeanGain,
				"total_cover": st.TotalCover,
				"cover":       st.MeanCover,
			}
			for j, c := range st.SplitCount {
				ours["weight"][j] = float64(c)
			}
			for typ, got := range ours {
				want, ok := score[typ]
				if !ok {
					t.Fatalf("score.json has no %q", typ)
				}
				for nm := range want {
					if _, ok := index[nm]; !ok {
						t.Errorf("%s: get_score names feature %q that the model does not declare", typ, nm)
					}
				}
				for j, nm := range e.FeatureNames {
					w := want[nm] // absent: XGBoost left the unused feature out, so 0
					if !closeRel(got[j], w, 1e-6) {
						t.Errorf("%s %s: ours %.9g, XGBoost get_score %.9g", typ, nm, got[j], w)
					}
				}
			}
		})
	}
}

// lightgbmFileImportance reads what a LightGBM model file says about its own
// features, straight from the text and independently of storage/treefile:
//
//   - split: the "feature_importances:" section LightGBM appends to the
//     file (older versions: "feature importances:"), name=count lines.
//     LightGBM writes GBDT::FeatureImportance with importance_type 0 there.
//   - gain: GBDT::FeatureImportance with importance_type 1 recomputed from
//     the trees' split_feature and split_gain lines: the sum of split_gain
//     over the splits with split_gain > 0 (src/boosting/gbdt_model_text.cpp).
//
// It also returns the split counts recomputed from the trees the same way,
// so the test can tell a disagreement in the file from one in the reader.
func lightgbmFileImportance(t *testing.T, path string) (section map[string]int, splits map[string]int, gain map[string]float64) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	section, splits, gain = map[string]int{}, map[string]int{}, map[string]float64{}
	var feats []int
	in := false
	for ln, line := range strings.Split(string(raw), "\n") {
		line = strings.TrimRight(line, "\r")
		if in {
			if line == "" || line == "parameters:" {
				in = false
				continue
			}
			nm, v, ok := strings.Cut(line, "=")
			n, err := strconv.Atoi(v)
			if !ok || err != nil {
				t.Fatalf("%s line %d: importance line %q", path, ln+1, line)
			}
			section[nm] = n
			continue
		}
		key, val, _ := strings.Cut(line, "=")
		switch key {
		case "feature_importances:", "feature importances:":
			in = true
		case "feature_names":
			names = strings.Fields(val)
		case "split_feature":
			feats = feats[:0]
			for _, s := range strings.Fields(val) {
				j, err := strconv.Atoi(s)
				if err != nil || j < 0 || j >= len(names) {
					t.Fatalf("%s line %d: split_feature %q", path, ln+1, s)
				}
				feats = append(feats, j)
			}
		case "split_gain":
			gs := strings.Fields(val)
			if len(gs) != len(feats) {
				t.Fatalf("%s line %d: %d gains for %d splits", path, ln+1, len(gs), len(feats))
			}
			for i, s := range gs {
				g, err := strconv.ParseFloat(s, 64)
				if err != nil {
					t.Fatalf("%s line %d: split_gain %q", path, ln+1, s)
				}
				if g > 0 {
					splits[names[feats[i]]]++
					gain[names[feats[i]]] += g
				}
			}
		}
	}
	if len(section) == 0 {
		t.Fatalf("%s: no feature_importances section", path)
	}
	return section, splits, gain
}

// TestStructureMatchesLightGBMFileImportance reads real LightGBM models
// (the model files shipped in the testdata of github.com/dmitryikh/leaves,
// saved by LightGBM itself) with storage/treefile and compares SplitCount
// with the file's own feature_importances section (LightGBM "split"
// importance) and TotalGain with LightGBM's "gain" importance recomputed
// from the file's split_gain lines. LightGBM counts only splits with
// split_gain > 0; every split in these files has a positive gain, which the
// test asserts, so counting all splits as MeasureStructure does agrees.
// Features the section leaves out must be 0 in ours. Gain tolerance 1e-9
// relative (the same decimal text, summed in a different order).
func TestStructureMatchesLightGBMFileImportance(t *testing.T) {
	dir := leavesref.Dir(t)
	for _, file := range []string{
		"lg_breast_cancer.txt", "lg_dart_breast_cancer.model", "lg_kddcup99.model", "lg_rf_iris.model",
		"lgmulticlass.model", "model_simple.txt", "genlin_fmtp_gamma_AvgClaimAmount.model",
		"genlin_fmtp_poisson_Frequency.model", "genlin_fmtp_tweedie_PurePremium.model",
	} {
		t.Run(file, func(t *testing.T) {
			path := filepath.Join(dir, file)
			e, err := treefile.ReadFile(path, treefile.Options{})
			if err != nil {
				t.Fatalf("read: %v", err)
			}
			section, positive, gain := lightgbmFileImportance(t, path)
			st := MeasureStructure(e)
			all := 0
			for _, c := range st.SplitCount {
				all += c
			}
			nPositive := 0
			for _, c := range positive {
				nPositive += c
			}
			if all != nPositive {
				t.Fatalf("%d splits in the model, %d with positive gain: LightGBM's split importance would differ from SplitCount", all, nPositive)
			}
			for nm, c := range section {
				if positive[nm] != c {
					t.Fatalf("file inconsistent: section says %s=%d, trees give %d", nm, c, positive[nm])
				}
			}
			for j, nm := range e.FeatureNames {
				if st.SplitCount[j] != section[nm] { // absent from the section: 0
					t.Errorf("%s: SplitCount %d, LightGBM feature_importances %d", nm, st.SplitCount[j], section[nm])
				}
				if !closeRel(st.TotalGain[j], gain[nm], 1e-9) {
					t.Errorf("%s: TotalGain %.12g, LightGBM gain importance %.12g", nm, st.TotalGain[j], gain[nm])
				}
				if c := st.SplitCount[j]; c > 0 && !closeRel(st.MeanGain[j], gain[nm]/float64(c), 1e-9) {
					t.Errorf("%s: MeanGain %.12g, want %.12g", nm, st.MeanGain[j], gain[nm]/float64(c))
				}
			}
		})
	}
}
