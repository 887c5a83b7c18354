package importance

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"testing"

	"splitledger/importance/metrics"
)

// permutationReference is one model's entry of
// testdata/reference/importance/permutation.json (written by
// make_importance_refs.py beside it with scikit-learn 1.2.1
// permutation_importance and XGBoost 1.7.4 margins).
type permutationReference struct {
	BaselineScore float64 `json:"baseline_score"`
	NRepeats      int     `json:"n_repeats"`
	RandomState   int     `json:"random_state"`
	Rows          int     `json:"rows"`
	Features      map[string]struct {
		Mean float64 `json:"mean"`
		Std  float64 `json:"std"`
	} `json:"features"`
}

func loadPermutationReference(t *testing.T, model string) permutationReference {
	t.Helper()
	path := filepath.Join("..", "testdata", "reference", "importance", "permutation.json")
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("reference fixture: %v", err)
	}
	var all map[string]json.RawMessage
	if err := json.Unmarshal(raw, &all); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	var ref permutationReference
	if err := json.Unmarshal(all[model], &ref); err != nil {
		t.Fatalf("%s %s: %v", path, model, err)
	}
	if ref.NRepeats <= 1 || len(ref.Features) == 0 {
		t.Fatalf("%s: no %s entry", path, model)
	}
	return ref
}

// orderAgrees checks that two scorings of the features order every pair
// whose reference gap is beyond noise the same way. Pairs are taken between
// the reference's top five and every other feature; noise(j) is the
// standard error of the difference's j part (both sides combined), and a
// gap counts when it exceeds 4·sqrt(noise(a)² + noise(b)²). Pairs within
// noise are logged and not compared (their order is a coin flip).
func orderAgrees(t *testing.T, names []string, ref, ours, noise map[string]float64) {
	t.Helper()
	byRef := slices.Clone(names)
	sort.SliceStable(byRef, func(a, b int) bool { return ref[byRef[a]] > ref[byRef[b]] })
	for i := 0; i < 5 && i < len(byRef); i++ {
		a := byRef[i]
		for _, b := range byRef[i+1:] {
			gap := ref[a] - ref[b]
			tol := 4 * math.Hypot(noise[a], noise[b])
			if !(gap > tol) {
				t.Logf("rank: %s and %s within noise (reference gap %.3g, noise bound %.3g): order not compared", a, b, gap, tol)
				continue
			}
			if !(ours[a] > ours[b]) {
				t.Errorf("rank: reference puts %s (%.6g) above %s (%.6g) beyond noise, ours gives %.6g and %.6g", a, ref[a], b, ref[b], ours[a], ours[b])
			}
		}
	}
}

