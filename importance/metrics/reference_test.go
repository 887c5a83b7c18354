package metrics

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// The reference values come from testdata/reference/make_reference.py
// (scikit-learn 1.2.1, SciPy 1.10.1, numpy 1.24); see the README there.
const referenceFile = "../../testdata/reference/metrics.json"

type ndcgGroup struct {
	Name   string    `json:"name"`
	Labels []float64 `json:"labels"`
	Scores []float64 `json:"scores"`
	Cases  []struct {
		K           int      `json:"k"`
		Linear      float64  `json:"linear"`
		Exponential *float64 `json:"exponential"`
	} `json:"cases"`
}

type reference struct {
	Versions map[string]string `json:"versions"`
	NDCG     struct {
		Groups      []ndcgGroup `json:"groups"`
		SingleItems []struct {
			Label       float64 `json:"label"`
			Score       float64 `json:"score"`
			Linear      float64 `json:"linear"`
			Exponential float64 `json:"exponential"`
		} `json:"single_items"`
		NoRelevant struct {
			Labels  []float64 `json:"labels"`
			Scores  []float64 `json:"scores"`
			Sklearn float64   `json:"sklearn"`
		} `json:"no_relevant"`
		Batch struct {
			Labels  [][]float64 `json:"labels"`
			Scores  [][]float64 `json:"scores"`
			Weights []float64   `json:"weights"`
			Cases   []struct {
				K          int     `json:"k"`
				Weighted   float64 `json:"weighted"`
				Unweighted float64 `json:"unweighted"`
			} `json:"cases"`
		} `json:"batch"`
	} `json:"ndcg"`
	AUC []struct {
		Name    string    `json:"name"`
		Scores  []float64 `json:"scores"`
		Labels  []float64 `json:"labels"`
		Weights []float64 `json:"weights"`
		AUC     *float64  `json:"auc"`
		Note    string    `json:"note"`
	} `json:"auc"`
	LogLoss struct {
		Binary struct {
			Labels       []float64 `json:"labels"`
			Probs        []float64 `json:"probs"`
			Weights      []float64 `json:"weights"`
			RealWeights  []float64 `json:"real_weights"`
			PerRow       []float64 `json:"per_row"`
			Mean         float64   `json:"mean"`
			Weighted     float64   `json:"weighted"`
			RealWeighted float64   `json:"real_weighted"`
			Eps          float64   `json:"eps"`
		} `json:"binary"`
		Multiclass struct {
			Classes  int       `json:"classes"`
			Labels   []float64 `json:"labels"`
			Probs    []float64 `json:"probs"`
			Weights  []float64 `json:"weights"`
			PerRow   []float64 `json:"per_row"`
			Mean     float64   `json:"mean"`
			Weighted float64   `json:"weighted"`
		} `json:"multiclass"`
	} `json:"logloss"`
	Regression struct {
		Labels               []float64 `json:"labels"`
		Predictions          []float64 `json:"predictions"`
		Weights              []float64 `json:"weights"`
		RMSE                 float64   `json:"rmse"`
		RMSEWeighted         float64   `json:"rmse_weighted"`
		MeanAbsDelta         float64   `json:"mean_abs_delta"`
		MeanAbsDeltaWeighted float64   `json:"mean_abs_delta_weighted"`
	} `json:"regression"`
}

func loadReference(t *testing.T) *reference {
	t.Helper()
	raw, err := os.ReadFile(filepath.FromSlash(referenceFile))
	if err != nil {
		t.Fatalf("reference fixture missing (regenerate with testdata/reference/make_reference.py): %v", err)
	}
	var ref reference
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatalf("%s: %v", referenceFile, err)
	}
	if ref.Versions["scikit-learn"] != "1.2.1" {
		t.Fatalf("%s: made with scikit-learn %q, want 1.2.1", referenceFile, ref.Versions["scikit-learn"])
	}
	return &ref
}

// near reports whether got is within tol of want, relative to |want| when
// |want| > 1 and absolute otherwise. NaN never passes.
func near(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Max(1, math.Abs(want))
}

// relNear reports whether got is within tol·|want| of want: for values far
// below 1, such as the loss of a confident correct row. NaN never passes.
func relNear(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Abs(want)
}

// tolReference is the tolerance against the Python references: the sums run
// in a different order (numpy pairwise summation, sklearn's cumulative
// discounts), so a few ulps of each term differ.
const tolReference = 1e-12

