package audit

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// within reports whether got is within tol of want; NaN never passes.
func within(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol
}

func TestPSIWorkedExample(t *testing.T) {
	// PSI = Σ (c_i − b_i) · ln(c_i / b_i) over bins, b_i and c_i the bin
	// shares of the baseline and candidate samples; a share of 0 is raised
	// to the floor 1e-4 (common practice) so that the logarithm is finite.
	cases := []struct {
		name                string
		baseline, candidate []float64
		want                float64
	}{
		{
			// Worked by hand. Counts b = [50, 30, 20, 0], c = [40, 30, 10, 20]
			// (the last bin holds missing values, empty in the baseline).
			// Shares b = [0.5, 0.3, 0.2, 0 → 1e-4], c = [0.4, 0.3, 0.1, 0.2]:
			//   (0.4 − 0.5) · ln(0.4/0.5)     = 0.0223143551
			//   (0.3 − 0.3) · ln(0.3/0.3)     = 0
			//   (0.1 − 0.2) · ln(0.1/0.2)     = 0.0693147181
			//   (0.2 − 1e-4) · ln(0.2/1e-4)   = 1.5194204017
			//   PSI                            = 1.6110494748
			name:      "worked example with an empty baseline bin",
			baseline:  []float64{50, 30, 20, 0},
			candidate: []float64{40, 30, 10, 20},
			want: (0.4-0.5)*math.Log(0.4/0.5) + 0 + (0.1-0.2)*math.Log(0.1/0.2) +
				(0.2-1e-4)*math.Log(0.2/1e-4),
		},
		{
			// Same hand sum written as a decimal, to 1e-10.
			name:      "worked example as a decimal",
			baseline:  []float64{50, 30, 20, 0},
			candidate: []float64{40, 30, 10, 20},
			want:      1.6110494748,
		},
		{
			// b = [0.25]*4, c = [0.4, 0.3, 0.2, 0.1]:
			// 0.0705005444 + 0.0091160778 + 0.0111571776 + 0.1374436098.
			name:      "quarters to a falling ramp (between the warn and fail levels)",
			baseline:  []float64{100, 100, 100, 100},
			candidate: []float64{40, 30, 20, 10},
			want:      0.2282174096,
		},
		{
			// b = [0.25]*4, c = [0.5, 0.3, 0.15, 0.05]:
			// 0.1732867951 + 0.0091160778 + 0.0510825624 + 0.3218875825.
			name:      "quarters to a steep ramp (above the fail level)",
			baseline:  []float64{1, 1, 1, 1},
			candidate: []float64{10, 6, 3, 1},
			want:      0.5553730178,
		},
		{
			// A bin empty in both samples adds (1e-4 − 1e-4) · ln 1 = 0.
			name:      "bin empty in both samples adds nothing",
			baseline:  []float64{3, 0, 1},
			candidate: []float64{3, 0, 1},
			want:      0,
		},
		{
			// Only the shares matter: scaling the counts changes nothing.
			name:      "identical shares at different sample sizes",
			baseline:  []float64{2, 5, 3},
			candidate: []float64{20, 50, 30},
			want:      0,
		},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			b0, c0 := slices.Clone(tc.baseline), slices.Clone(tc.candidate)
			got := PSI(tc.baseline, tc.candidate, 1e-4)
			if !within(got, tc.want, 1e-10) {
				t.Errorf("PSI = %.12f, want %.12f", got, tc.want)
			}
			if !slices.Equal(b0, tc.baseline) || !slices.Equal(c0, tc.candidate) {
				t.Error("PSI modified its inputs")
			}
		})
	}
}

func TestPSIUndefined(t *testing.T) {
	// Documented edge case: NaN when either sample is empty.
	cases := []struct {
		name                string
		baseline, candidate []float64
	}{
		{"empty baseline", []float64{0, 0, 0}, []float64{1, 2, 3}},
		{"empty candidate", []float64{1, 2, 3}, []float64{0, 0, 0}},
		{"no bins", nil, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := PSI(tc.baseline, tc.candidate, 1e-4); !math.IsNaN(got) {
				t.Errorf("PSI = %v, want NaN", got)
			}
		})
	}
}

func TestBinCounts(t *testing.T) {
	// A value v falls in bin i when edges[i-1] <= v < edges[i] (the XGBoost
	// split rule x < t goes left); missing values fill an extra last bin.
	nan := math.NaN()
	cases := []struct {
		name   string
		values []float64
		edges  []float64
		want   []float64
	}{
		{"values on the edges go above them", []float64{0.5, 1, 1.5, 2, 3}, []float64{1, 2}, []float64{1, 2, 2, 0}},
		{"missing values in their own last bin", []float64{nan, 0, nan, 5}, []float64{1, 2}, []float64{1, 0, 1, 2}},
		{"no edges: one value bin and the missing bin", []float64{-1, 4, nan}, nil, []float64{2, 1}},
		{"below the first and above the last edge", []float64{-1e9, 1e9}, []float64{0, 1, 2}, []float64{1, 0, 0, 1, 0}},
		{"no values", nil, []float64{1}, []float64{0, 0, 0}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			in := slices.Clone(tc.values)
			got := binCounts(tc.values, tc.edges)
			if !slices.Equal(got, tc.want) {
				t.Errorf("binCounts = %v, want %v", got, tc.want)
			}
			if !slices.EqualFunc(in, tc.values, func(a, b float64) bool { return a == b || (a != a && b != b) }) {
				t.Error("binCounts modified its input")
			}
		})
	}
}