// TestPermutationMatchesScikitLearnLogLoss compares the permutation drop of
// the binary fixture (log loss, the exact expectation over all shuffles)
// with scikit-learn 1.2.1 permutation_importance, scoring minus the log loss
// of XGBoost 1.7.4's probabilities, n_repeats 300 (see the fixture's
// script). sklearn's importance is baseline − shuffled score with score =
// −log loss, so it equals our loss_shuffled − loss_base. sklearn's mean is a
// Monte-Carlo estimate of our exact value: they must agree within
// 4·std/sqrt(n_repeats) (+1e-9 for features no split uses, where both are
// 0). The unshuffled log loss must equal −baseline_score to 1e-6 (XGBoost
// scores in float32).
func TestPermutationMatchesScikitLearnLogLoss(t *testing.T) {
	ref := loadPermutationReference(t, "binary")
	e, f := loadFixture(t, "binary")
	if f.Rows != ref.Rows {
		t.Fatalf("fixture has %d rows, reference %d", f.Rows, ref.Rows)
	}
	tab, err := MeasureModel(e, "binary", f, Config{Replicates: 10})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Metric != MetricLogLoss || tab.Repeats != 0 {
		t.Fatalf("metric %v repeats %d: want log loss with the exact expectation", tab.Metric, tab.Repeats)
	}
	// scikit-learn 1.2.1 log_loss on XGBoost 1.7.4 probabilities.
	if !within(tab.Quality.Value, -ref.BaselineScore, 1e-6) {
		t.Errorf("log loss %.9g, scikit-learn %.9g", tab.Quality.Value, -ref.BaselineScore)
	}
	ours, mean, noise := map[string]float64{}, map[string]float64{}, map[string]float64{}
	for _, row := range tab.Features {
		r, ok := ref.Features[row.Feature]
		if !ok {
			t.Fatalf("reference lacks feature %s", row.Feature)
		}
		got := row.Traffic[PermutationDrop].Value
		se := r.Std / math.Sqrt(float64(ref.NRepeats))
		tol := 4*se + 1e-9
		t.Run(row.Feature, func(t *testing.T) {
			if !within(got, r.Mean, tol) {
				t.Errorf("permutation drop %.6g, scikit-learn mean %.6g ± %.3g (std %.3g over %d repeats)", got, r.Mean, tol, r.Std, ref.NRepeats)
			}
		})
		ours[row.Feature], mean[row.Feature], noise[row.Feature] = got, r.Mean, se
	}
	// Order of the top five: ours is exact, so only sklearn's noise counts.
	orderAgrees(t, e.FeatureNames, mean, ours, noise)
}

// TestPermutationMatchesScikitLearnNDCG compares the permutation drop of the
// ranking fixture under the zero Config (NDCG@10, gain 2^rel − 1, groups
// without a relevant item left out, 10 shuffles) with scikit-learn 1.2.1
// permutation_importance, n_repeats 200, with a scorer computing the same
// mean NDCG@10 (ndcg_score on the gains; see the fixture's script). Both
// are means of single-shuffle drops drawn from the same distribution (a
// uniform permutation of the whole column, groups kept), whose spread
// sklearn's std estimates: ours averages 10 of them, sklearn 200, so the
// difference has standard error sqrt(std²/200 + std²/10) and must stay
// within 4 of those. The unshuffled NDCG must equal baseline_score to 1e-6.
func TestPermutationMatchesScikitLearnNDCG(t *testing.T) {
	ref := loadPermutationReference(t, "ranking")
	e, f := loadFixture(t, "ranking")
	if f.Rows != ref.Rows {
		t.Fatalf("fixture has %d rows, reference %d", f.Rows, ref.Rows)
	}
	tab, err := MeasureModel(e, "ranking", f, Config{Replicates: 10})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Metric != MetricNDCG || tab.K != 10 || tab.Gain != metrics.GainExponential || tab.NoRelevant != metrics.NoRelevantSkip {
		t.Fatalf("zero Config gave %v@%d gain %v no-relevant %v", tab.Metric, tab.K, tab.Gain, tab.NoRelevant)
	}
	// scikit-learn 1.2.1 ndcg_score on gains 2^rel − 1, XGBoost 1.7.4 margins.
	if !within(tab.Quality.Value, ref.BaselineScore, 1e-6) {
		t.Errorf("NDCG %.9g, scikit-learn %.9g", tab.Quality.Value, ref.BaselineScore)
	}
	ours, mean, noise := map[string]float64{}, map[string]float64{}, map[string]float64{}
	for _, row := range tab.Features {
		r, ok := ref.Features[row.Feature]
		if !ok {
			t.Fatalf("reference lacks feature %s", row.Feature)
		}
		got := row.Traffic[PermutationDrop].Value
		se := math.Sqrt(r.Std*r.Std/float64(ref.NRepeats) + r.Std*r.Std/float64(tab.Repeats))
		tol := 4*se + 1e-9
		t.Run(row.Feature, func(t *testing.T) {
			if !within(got, r.Mean, tol) {
				t.Errorf("permutation drop %.6g, scikit-learn mean %.6g ± %.3g (std %.3g; %d and %d repeats)", got, r.Mean, tol, r.Std, ref.NRepeats, tab.Repeats)
			}
		})
		ours[row.Feature], mean[row.Feature] = got, r.Mean
		// standard error of ours − scikit-learn for this feature
		noise[row.Feature] = se
	}
	orderAgrees(t, e.FeatureNames, mean, ours, noise)
}