func TestNDCGReference(t *testing.T) {
	ref := loadReference(t)
	var scratch NDCGScratch
	for _, g := range ref.NDCG.Groups {
		for _, c := range g.Cases {
			t.Run(fmt.Sprintf("%s/k=%d", g.Name, c.K), func(t *testing.T) {
				// scikit-learn 1.2.1 ndcg_score (linear gain, ignore_ties=False)
				got := NDCG(g.Scores, g.Labels, c.K, GainLinear, &scratch)
				if !near(got, c.Linear, tolReference) {
					t.Errorf("linear gain: NDCG = %.17g, want %.17g", got, c.Linear)
				}
				// exponential gain: the written-out formula exponential_ndcg in
				// make_reference.py (Järvelin and Kekäläinen 2002 with the
				// 2^rel−1 gain of Burges et al. 2005), itself checked there
				// against scikit-learn 1.2.1 ndcg_score on 2^rel−1
				if c.Exponential == nil {
					t.Fatalf("fixture has no exponential value")
				}
				got = NDCG(g.Scores, g.Labels, c.K, GainExponential, &scratch)
				if !near(got, *c.Exponential, tolReference) {
					t.Errorf("exponential gain: NDCG = %.17g, want %.17g", got, *c.Exponential)
				}
			})
		}
	}
}

func TestNDCGSingleItem(t *testing.T) {
	ref := loadReference(t)
	for _, c := range ref.NDCG.SingleItems {
		t.Run(fmt.Sprintf("label=%g", c.Label), func(t *testing.T) {
			// scikit-learn 1.2.1 ndcg_score refuses one item; its value for the
			// item padded with an irrelevant item scored lower (same DCG and
			// ideal DCG) is the reference
			for _, k := range []int{0, 1, 5} {
				if got := NDCG([]float64{c.Score}, []float64{c.Label}, k, GainLinear, nil); !near(got, c.Linear, tolReference) {
					t.Errorf("k=%d linear: NDCG = %v, want %v", k, got, c.Linear)
				}
				if got := NDCG([]float64{c.Score}, []float64{c.Label}, k, GainExponential, nil); !near(got, c.Exponential, tolReference) {
					t.Errorf("k=%d exponential: NDCG = %v, want %v", k, got, c.Exponential)
				}
			}
		})
	}
	t.Run("irrelevant", func(t *testing.T) {
		// a lone irrelevant item has ideal DCG 0: undefined (our convention)
		if got := NDCG([]float64{1}, []float64{0}, 0, GainLinear, nil); !math.IsNaN(got) {
			t.Errorf("NDCG = %v, want NaN", got)
		}
	})
}

func TestNDCGNoRelevant(t *testing.T) {
	ref := loadReference(t)
	nr := ref.NDCG.NoRelevant
	for _, gain := range []Gain{GainLinear, GainExponential} {
		t.Run(gain.String(), func(t *testing.T) {
			v := NDCG(nr.Scores, nr.Labels, 0, gain, nil)
			if !math.IsNaN(v) {
				t.Fatalf("NDCG = %v, want NaN (undefined)", v)
			}
			// scikit-learn 1.2.1 ndcg_score scores the group 0
			if got := MeanNDCG([]float64{v}, nil, NoRelevantZero); !near(got, nr.Sklearn, tolReference) {
				t.Errorf("MeanNDCG zero policy = %v, want %v", got, nr.Sklearn)
			}
			// skipped: nothing is left to average (our convention)
			if got := MeanNDCG([]float64{v}, nil, NoRelevantSkip); !math.IsNaN(got) {
				t.Errorf("MeanNDCG skip policy = %v, want NaN", got)
			}
		})
	}
}

func TestMeanNDCGBatch(t *testing.T) {
	ref := loadReference(t)
	b := ref.NDCG.Batch
	var scratch NDCGScratch
	for _, c := range b.Cases {
		t.Run(fmt.Sprintf("k=%d", c.K), func(t *testing.T) {
			values := make([]float64, len(b.Labels))
			var total, skippedWeight float64
			for i := range b.Labels {
				values[i] = NDCG(b.Scores[i], b.Labels[i], c.K, GainLinear, &scratch)
				total += b.Weights[i]
				if math.IsNaN(values[i]) {
					skippedWeight += b.Weights[i]
				}
			}
			// scikit-learn 1.2.1 ndcg_score over equal-size groups, with and
			// without sample_weight; the group without a relevant item counts 0
			if got := MeanNDCG(values, b.Weights, NoRelevantZero); !near(got, c.Weighted, tolReference) {
				t.Errorf("weighted zero policy = %.17g, want %.17g", got, c.Weighted)
			}
			if got := MeanNDCG(values, nil, NoRelevantZero); !near(got, c.Unweighted, tolReference) {
				t.Errorf("unweighted zero policy = %.17g, want %.17g", got, c.Unweighted)
			}
			// skip policy: the same weighted sum over the remaining weight,
			// derived from the scikit-learn value (the skipped group adds 0)
			if skippedWeight == 0 {
				t.Fatalf("fixture batch should hold a group without a relevant item")
			}
			want := c.Weighted * total / (total - skippedWeight)
			if got := MeanNDCG(values, b.Weights, NoRelevantSkip); !near(got, want, tolReference) {
				t.Errorf("weighted skip policy = %.17g, want %.17g", got, want)
			}
		})
	}
}

