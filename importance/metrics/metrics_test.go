package metrics

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// pairwiseAUC is the Mann–Whitney definition written out (Mann and Whitney
// 1947; Hanley and McNeil 1982): the weighted share of (positive, negative)
// pairs in which the positive scores higher, ties counting one half. O(n²).
func pairwiseAUC(scores, labels, weights []float64) float64 {
	var num, den float64
	for i := range scores {
		if labels[i] != 1 {
			continue
		}
		for j := range scores {
			if labels[j] != 0 {
				continue
			}
			w := 1.0
			if weights != nil {
				w = weights[i] * weights[j]
			}
			den += w
			switch {
			case scores[i] > scores[j]:
				num += w
			case scores[i] == scores[j]:
				num += w / 2
			}
		}
	}
	return num / den
}

func randomCase(rng *rand.Rand, n, distinct int) (scores, labels, weights []float64) {
	scores = make([]float64, n)
	labels = make([]float64, n)
	weights = make([]float64, n)
	for i := range scores {
		// few distinct values force ties; mixed signs and zeros of both signs
		// exercise the sort key
		v := float64(rng.IntN(distinct)) - float64(distinct)/2
		if v == 0 && rng.IntN(2) == 0 {
			v = math.Copysign(0, -1)
		}
		scores[i] = v * math.Pow(10, float64(rng.IntN(5)-2))
		if rng.Float64() < 0.4 {
			labels[i] = 1
		}
		weights[i] = float64(rng.IntN(4))
	}
	labels[0], labels[n-1] = 1, 0
	return
}

func TestAUCMatchesPairwiseDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	var r Ranking
	for _, tc := range []struct {
		name        string
		n, distinct int
	}{
		{"small-insertion-sort", 20, 5},
		{"radix-many-ties", 300, 7},
		{"radix-few-ties", 1000, 1 << 20},
		{"radix-reused-smaller", 90, 30},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s, y, w := randomCase(rng, tc.n, tc.distinct)
			if err := r.Rank(s, y); err != nil {
				t.Fatal(err)
			}
			counts := make([]uint8, len(w))
			for i, v := range w {
				counts[i] = uint8(v)
			}
			// the pairwise definition (Mann–Whitney); 1e-12 allows for the
			// different summation order
			for _, c := range []struct {
				name string
				got  float64
				want float64
			}{
				{"unweighted", r.AUC(nil), pairwiseAUC(s, y, nil)},
				{"weighted", r.AUC(w), pairwiseAUC(s, y, w)},
				{"counts", r.AUCCounts(counts), pairwiseAUC(s, y, w)},
				{"one-shot", AUC(s, y, w), pairwiseAUC(s, y, w)},
			} {
				if !near(c.got, c.want, 1e-12) {
					t.Errorf("%s: AUC = %.17g, want %.17g", c.name, c.got, c.want)
				}
			}
		})
	}
}

func TestRankErrors(t *testing.T) {
	for _, tc := range []struct {
		name   string
		scores []float64
		labels []float64
		target error
		row    string
	}{
		{"nan-score", []float64{0.1, math.NaN(), 0.3}, []float64{0, 1, 0}, ErrScore, "row 1"},
		{"label-two", []float64{0.1, 0.2, 0.3}, []float64{0, 1, 2}, ErrLabel, "row 2"},
		{"label-nan", []float64{0.1, 0.2, 0.3}, []float64{math.NaN(), 1, 0}, ErrLabel, "row 0"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var r Ranking
			err := r.Rank(tc.scores, tc.labels)
			if !errors.Is(err, tc.target) || !strings.Contains(err.Error(), tc.row) {
				t.Fatalf("Rank error = %v, want %v naming %s", err, tc.target, tc.row)
			}
			if r.Len() != 0 {
				t.Errorf("Len after error = %d, want 0", r.Len())
			}
			if got := AUC(tc.scores, tc.labels, nil); !math.IsNaN(got) {
				t.Errorf("AUC = %v, want NaN", got)
			}
		})
	}
}