func TestPSIEdges(t *testing.T) {
	// Edges are model thresholds: all of them when there are at most
	// bins−1, otherwise the threshold nearest to each baseline quantile
	// q/bins (value at sorted index q·n/bins), duplicates merged.
	squares := make([]float64, 100) // i²/10⁴: quantiles 0.0625, 0.25, 0.5625 at q = 1..3 of 4
	for i := range squares {
		squares[i] = float64(i*i) / 1e4
	}
	near := []float64{0.45, 0.46, 0.47, 0.48, 0.49, 0.5}
	many := []float64{0.05, 0.12, 0.2, 0.33, 0.41, 0.6, 0.7, 0.9}
	cases := []struct {
		name       string
		thresholds []float64
		baseline   []float64
		bins       int
		want       []float64
	}{
		{"few thresholds are all kept", []float64{0.25, 0.5, 0.75}, squares, 10, []float64{0.25, 0.5, 0.75}},
		{"exactly bins−1 thresholds are all kept", []float64{0.1, 0.2, 0.3}, squares, 4, []float64{0.1, 0.2, 0.3}},
		// quantile 0.0625 → 0.05 (0.0125 away, 0.12 is 0.0575 away);
		// 0.25 → 0.2 (0.05 away, 0.33 is 0.08 away); 0.5625 → 0.6.
		{"nearest threshold to each quantile", many, squares, 4, []float64{0.05, 0.2, 0.6}},
		// quantiles 0.46, 0.48, 0.49 are all nearest to 0.41 (at most 0.08
		// away; 0.6 is at least 0.11 away): one edge.
		{"quantiles sharing a threshold give one edge", many, near, 4, []float64{0.41}},
		{"quantiles above every threshold take the last", many, []float64{5, 6, 7, 8}, 4, []float64{0.9}},
		{"no baseline values keeps the thresholds", many, nil, 4, many},
		{"no thresholds gives no edges", nil, squares, 10, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			th := slices.Clone(tc.thresholds)
			got := psiEdges(tc.thresholds, tc.baseline, tc.bins)
			if !slices.Equal(got, tc.want) {
				t.Errorf("psiEdges = %v, want %v", got, tc.want)
			}
			if len(got) > max(len(tc.thresholds), tc.bins-1) {
				t.Errorf("%d edges for %d bins", len(got), tc.bins)
			}
			if !slices.Equal(th, tc.thresholds) {
				t.Error("psiEdges modified the thresholds")
			}
			if len(got) > 0 && len(tc.thresholds) > 0 {
				got[0] = -42 // the result must not alias the thresholds
				if tc.thresholds[0] == -42 {
					t.Error("psiEdges returned the caller's slice")
				}
			}
		})
	}
}

// ksReference is ks.json, written by testdata/reference/audit/make_audit_refs.py.
type ksReference struct {
	Source string `json:"source"`
	Cases  []struct {
		Name      string     `json:"name"`
		A         []*float64 `json:"a"`
		B         []*float64 `json:"b"`
		Statistic float64    `json:"statistic"`
	} `json:"cases"`
}

func withNaN(v []*float64) []float64 {
	out := make([]float64, len(v))
	for i, p := range v {
		out[i] = math.NaN()
		if p != nil {
			out[i] = *p
		}
	}
	return out
}

func TestKSAgainstSciPy(t *testing.T) {
	// Reference: scipy.stats.ks_2samp(a, b).statistic, SciPy 1.10.1, on the
	// non-missing values (JSON null = missing, NaN on the Go side).
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "audit", "ks.json"))
	if err != nil {
		t.Fatalf("reference fixture missing (regenerate with make_audit_refs.py): %v", err)
	}
	var ref ksReference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 8 {
		t.Fatalf("ks.json holds %d cases, want at least 8", len(ref.Cases))
	}
	for _, tc := range ref.Cases {
		t.Run(tc.Name, func(t *testing.T) {
			a, bb := withNaN(tc.A), withNaN(tc.B)
			a0, b0 := slices.Clone(a), slices.Clone(bb)
			got := KS(a, bb)
			if !within(got, tc.Statistic, 1e-12) {
				t.Errorf("KS = %.17g, SciPy 1.10.1 ks_2samp %.17g", got, tc.Statistic)
			}
			if rev := KS(bb, a); !within(rev, tc.Statistic, 1e-12) {
				t.Errorf("KS(b, a) = %.17g, want the same %.17g", rev, tc.Statistic)
			}
			same := func(x, y float64) bool { return x == y || (x != x && y != y) }
			if !slices.EqualFunc(a, a0, same) || !slices.EqualFunc(bb, b0, same) {
				t.Error("KS modified its inputs")
			}
		})
	}
}

func TestKSUndefined(t *testing.T) {
	// Documented edge case: NaN when either sample has no non-missing value.
	nan := math.NaN()
	cases := []struct {
		name string
		a, b []float64
	}{
		{"empty a", nil, []float64{1}},
		{"empty b", []float64{1}, nil},
		{"all missing", []float64{nan, nan}, []float64{1, 2}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := KS(tc.a, tc.b); !math.IsNaN(got) {
				t.Errorf("KS = %v, want NaN", got)
			}
		})
	}
}