func TestAUCReference(t *testing.T) {
	ref := loadReference(t)
	var r Ranking
	for _, c := range ref.AUC {
		t.Run(c.Name, func(t *testing.T) {
			// scikit-learn 1.2.1 roc_auc_score (with sample_weight when given);
			// a null reference means roc_auc_score raises (one class), and we
			// return NaN
			want := math.NaN()
			if c.AUC != nil {
				want = *c.AUC
			}
			got := AUC(c.Scores, c.Labels, c.Weights)
			if c.AUC == nil {
				if !math.IsNaN(got) {
					t.Fatalf("AUC = %v, want NaN (%s)", got, c.Note)
				}
				return
			}
			if !near(got, want, tolReference) {
				t.Errorf("AUC = %.17g, want %.17g", got, want)
			}
			if err := r.Rank(c.Scores, c.Labels); err != nil {
				t.Fatal(err)
			}
			if got := r.AUC(c.Weights); !near(got, want, tolReference) {
				t.Errorf("Ranking.AUC = %.17g, want %.17g", got, want)
			}
			if counts, ok := integerCounts(c.Weights); ok {
				if got := r.AUCCounts(counts); !near(got, want, tolReference) {
					t.Errorf("Ranking.AUCCounts = %.17g, want %.17g", got, want)
				}
			}
		})
	}
}

// integerCounts converts weights to uint8 counts when they are all small
// integers (nil weights become all ones).
func integerCounts(w []float64) ([]uint8, bool) {
	if w == nil {
		return nil, false
	}
	out := make([]uint8, len(w))
	for i, v := range w {
		if v != math.Trunc(v) || v < 0 || v > 255 {
			return nil, false
		}
		out[i] = uint8(v)
	}
	return out, true
}

func TestLogLossReference(t *testing.T) {
	ref := loadReference(t)
	b := ref.LogLoss.Binary
	if b.Eps != LogLossEpsilon {
		t.Fatalf("scikit-learn 1.2.1 default eps = %v, LogLossEpsilon = %v", b.Eps, LogLossEpsilon)
	}
	t.Run("binary/rows", func(t *testing.T) {
		// scikit-learn 1.2.1 log_loss on each row alone (labels=[0, 1]),
		// including probabilities 0, 1 and beyond the clip bound
		for i := range b.Labels {
			if got := LogLossRow(b.Labels[i], b.Probs[i]); !relNear(got, b.PerRow[i], tolReference) {
				t.Errorf("row %d: LogLossRow(%v, %v) = %.17g, want %.17g", i, b.Labels[i], b.Probs[i], got, b.PerRow[i])
			}
		}
	})
	for _, c := range []struct {
		name    string
		weights []float64
		want    float64
	}{
		{"binary/mean", nil, b.Mean},                           // scikit-learn 1.2.1 log_loss
		{"binary/poisson-weights", b.Weights, b.Weighted},      // log_loss with integer sample_weight
		{"binary/real-weights", b.RealWeights, b.RealWeighted}, // log_loss with real sample_weight
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := LogLoss(b.Labels, b.Probs, c.weights); !near(got, c.want, tolReference) {
				t.Errorf("LogLoss = %.17g, want %.17g", got, c.want)
			}
		})
	}
	m := ref.LogLoss.Multiclass
	t.Run("multiclass/rows", func(t *testing.T) {
		// scikit-learn 1.2.1 log_loss per row, labels = 0..3; rows that do not
		// sum to 1 are renormalised after clipping
		for i := range m.Labels {
			row := m.Probs[i*m.Classes : (i+1)*m.Classes]
			if got := MulticlassLogLossRow(m.Labels[i], row); !relNear(got, m.PerRow[i], tolReference) {
				t.Errorf("row %d: MulticlassLogLossRow = %.17g, want %.17g", i, got, m.PerRow[i])
			}
		}
	})
	for _, c := range []struct {
		name    string
		weights []float64
		want    float64
	}{
		{"multiclass/mean", nil, m.Mean},                      // scikit-learn 1.2.1 log_loss
		{"multiclass/poisson-weights", m.Weights, m.Weighted}, // with sample_weight
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := MulticlassLogLoss(m.Labels, m.Probs, m.Classes, c.weights); !near(got, c.want, tolReference) {
				t.Errorf("MulticlassLogLoss = %.17g, want %.17g", got, c.want)
			}
		})
	}
}

func TestRegressionReference(t *testing.T) {
	ref := loadReference(t)
	g := ref.Regression
	for _, c := range []struct {
		name string
		fn   func(a, b, w []float64) float64
		w    []float64
		want float64
	}{
		{"rmse", RMSE, nil, g.RMSE},                                                  // scikit-learn 1.2.1 mean_squared_error(squared=False)
		{"rmse-weighted", RMSE, g.Weights, g.RMSEWeighted},                           // same, with sample_weight
		{"mean-abs-delta", MeanAbsDelta, nil, g.MeanAbsDelta},                        // scikit-learn 1.2.1 mean_absolute_error
		{"mean-abs-delta-weighted", MeanAbsDelta, g.Weights, g.MeanAbsDeltaWeighted}, // same, with sample_weight
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := c.fn(g.Predictions, g.Labels, c.w); !near(got, c.want, tolReference) {
				t.Errorf("got %.17g, want %.17g", got, c.want)
			}
		})
	}
}