func TestUndefinedIsNaN(t *testing.T) {
	// common practice: an undefined statistic is NaN, never 0
	for _, tc := range []struct {
		name string
		got  float64
	}{
		{"AUC/empty", AUC(nil, nil, nil)},
		{"AUC/zero-weights", AUC([]float64{1, 2}, []float64{0, 1}, []float64{0, 0})},
		{"AUC/positives-weighted-out", AUC([]float64{1, 2}, []float64{0, 1}, []float64{1, 0})},
		{"NDCG/empty", NDCG(nil, nil, 3, GainLinear, nil)},
		{"NDCG/negative-relevance", NDCG([]float64{1, 2}, []float64{-1, 2}, 0, GainLinear, nil)},
		{"NDCG/nan-relevance", NDCG([]float64{1, 2}, []float64{math.NaN(), 2}, 0, GainLinear, nil)},
		{"MeanNDCG/empty", MeanNDCG(nil, nil, NoRelevantZero)},
		{"MeanNDCG/zero-weight", MeanNDCG([]float64{0.5}, []float64{0}, NoRelevantZero)},
		{"LogLossRow/nan-prob", LogLossRow(1, math.NaN())},
		{"LogLossRow/label-two", LogLossRow(2, 0.5)},
		{"LogLossRow/label-nan", LogLossRow(math.NaN(), 0.5)},
		{"LogLoss/empty", LogLoss(nil, nil, nil)},
		{"LogLoss/zero-weight", LogLoss([]float64{1}, []float64{0.5}, []float64{0})},
		{"MulticlassLogLossRow/fractional-label", MulticlassLogLossRow(0.5, []float64{0.5, 0.5})},
		{"MulticlassLogLossRow/label-out-of-range", MulticlassLogLossRow(2, []float64{0.5, 0.5})},
		{"MulticlassLogLossRow/nan-prob", MulticlassLogLossRow(0, []float64{0.5, math.NaN()})},
		{"MulticlassLogLossRow/empty", MulticlassLogLossRow(0, nil)},
		{"MulticlassLogLoss/empty", MulticlassLogLoss(nil, nil, 3, nil)},
		{"RMSE/empty", RMSE(nil, nil, nil)},
		{"RMSE/nan", RMSE([]float64{1, math.NaN()}, []float64{1, 2}, nil)},
		{"MeanAbsDelta/empty", MeanAbsDelta(nil, nil, nil)},
		{"MeanAbsDelta/zero-weight", MeanAbsDelta([]float64{1}, []float64{2}, []float64{0})},
		{"WeightedMean/empty", WeightedMean(nil, nil)},
		{"WeightedMean/zero-weight", WeightedMean([]float64{1}, []float64{0})},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if !math.IsNaN(tc.got) {
				t.Errorf("got %v, want NaN", tc.got)
			}
		})
	}
}

func TestNDCGNaNScoreRanksLast(t *testing.T) {
	// documented rule: a NaN score ranks as −Inf
	labels := []float64{3, 0, 1}
	a := NDCG([]float64{math.NaN(), 0.5, 0.2}, labels, 0, GainExponential, nil)
	b := NDCG([]float64{math.Inf(-1), 0.5, 0.2}, labels, 0, GainExponential, nil)
	if !(a == b) {
		t.Errorf("NaN score: NDCG = %v, −Inf score: %v; want equal", a, b)
	}
}

func TestNDCGHandExamples(t *testing.T) {
	// Worked by hand from the definition (Järvelin and Kekäläinen 2002):
	// scores (0.1, 0.9, 0.5) put labels (3, 0, 2) in the order (0, 2, 3);
	// with linear gain DCG = 0 + 2/log2(3) + 3/log2(4), ideal 3 + 2/log2(3).
	dcg := 2/math.Log2(3) + 3/math.Log2(4)
	ideal := 3 + 2/math.Log2(3)
	for _, tc := range []struct {
		name   string
		scores []float64
		labels []float64
		k      int
		gain   Gain
		want   float64
	}{
		{"linear-all", []float64{0.1, 0.9, 0.5}, []float64{3, 0, 2}, 0, GainLinear, dcg / ideal},
		{"linear-k1", []float64{0.1, 0.9, 0.5}, []float64{3, 0, 2}, 1, GainLinear, 0},
		{"k-above-size", []float64{0.1, 0.9, 0.5}, []float64{3, 0, 2}, 10, GainLinear, dcg / ideal},
		// exponential: gains (0, 3, 7) in order → DCG 3/log2(3)+7/2, ideal 7+3/log2(3)
		{"exponential-all", []float64{0.1, 0.9, 0.5}, []float64{3, 0, 2}, 0, GainExponential,
			(3/math.Log2(3) + 7.0/2) / (7 + 3/math.Log2(3))},
		// two tied items share mean gain 1.5 at positions 1 and 2
		{"tie-k1", []float64{1, 1}, []float64{3, 0}, 1, GainLinear, 1.5 / 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := NDCG(tc.scores, tc.labels, tc.k, tc.gain, nil); !near(got, tc.want, 1e-15) {
				t.Errorf("NDCG = %.17g, want %.17g", got, tc.want)
			}
		})
	}
}