// TestPermutationExpectationMonteCarlo checks the exact permutation
// expectation against its definition estimated the slow way: shuffle the
// column with 2000 random permutations (math/rand/v2 PCG, fixed seed) and
// average the metric. Rescoring is done once up front with
// Ensemble.Margins: row r's margin with the feature set to row s's value,
// for every (r, s), so a shuffle is a lookup. The Monte-Carlo mean must be
// within 4 standard errors of the exact value (common practice for a seeded
// Monte-Carlo check; +1e-12 for features no split uses, where every
// shuffle gives 0). For RMSE the engine takes the root of the expected
// mean squared error (see MetricRMSE), so the comparison is made on the
// mean squared error itself.
func TestPermutationExpectationMonteCarlo(t *testing.T) {
	const repeats = 2000
	for _, tc := range []struct {
		fixture string
		metric  Metric
	}{
		{"binary", MetricLogLoss},
		{"regression", MetricRMSE},
	} {
		t.Run(tc.fixture, func(t *testing.T) {
			e, f := loadFixture(t, tc.fixture)
			tab, err := MeasureModel(e, tc.fixture, f, Config{Metric: tc.metric.String(), Replicates: 10})
			if err != nil {
				t.Fatal(err)
			}
			cols, _ := columnsFor(e, f)
			n := f.Rows
			// the per-row term: log loss, or squared error
			term := func(m, y float64) float64 {
				if tc.metric == MetricLogLoss {
					return metrics.LogLossRow(y, 1/(1+math.Exp(-m)))
				}
				return (m - y) * (m - y)
			}
			full := scoreRows(e, cols, n)
			base := 0.0
			for r, y := range f.Label {
				base += term(full[r], y)
			}
			base /= float64(n)
			rng := rand.New(rand.NewPCG(7, 11))
			perm := make([]int, n)
			loss := make([]float64, n*n) // loss[r*n+s]: row r with row s's value
			col := make([]float64, n)
			m := make([]float64, n)
			for j, name := range e.FeatureNames {
				pc := slices.Clone(cols)
				pc[j] = col
				for s := 0; s < n; s++ {
					for r := range col {
						col[r] = cols[j][s]
					}
					e.Margins(m, pc, n, 1)
					for r, y := range f.Label {
						loss[r*n+s] = term(m[r], y)
					}
				}
				for r := range perm {
					perm[r] = r
				}
				var sum, sumSq float64
				for k := 0; k < repeats; k++ {
					rng.Shuffle(n, func(a, b int) { perm[a], perm[b] = perm[b], perm[a] })
					v := 0.0
					for r, s := range perm {
						v += loss[r*n+s]
					}
					d := v/float64(n) - base
					sum += d
					sumSq += d * d
				}
				want := sum / repeats
				sd := math.Sqrt(math.Max(sumSq/repeats-want*want, 0) * repeats / (repeats - 1))
				se := sd / math.Sqrt(repeats)
				got := tab.Features[j].Traffic[PermutationDrop].Value
				if tc.metric == MetricRMSE {
					// expected MSE increase from the reported RMSE drop
					q := tab.Quality.Value
					got = (got+q)*(got+q) - q*q
				}
				if !within(got, want, 4*se+1e-12) {
					t.Errorf("%s: exact expectation %.9g, Monte-Carlo mean %.9g ± %.3g (4 standard errors)", name, got, want, 4*se)
				} else {
					t.Logf("%s: exact %.6g, Monte-Carlo %.6g, |diff|/se %.2f", name, got, want, math.Abs(got-want)/math.Max(se, 1e-300))
				}
			}
		})
	}
}