func TestChecks(t *testing.T) {
	for _, tc := range []struct {
		name   string
		err    error
		target error
		row    string
	}{
		{"relevance-ok", CheckRelevance([]float64{0, 1, 2.5}), nil, ""},
		{"relevance-negative", CheckRelevance([]float64{0, -1}), ErrLabel, "row 1"},
		{"relevance-nan", CheckRelevance([]float64{math.NaN()}), ErrLabel, "row 0"},
		{"relevance-inf", CheckRelevance([]float64{1, 2, math.Inf(1)}), ErrLabel, "row 2"},
		{"binary-ok", CheckBinary([]float64{0, 1, 1}), nil, ""},
		{"binary-half", CheckBinary([]float64{0, 0.5}), ErrLabel, "row 1"},
		{"classes-ok", CheckClasses([]float64{0, 2, 1}, 3), nil, ""},
		{"classes-out-of-range", CheckClasses([]float64{0, 3}, 3), ErrLabel, "row 1"},
		{"classes-fraction", CheckClasses([]float64{1.5}, 3), ErrLabel, "row 0"},
		{"weights-ok", CheckWeights([]float64{0, 2.5}), nil, ""},
		{"weights-nil", CheckWeights(nil), nil, ""},
		{"weights-negative", CheckWeights([]float64{1, -0.5}), ErrWeight, "row 1"},
		{"weights-inf", CheckWeights([]float64{math.Inf(1)}), ErrWeight, "row 0"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.target == nil {
				if tc.err != nil {
					t.Fatalf("error = %v, want nil", tc.err)
				}
				return
			}
			if !errors.Is(tc.err, tc.target) || !strings.Contains(tc.err.Error(), tc.row) {
				t.Fatalf("error = %v, want %v naming %s", tc.err, tc.target, tc.row)
			}
		})
	}
}

func TestEnumStrings(t *testing.T) {
	for _, tc := range []struct {
		got, want string
	}{
		{GainExponential.String(), "exponential"},
		{GainLinear.String(), "linear"},
		{Gain(9).String(), "Gain(9)"},
		{NoRelevantSkip.String(), "skip"},
		{NoRelevantZero.String(), "zero"},
		{NoRelevant(7).String(), "NoRelevant(7)"},
	} {
		t.Run(tc.want, func(t *testing.T) {
			if tc.got != tc.want {
				t.Errorf("String() = %q, want %q", tc.got, tc.want)
			}
		})
	}
	t.Run("unknown-gain-panics", func(t *testing.T) {
		defer func() {
			if r := recover(); r == nil || !strings.HasPrefix(r.(string), "metrics: ") {
				t.Errorf("panic = %v, want a metrics: message", r)
			}
		}()
		Gain(9).Of(1)
	})
}

func TestInputsNotModified(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	s, y, w := randomCase(rng, 200, 9)
	s0, y0, w0 := slices.Clone(s), slices.Clone(y), slices.Clone(w)
	rel := make([]float64, len(y))
	for i := range rel {
		rel[i] = float64(rng.IntN(4))
	}
	rel0 := slices.Clone(rel)
	AUC(s, y, w)
	NDCG(s, rel, 10, GainExponential, nil)
	LogLoss(y, w, nil)
	RMSE(s, rel, w)
	MeanAbsDelta(s, rel, w)
	MeanNDCG(s, w, NoRelevantSkip)
	for _, c := range []struct {
		name      string
		got, want []float64
	}{{"scores", s, s0}, {"labels", y, y0}, {"weights", w, w0}, {"relevance", rel, rel0}} {
		if !slices.EqualFunc(c.got, c.want, func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }) {
			t.Errorf("%s were modified", c.name)
		}
	}
}

func TestNoAllocationsWithScratch(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	s, y, w := randomCase(rng, 5000, 1<<16)
	var r Ranking
	if err := r.Rank(s, y); err != nil {
		t.Fatal(err)
	}
	counts := make([]uint8, len(w))
	var scratch NDCGScratch
	group, rel := s[:40], w[:40]
	NDCG(group, rel, 10, GainExponential, &scratch)
	for _, tc := range []struct {
		name string
		fn   func()
	}{
		{"Ranking.Rank", func() { _ = r.Rank(s, y) }},
		{"Ranking.AUC", func() { r.AUC(w) }},
		{"Ranking.AUCCounts", func() { r.AUCCounts(counts) }},
		{"NDCG", func() { NDCG(group, rel, 10, GainExponential, &scratch) }},
		{"LogLoss", func() { LogLoss(y, y, w) }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if a := testing.AllocsPerRun(20, tc.fn); a != 0 {
				t.Errorf("%v allocations per call, want 0", a)
			}
		})
	}
}

// FuzzAUC checks the radix-sorted AUC against the pairwise definition on
// arbitrary small inputs: each byte pair is a score code and a label bit.
func FuzzAUC(f *testing.F) {
	f.Add([]byte{1, 0, 2, 1, 2, 0, 3, 1})
	f.Add([]byte{5, 1, 5, 0, 5, 1, 5, 0})
	f.Add(make([]byte, 200))
	f.Fuzz(func(t *testing.T, data []byte) {
		n := len(data) / 2
		if n < 2 || n > 400 {
			return
		}
		s := make([]float64, n)
		y := make([]float64, n)
		w := make([]float64, n)
		for i := 0; i < n; i++ {
			s[i] = float64(int8(data[2*i])) / 7
			y[i] = float64(data[2*i+1] & 1)
			w[i] = float64(data[2*i+1] >> 6)
		}
		for _, weights := range [][]float64{nil, w} {
			got := AUC(s, y, weights)
			want := pairwiseAUC(s, y, weights)
			if math.IsNaN(want) {
				if !math.IsNaN(got) {
					t.Fatalf("AUC = %v, want NaN", got)
				}
				continue
			}
			if !near(got, want, 1e-12) {
				t.Fatalf("AUC = %.17g, pairwise %.17g", got, want)
			}
		}
	})
}

// FuzzNDCG checks invariants: the value is NaN or in [0, 1], and does not
// depend on the order in which the group's items are given.
func FuzzNDCG(f *testing.F) {
	f.Add([]byte{3, 0, 2, 1, 0, 2, 9, 4}, 3)
	f.Add([]byte{1, 1, 1, 1}, 0)
	f.Add([]byte{0, 0, 0, 0, 0, 0}, 2)
	f.Fuzz(func(t *testing.T, data []byte, k int) {
		n := len(data) / 2
		if n == 0 || n > 200 {
			return
		}
		s := make([]float64, n)
		y := make([]float64, n)
		for i := 0; i < n; i++ {
			s[i] = float64(data[2*i] % 16)
			y[i] = float64(data[2*i+1] % 5)
		}
		for _, gain := range []Gain{GainLinear, GainExponential} {
			v := NDCG(s, y, k, gain, nil)
			if !math.IsNaN(v) && !(v >= 0 && v <= 1+1e-12) {
				t.Fatalf("NDCG = %v outside [0, 1]", v)
			}
			slices.Reverse(s)
			slices.Reverse(y)
			r := NDCG(s, y, k, gain, nil)
			if math.IsNaN(v) != math.IsNaN(r) || (!math.IsNaN(v) && !near(v, r, 1e-12)) {
				t.Fatalf("NDCG depends on input order: %v vs %v", v, r)
			}
		}
	})
}
