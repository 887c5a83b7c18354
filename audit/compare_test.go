package audit_test

import (
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strings"
	"testing"

	"splitledger/audit"
	"splitledger/importance"
	"splitledger/importance/bootstrap"
	"splitledger/importance/forest"
	"splitledger/importance/frame"
)

// The flag rules are checked on hand-made worlds: invented features with
// known effects on the label, hand-made stump ensembles (XGBoost split rule
// x < t), and traffic drawn from fixed seeds. Each world plants the faults a
// rule must catch next to stable features it must leave alone.
//
// The size of the planted effects follows from the squared-error permutation
// expectation: for a label term k·1[x ≥ t] and a model term c·1[x ≥ t] on an
// independent feature with P(x ≥ t) = p, shuffling the column raises the
// mean squared error by 2·k·c·p·(1−p) (expand E[(k·I − c·I′)²] with I′
// independent of I). So a model coefficient ten times smaller is a share
// about ten times smaller, far beyond the collapse and surge factor 3.
//
// Every expectation uses DefaultPolicy's levels (policy.go): the factor 3,
// the PSI levels 0.10 and 0.25, the 99.5% constant share, the 20-point
// missing rise and the 0.05 major share are common practice, not a
// published standard.

const rows = 4000

// split is one stump: left leaf 0, right leaf effect (x ≥ threshold goes
// right). defaultCover is the training cover share of the branch missing
// values take (0: an even split).
type split struct {
	feature      string
	threshold    float64
	effect       float64
	gain         float64
	defaultLeft  bool
	defaultCover float64
}

// model builds a regression ensemble of stumps over the named features.
func model(t *testing.T, names []string, splits ...split) *forest.Ensemble {
	t.Helper()
	e := &forest.Ensemble{
		Format: "hand-made", Objective: "reg:squarederror",
		Task: forest.TaskRegression, Link: forest.LinkIdentity, Rule: forest.LessThanFloat32,
		NumClass: 1, BaseMargin: []float64{0}, FeatureNames: slices.Clone(names),
	}
	for _, s := range splits {
		j := slices.Index(names, s.feature)
		if j < 0 {
			t.Fatalf("split on %q, not among %v", s.feature, names)
		}
		dc := s.defaultCover
		if dc == 0 {
			dc = 0.5
		}
		covL, covR := 100*(1-dc), 100*dc
		var fl uint8
		if s.defaultLeft {
			fl = forest.FlagDefaultLeft
			covL, covR = covR, covL
		}
		leaf := forest.Node{Feature: -1, Left: -1, Right: -1, CatSet: -1, Flags: forest.FlagLeaf}
		e.Trees = append(e.Trees, forest.Tree{
			Nodes: []forest.Node{
				{Threshold: s.threshold, Feature: int32(j), Left: 1, Right: 2, CatSet: -1, Flags: fl},
				leaf, leaf,
			},
			Value: []float64{0, 0, s.effect},
			Gain:  []float64{s.gain, 0, 0},
			Cover: []float64{covL + covR, covL, covR},
		})
	}
	if err := e.Validate(0); err != nil {
		t.Fatalf("hand-made ensemble: %v", err)
	}
	e.Index()
	return e
}

// col describes one traffic column: its true value (uniform on [0, 1) when
// value is nil), its effect on the label (label += effect when the true
// value ≥ 0.5), and which rows arrive missing (the true value still drives
// the label, as with a broken producer).
type col struct {
	name    string
	value   func(r *rand.Rand, row int) float64
	effect  float64
	missing func(row int) bool
}

// sample draws a labelled traffic sample: label = Σ effects + N(0, 0.5²).
func sample(seed uint64, cols ...col) *frame.Frame {
	r := rand.New(rand.NewPCG(seed, 0xa0d17))
	f := &frame.Frame{Rows: rows, Label: make([]float64, rows), SampleFraction: 1, TotalRows: rows}
	for _, c := range cols {
		f.Names = append(f.Names, c.name)
		f.Columns = append(f.Columns, make([]float64, rows))
	}
	for i := 0; i < rows; i++ {
		y := 0.5 * r.NormFloat64()
		for j, c := range cols {
			v := r.Float64()
			if c.value != nil {
				v = c.value(r, i)
			}
			if v >= 0.5 {
				y += c.effect
			}
			if c.missing != nil && c.missing(i) {
				v = math.NaN()
			}
			f.Columns[j][i] = v
		}
		f.Label[i] = y
	}
	return f
}

// missingPercent makes exactly pct% of the rows missing.
func missingPercent(pct int) func(int) bool {
	return func(row int) bool { return row%100 < pct }
}

// quarters fills the four bins [0, .25), [.25, .5), [.5, .75), [.75, 1)
// with exactly the given shares of the rows (uniform inside a bin).
func quarters(shares ...float64) func(*rand.Rand, int) float64 {
	return func(r *rand.Rand, row int) float64 {
		acc := 0.0
		for k, s := range shares {
			acc += s
			if float64(row) < acc*rows-1e-9 {
				return 0.25*float64(k) + 0.01 + 0.23*r.Float64()
			}
		}
		panic("quarters: shares do not sum to 1")
	}
}

// mostly holds value v in per1000 rows out of every 1000, uniform [0, 1)
// elsewhere.
func mostly(v float64, per1000 int) func(*rand.Rand, int) float64 {
	return func(r *rand.Rand, row int) float64 {
		if row%1000 < per1000 {
			return v
		}
		return r.Float64()
	}
}

func between(lo, hi float64) func(*rand.Rand, int) float64 {
	return func(r *rand.Rand, _ int) float64 { return lo + (hi-lo)*r.Float64() }
}

// world is one comparison's inputs before measurement.
type world struct {
	baseline, candidate *forest.Ensemble
	traffic, baseWeek   *frame.Frame
	catalog             *audit.Catalog
	rowsPerDay          float64
}

// cfg keeps the bootstrap small so the package's tests stay fast.
var cfg = importance.Config{Replicates: 50, Seed: 7}

// inputs measures both models as the command does: both on the candidate
// traffic with one seed (paired replicates), and the baseline on its own
// week when there is one.
func (w world) inputs(t *testing.T) audit.Inputs {
	t.Helper()
	measure := func(e *forest.Ensemble, name string, f *frame.Frame) *importance.Table {
		tab, err := importance.MeasureModel(e, name, f, cfg)
		if err != nil {
			t.Fatalf("measuring %s: %v", name, err)
		}
		return tab
	}
	in := audit.Inputs{
		Baseline: w.baseline, Candidate: w.candidate,
		Traffic: w.traffic, BaselineTraffic: w.baseWeek,
		BaselineTable:  measure(w.baseline, "baseline", w.traffic),
		CandidateTable: measure(w.candidate, "candidate", w.traffic),
		Catalog:        w.catalog, RowsPerDay: w.rowsPerDay,
	}
	if w.baseWeek != nil {
		in.BaselineOwnTable = measure(w.baseline, "baseline", w.baseWeek)
	}
	return in
}

func compare(t *testing.T, in audit.Inputs) *audit.Report {
	t.Helper()
	r, err := audit.Compare(in, audit.DefaultPolicy())
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// expect is what one feature must show: its flag kinds with their
// severities (empty: not flagged at all) and the hint on every flag.
type expect struct {
	feature string
	kinds   map[string]audit.Severity
	hint    string
}

func flagsOf(r *audit.Report, feature string) []audit.Flag {
	var out []audit.Flag
	for _, f := range r.Flags {
		if f.Feature == feature {
			out = append(out, f)
		}
	}
	return out
}

func flagOf(t *testing.T, r *audit.Report, feature, kind string) audit.Flag {
	t.Helper()
	for _, f := range flagsOf(r, feature) {
		if f.Kind == kind {
			return f
		}
	}
	t.Fatalf("%s: no %s flag", feature, kind)
	return audit.Flag{}
}

func evidence(t *testing.T, f audit.Flag, name string) audit.Evidence {
	t.Helper()
	for _, e := range f.Evidence {
		if e.Name == name {
			return e
		}
	}
	t.Fatalf("%s %s: no evidence %q in %+v", f.Feature, f.Kind, name, f.Evidence)
	return audit.Evidence{}
}

func healthOf(t *testing.T, r *audit.Report, feature string) audit.Health {
	t.Helper()
	for _, h := range r.Health {
		if h.Feature == feature {
			return h
		}
	}
	t.Fatalf("no health line for %s", feature)
	return audit.Health{}
}

func ledgerOf(t *testing.T, r *audit.Report, feature string) audit.LedgerRow {
	t.Helper()
	for _, l := range r.Ledger {
		if l.Feature == feature {
			return l
		}
	}
	t.Fatalf("no ledger row for %s", feature)
	return audit.LedgerRow{}
}

// checkFlags compares every feature's flags with the expectations, and
// fails on a flag for a feature not listed.
func checkFlags(t *testing.T, r *audit.Report, want []expect) {
	t.Helper()
	listed := map[string]bool{}
	for _, w := range want {
		listed[w.feature] = true
		t.Run(w.feature, func(t *testing.T) {
			got := map[string]audit.Severity{}
			for _, f := range flagsOf(r, w.feature) {
				got[f.Kind] = f.Severity
				if f.Hint != w.hint {
					t.Errorf("%s flag hint %q, want %q", f.Kind, f.Hint, w.hint)
				}
				if f.Message == "" {
					t.Errorf("%s flag has no message", f.Kind)
				}
			}
			if len(got) != len(w.kinds) {
				t.Errorf("flags %v, want %v (%s)", got, w.kinds, describe(flagsOf(r, w.feature)))
				return
			}
			for k, s := range w.kinds {
				if g, ok := got[k]; !ok || g != s {
					t.Errorf("flags %v, want %v (%s)", got, w.kinds, describe(flagsOf(r, w.feature)))
					return
				}
			}
			row := ledgerOf(t, r, w.feature)
			kinds := make([]string, 0, len(w.kinds))
			for k := range w.kinds {
				kinds = append(kinds, k)
			}
			sort.Strings(kinds)
			if !slices.Equal(row.Flags, kinds) && !(len(row.Flags) == 0 && len(kinds) == 0) {
				t.Errorf("ledger row flags %v, want %v", row.Flags, kinds)
			}
			if row.Hint != w.hint {
				t.Errorf("ledger row hint %q, want %q", row.Hint, w.hint)
			}
		})
	}
	for _, f := range r.Flags {
		if !listed[f.Feature] {
			t.Errorf("unexpected flag %s on %s: %s", f.Kind, f.Feature, f.Message)
		}
	}
}

func describe(fl []audit.Flag) string {
	var s []string
	for _, f := range fl {
		s = append(s, f.Kind+" ("+f.Severity.String()+"): "+f.Message)
	}
	return strings.Join(s, "; ")
}

func none() map[string]audit.Severity { return nil }

// stable is a feature both models use alike on unchanged traffic.
var stable = col{name: "review_score", effect: 1}

func TestComparePassWhenNothingFires(t *testing.T) {
	// Same model, two weeks drawn from the same distributions: no flag at
	// all and the verdict pass (PSI of two samples of 4000 from one
	// distribution over 2 bins is about 1e-3, far below 0.10).
	names := []string{"review_score", "text_match"}
	m := model(t, names,
		split{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "text_match", threshold: 0.5, effect: 1, gain: 10})
	cols := []col{stable, {name: "text_match", effect: 1}}
	w := world{baseline: m, candidate: m, traffic: sample(2, cols...), baseWeek: sample(1, cols...)}
	r := compare(t, w.inputs(t))
	if len(r.Flags) != 0 || r.Verdict != audit.VerdictPass {
		t.Errorf("verdict %s with flags %s, want pass with none", r.Verdict, describe(r.Flags))
	}
	for _, name := range names {
		h := healthOf(t, r, name)
		if !(h.PSI >= 0 && h.PSI < 0.01) || !(h.KS >= 0 && h.KS < 0.05) {
			t.Errorf("%s: PSI %v KS %v on two samples of one distribution", name, h.PSI, h.KS)
		}
	}
	if len(r.Cautions) != len(audit.Cautions) || r.Policy != audit.DefaultPolicy() {
		t.Error("report lacks the cautions or the policy")
	}
}

func TestCompareModelChanges(t *testing.T) {
	// Launch gate: one traffic sample, two models. Every feature moves the
	// label by 1 when it is ≥ 0.5.
	baseNames := []string{"text_match", "photo_count", "review_score", "host_response", "cancel_policy"}
	candNames := append(slices.Clone(baseNames), "distance_km")
	base := model(t, baseNames,
		split{feature: "text_match", threshold: 0.5, effect: 2, gain: 10},
		split{feature: "photo_count", threshold: 0.5, effect: 0.2, gain: 10},
		split{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "host_response", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "cancel_policy", threshold: 0.5, effect: 0.05, gain: 1})
	cand := model(t, candNames,
		split{feature: "text_match", threshold: 0.5, effect: 0.2, gain: 10},
		split{feature: "photo_count", threshold: 0.5, effect: 2, gain: 10},
		split{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "distance_km", threshold: 0.5, effect: 1, gain: 10})
	var cols []col
	for _, n := range candNames {
		cols = append(cols, col{name: n, effect: 1})
	}
	w := world{baseline: base, candidate: cand, traffic: sample(3, cols...)}
	in := w.inputs(t)
	r := compare(t, in)

	checkFlags(t, r, []expect{
		{"text_match", map[string]audit.Severity{audit.KindCollapsed: audit.SeverityWarn}, audit.HintModelShift},
		{"photo_count", map[string]audit.Severity{audit.KindSurged: audit.SeverityWarn}, audit.HintModelShift},
		// share ≈ 0.24 ≥ major share 0.05: warn
		{"host_response", map[string]audit.Severity{audit.KindDropped: audit.SeverityWarn}, ""},
		// share ≈ 0.01 < 0.05: info
		{"cancel_policy", map[string]audit.Severity{audit.KindDropped: audit.SeverityInfo}, ""},
		{"distance_km", map[string]audit.Severity{audit.KindAdded: audit.SeverityWarn}, ""},
		{"review_score", none(), ""},
	})
	if r.Verdict != audit.VerdictWarn {
		t.Errorf("verdict %s, want warn (warn flags only)", r.Verdict)
	}

	t.Run("share ratio and its paired interval", func(t *testing.T) {
		const floor = 0.001 // DefaultPolicy().ShareFloor
		for _, tc := range []struct {
			feature string
			kind    string
			// rough size from 2·k·c·p·(1−p) on the root of the squared error:
			// about ×10 or ×0.1; checked loosely, the rule is the point.
			lo, hi float64
		}{
			{"photo_count", audit.KindSurged, 3, 30},
			{"text_match", audit.KindCollapsed, 1.0 / 30, 1.0 / 3},
		} {
			t.Run(tc.feature, func(t *testing.T) {
				f := flagOf(t, r, tc.feature, tc.kind)
				e := evidence(t, f, "share_ratio")
				sb := in.BaselineTable.Feature(tc.feature).Traffic[importance.PermutationDrop]
				sc := in.CandidateTable.Feature(tc.feature).Traffic[importance.PermutationDrop]
				want := (sc.Share + floor) / (sb.Share + floor)
				if !(math.Abs(e.Value-want) <= 1e-12*want) {
					t.Errorf("share ratio %v, want (%v + %v)/(%v + %v) = %v", e.Value, sc.Share, floor, sb.Share, floor, want)
				}
				if !(e.Value >= tc.lo && e.Value <= tc.hi) {
					t.Errorf("share ratio %v outside the planted range [%v, %v]", e.Value, tc.lo, tc.hi)
				}
				// The interval is the percentile interval of the log ratio over
				// replicates paired by index (same weights for both models).
				lr := make([]float64, len(sb.ShareReplicates))
				for b := range lr {
					lr[b] = math.Log((sc.ShareReplicates[b] + floor) / (sb.ShareReplicates[b] + floor))
				}
				lo, hi := bootstrap.PercentileInterval(lr, 0.95)
				if !(math.Abs(e.Lo-math.Exp(lo)) <= 1e-12*e.Value && math.Abs(e.Hi-math.Exp(hi)) <= 1e-12*e.Value) {
					t.Errorf("interval [%v, %v], want [%v, %v]", e.Lo, e.Hi, math.Exp(lo), math.Exp(hi))
				}
				// the rule: the whole interval on one side of 1
				if tc.kind == audit.KindSurged && !(e.Lo > 1) || tc.kind == audit.KindCollapsed && !(e.Hi < 1) {
					t.Errorf("interval [%v, %v] does not exclude 1", e.Lo, e.Hi)
				}
				if !(e.Lo <= e.Value && e.Value <= e.Hi) {
					t.Errorf("interval [%v, %v] misses the point ratio %v", e.Lo, e.Hi, e.Value)
				}
				row := ledgerOf(t, r, tc.feature)
				if row.Ratio != e.Value || row.RatioLo != e.Lo || row.RatioHi != e.Hi {
					t.Errorf("ledger ratio %v [%v, %v] differs from the evidence", row.Ratio, row.RatioLo, row.RatioHi)
				}
			})
		}
	})

	t.Run("stable feature ratio near 1", func(t *testing.T) {
		row := ledgerOf(t, r, "review_score")
		if !(row.Ratio > 1.0/3 && row.Ratio < 3 && row.RatioLo <= row.Ratio && row.Ratio <= row.RatioHi) {
			t.Errorf("stable feature ratio %v [%v, %v]", row.Ratio, row.RatioLo, row.RatioHi)
		}
	})

	t.Run("ledger order and membership", func(t *testing.T) {
		if len(r.Ledger) != len(candNames) {
			t.Fatalf("%d ledger rows, want %d", len(r.Ledger), len(candNames))
		}
		for i := 1; i < len(r.Ledger); i++ {
			a, b := math.Abs(math.Log(r.Ledger[i-1].Ratio)), math.Abs(math.Log(r.Ledger[i].Ratio))
			if a < b {
				t.Errorf("ledger not sorted by |log ratio|: %s (%v) before %s (%v)", r.Ledger[i-1].Feature, a, r.Ledger[i].Feature, b)
			}
		}
		if row := ledgerOf(t, r, "distance_km"); row.InBaseline || !row.InCandidate {
			t.Errorf("distance_km in baseline %v, candidate %v", row.InBaseline, row.InCandidate)
		}
		if row := ledgerOf(t, r, "host_response"); !row.InBaseline || !row.InCandidate {
			t.Errorf("host_response (declared by both) in baseline %v, candidate %v", row.InBaseline, row.InCandidate)
		}
	})

	t.Run("flags sorted by severity then feature", func(t *testing.T) {
		for i := 1; i < len(r.Flags); i++ {
			a, b := r.Flags[i-1], r.Flags[i]
			if a.Severity < b.Severity || a.Severity == b.Severity && a.Feature > b.Feature {
				t.Errorf("flag order: %s %s before %s %s", a.Severity, a.Feature, b.Severity, b.Feature)
			}
		}
	})
}

func TestCompareWeeklyWatch(t *testing.T) {
	// Weekly watch: baseline model on last week, candidate model on this
	// week. Planted: a producer that stops filling image_quality (90%
	// missing), a missing rise on response_rate (5% → 30%) and a smaller one
	// on review_count (5% → 15%), two price-like features whose mass moves
	// between the model's bins, and a surge on photo_count with unchanged
	// traffic.
	names := []string{"review_score", "photo_count", "image_quality", "response_rate", "review_count", "nightly_price", "host_rating"}
	common := []split{
		{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		{feature: "image_quality", threshold: 0.5, effect: 1, gain: 10, defaultLeft: true},
		{feature: "response_rate", threshold: 0.5, effect: 0.3, gain: 1},
		{feature: "review_count", threshold: 0.5, effect: 0.3, gain: 1},
		{feature: "nightly_price", threshold: 0.25, effect: 0.05, gain: 0.5},
		{feature: "nightly_price", threshold: 0.5, effect: 0.1, gain: 0.5},
		{feature: "nightly_price", threshold: 0.75, effect: 0.05, gain: 0.5},
		{feature: "host_rating", threshold: 0.25, effect: 0.05, gain: 0.5},
		{feature: "host_rating", threshold: 0.5, effect: 0.1, gain: 0.5},
		{feature: "host_rating", threshold: 0.75, effect: 0.05, gain: 0.5},
	}
	base := model(t, names, append(slices.Clone(common), split{feature: "photo_count", threshold: 0.5, effect: 0.2, gain: 10})...)
	cand := model(t, names, append(slices.Clone(common), split{feature: "photo_count", threshold: 0.5, effect: 2, gain: 10})...)
	lastWeek := sample(4,
		stable,
		col{name: "photo_count", effect: 1},
		col{name: "image_quality", effect: 1},
		col{name: "response_rate", effect: 0.3, missing: missingPercent(5)},
		col{name: "review_count", effect: 0.3, missing: missingPercent(5)},
		col{name: "nightly_price", effect: 0.1, value: quarters(0.25, 0.25, 0.25, 0.25)},
		col{name: "host_rating", effect: 0.1, value: quarters(0.25, 0.25, 0.25, 0.25)})
	thisWeek := sample(5,
		stable,
		col{name: "photo_count", effect: 1},
		col{name: "image_quality", effect: 1, missing: missingPercent(90)},
		col{name: "response_rate", effect: 0.3, missing: missingPercent(30)},
		col{name: "review_count", effect: 0.3, missing: missingPercent(15)},
		col{name: "nightly_price", effect: 0.1, value: quarters(0.4, 0.3, 0.2, 0.1)},
		col{name: "host_rating", effect: 0.1, value: quarters(0.5, 0.3, 0.15, 0.05)})
	w := world{baseline: base, candidate: cand, traffic: thisWeek, baseWeek: lastWeek}
	r := compare(t, w.inputs(t))

	F, W := audit.SeverityFail, audit.SeverityWarn
	checkFlags(t, r, []expect{
		// collapse + missing-spike: pipeline-suspect, and the collapse is
		// raised to fail; gain share 10/35 ≥ 0.05 makes the spike a fail;
		// the missing bin's share 0 → 0.9 gives a large PSI.
		{"image_quality", map[string]audit.Severity{audit.KindCollapsed: F, audit.KindMissingSpike: F, audit.KindShifted: F}, audit.HintPipelineSuspect},
		// +25 points ≥ 20: spike (gain share 1/35 < 0.05: warn). PSI over
		// [<.5, ≥.5, missing] ≈ 0.52 ≥ 0.25.
		{"response_rate", map[string]audit.Severity{audit.KindMissingSpike: W, audit.KindShifted: F}, audit.HintPipelineSuspect},
		// +10 points < 20: no spike; PSI ≈ 0.12 (warn).
		{"review_count", map[string]audit.Severity{audit.KindShifted: W}, ""},
		{"nightly_price", map[string]audit.Severity{audit.KindShifted: W}, ""},
		{"host_rating", map[string]audit.Severity{audit.KindShifted: F}, ""},
		// a surge while the feature's traffic is unchanged: model-shift
		{"photo_count", map[string]audit.Severity{audit.KindSurged: W}, audit.HintModelShift},
		{"review_score", none(), ""},
	})
	if r.Verdict != audit.VerdictFail {
		t.Errorf("verdict %s, want fail", r.Verdict)
	}

	t.Run("PSI over the model's bins", func(t *testing.T) {
		// Bins are the model thresholds 0.25, 0.5, 0.75 plus the missing
		// bin; the shares are planted exactly, so the PSI is the hand sums
		// of TestPSIWorkedExample (missing bin empty in both: adds 0).
		for _, tc := range []struct {
			feature string
			want    float64
		}{
			// quarters → [0.4, 0.3, 0.2, 0.1]: 0.2282174096
			{"nightly_price", 0.15*math.Log(1.6) + 0.05*math.Log(1.2) - 0.05*math.Log(0.8) - 0.15*math.Log(0.4)},
			// quarters → [0.5, 0.3, 0.15, 0.05]: 0.5553730178
			{"host_rating", 0.25*math.Log(2) + 0.05*math.Log(1.2) - 0.1*math.Log(0.6) - 0.2*math.Log(0.2)},
		} {
			t.Run(tc.feature, func(t *testing.T) {
				h := healthOf(t, r, tc.feature)
				if !(math.Abs(h.PSI-tc.want) <= 1e-12) {
					t.Errorf("PSI %.15f, want %.15f", h.PSI, tc.want)
				}
				f := flagOf(t, r, tc.feature, audit.KindShifted)
				if e := evidence(t, f, "psi"); e.Value != h.PSI {
					t.Errorf("flag PSI %v, health PSI %v", e.Value, h.PSI)
				}
				base, cand := column(lastWeek, tc.feature), column(thisWeek, tc.feature)
				if ks := audit.KS(base, cand); ks != h.KS || evidence(t, f, "ks").Value != ks {
					t.Errorf("KS %v, want KS of the two columns %v", h.KS, ks)
				}
			})
		}
	})

	t.Run("missing shares", func(t *testing.T) {
		for _, tc := range []struct {
			feature    string
			base, cand float64
		}{
			{"image_quality", 0, 0.9},
			{"response_rate", 0.05, 0.3},
			{"review_count", 0.05, 0.15},
			{"review_score", 0, 0},
		} {
			h := healthOf(t, r, tc.feature)
			if !(math.Abs(h.MissingBaseline-tc.base) <= 1e-12 && math.Abs(h.MissingCandidate-tc.cand) <= 1e-12) {
				t.Errorf("%s: missing %v → %v, want %v → %v", tc.feature, h.MissingBaseline, h.MissingCandidate, tc.base, tc.cand)
			}
		}
		f := flagOf(t, r, "response_rate", audit.KindMissingSpike)
		if evidence(t, f, "missing_baseline_share").Value != healthOf(t, r, "response_rate").MissingBaseline ||
			evidence(t, f, "missing_candidate_share").Value != 0.3 {
			t.Errorf("missing-spike evidence %+v", f.Evidence)
		}
	})

	t.Run("stable traffic behind the surge", func(t *testing.T) {
		if h := healthOf(t, r, "photo_count"); !(h.PSI < 0.01) {
			t.Errorf("photo_count PSI %v, want < 0.01", h.PSI)
		}
	})

	if len(r.Notes) == 0 || !strings.Contains(r.Notes[0], "independent bootstrap") {
		t.Errorf("weekly comparison should note independent replicates, notes %q", r.Notes)
	}
}

func TestCompareSurgeFromTrafficShift(t *testing.T) {
	// The same model both weeks; only the traffic moved: last week 1% of
	// text_match sat above the split at 0.5, this week half does, so its
	// permutation share rises about tenfold (p·(1−p) from 0.0099 to 0.25).
	// The model did not change how it uses the feature, so the hint must not
	// be model-shift; by the hint's definition (use changed together with
	// the traffic: constant, missing, shifted) it is pipeline-suspect.
	names := []string{"review_score", "text_match"}
	m := model(t, names,
		split{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "text_match", threshold: 0.5, effect: 1, gain: 10})
	lastWeek := sample(1, stable, col{name: "text_match", effect: 1, value: quarters(0.5, 0.49, 0.005, 0.005)})
	thisWeek := sample(2, stable, col{name: "text_match", effect: 1})
	w := world{baseline: m, candidate: m, traffic: thisWeek, baseWeek: lastWeek}
	r := compare(t, w.inputs(t))
	checkFlags(t, r, []expect{
		{"text_match", map[string]audit.Severity{audit.KindSurged: audit.SeverityWarn, audit.KindShifted: audit.SeverityFail}, audit.HintPipelineSuspect},
		{"review_score", none(), ""},
	})
}

func column(f *frame.Frame, name string) []float64 {
	return f.Columns[slices.Index(f.Names, name)]
}

func TestCompareTrafficFaults(t *testing.T) {
	// Launch gate with one model on one sample (so nothing but the traffic
	// can fire), no baseline week.
	names := []string{"review_score", "wifi_score", "parking_spots", "guest_count", "host_age", "listing_age", "pool_size", "photo_count", "cancel_strictness"}
	m := model(t, names,
		split{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "wifi_score", threshold: 0.5, effect: 1, gain: 10},
		split{feature: "parking_spots", threshold: 0.5, effect: 0.2, gain: 0.5},
		split{feature: "guest_count", threshold: 0.5, effect: 0.2, gain: 0.5},
		split{feature: "host_age", threshold: 0.5, effect: 0.3, gain: 2},
		split{feature: "host_age", threshold: 1, effect: 0.3, gain: 2},
		split{feature: "listing_age", threshold: 0.5, effect: 0.3, gain: 1},
		split{feature: "listing_age", threshold: 2, effect: 0.3, gain: 3},
		split{feature: "pool_size", threshold: 0.5, effect: 0.3, gain: 4},
		split{feature: "pool_size", threshold: -1, effect: 0.3, gain: 1},
		split{feature: "photo_count", threshold: 0.5, effect: 0.5, gain: 5, defaultCover: 0.02},
		split{feature: "cancel_strictness", threshold: 0.5, effect: 0.5, gain: 5, defaultCover: 0.4, defaultLeft: true},
	)
	// total gain 44: wifi 0.227, host_age 0.091, photo_count 0.114 are
	// major (≥ 0.05); parking_spots 0.011 is not.
	traffic := sample(6,
		stable,
		col{name: "wifi_score", value: mostly(3, 996), effect: 1},    // 99.6% ≥ 99.5%
		col{name: "parking_spots", value: mostly(0, 998), effect: 1}, // 99.8%
		col{name: "guest_count", value: mostly(2, 994)},              // 99.4% < 99.5%: not constant
		col{name: "host_age", value: between(0.6, 0.9)},              // every row between the thresholds 0.5 and 1
		col{name: "listing_age"},                                     // [0, 1): the split at 2 is unreachable
		col{name: "pool_size"},                                       // the split at −1 is unreachable
		col{name: "photo_count", effect: 0.5, missing: missingPercent(60)},
		col{name: "cancel_strictness", effect: 0.5, missing: missingPercent(60)},
	)
	catalog := &audit.Catalog{Unit: "USD", Costs: map[string]audit.Cost{
		"wifi_score":  {Feature: "wifi_score", CostPer1kRows: 2, Unit: "USD"},
		"photo_count": {Feature: "photo_count", CostPer1kRows: 1, Unit: "USD"},
	}}
	w := world{baseline: m, candidate: m, traffic: traffic, catalog: catalog}
	r := compare(t, w.inputs(t))

	F, W, I := audit.SeverityFail, audit.SeverityWarn, audit.SeverityInfo
	checkFlags(t, r, []expect{
		{"wifi_score", map[string]audit.Severity{audit.KindWentConstant: F}, audit.HintPipelineSuspect},
		{"parking_spots", map[string]audit.Severity{audit.KindWentConstant: W}, audit.HintPipelineSuspect},
		{"guest_count", none(), ""},
		{"host_age", map[string]audit.Severity{audit.KindWentConstant: F}, audit.HintPipelineSuspect},
		// unreachable gain 3/4 ≥ 0.25: warn
		{"listing_age", map[string]audit.Severity{audit.KindOutOfRange: W}, ""},
		// unreachable gain 1/5 in [0.125, 0.25): info
		{"pool_size", map[string]audit.Severity{audit.KindOutOfRange: I}, ""},
		// 60% missing ≥ 50% while 2% of the training cover took the default
		{"photo_count", map[string]audit.Severity{audit.KindMissingSpike: F}, audit.HintPipelineSuspect},
		// 60% missing, but 40% of the training cover took the default: the
		// model was trained with the feature often missing
		{"cancel_strictness", none(), ""},
		{"review_score", none(), ""},
	})
	if r.Verdict != audit.VerdictFail {
		t.Errorf("verdict %s, want fail", r.Verdict)
	}

	t.Run("went-constant evidence", func(t *testing.T) {
		f := flagOf(t, r, "wifi_score", audit.KindWentConstant)
		if evidence(t, f, "top_value").Value != 3 || !(math.Abs(evidence(t, f, "top_value_share").Value-0.996) <= 1e-12) {
			t.Errorf("evidence %+v, want top value 3 with share 0.996", f.Evidence)
		}
		if !strings.Contains(f.Message, "99.6%") || f.Sample != "candidate traffic" {
			t.Errorf("message %q sample %q", f.Message, f.Sample)
		}
		h := healthOf(t, r, "wifi_score")
		if h.TopValue != 3 || !(math.Abs(h.TopValueShare-0.996) <= 1e-12) {
			t.Errorf("health top value %v share %v", h.TopValue, h.TopValueShare)
		}
	})

	t.Run("constant value zero named in the message", func(t *testing.T) {
		// Values are printed with %.6g: a top value of 0 must read "0".
		f := flagOf(t, r, "parking_spots", audit.KindWentConstant)
		if !strings.Contains(f.Message, "hold the value 0 while") {
			t.Errorf("message %q should name the value 0", f.Message)
		}
	})

	t.Run("single branch", func(t *testing.T) {
		f := flagOf(t, r, "host_age", audit.KindWentConstant)
		if !strings.Contains(f.Message, "same branch") {
			t.Errorf("message %q should say every row takes the same branch", f.Message)
		}
		if s := evidence(t, f, "top_value_share").Value; !(s < 0.01) {
			t.Errorf("top value share %v: the values vary", s)
		}
	})

	t.Run("out-of-range evidence", func(t *testing.T) {
		for _, tc := range []struct {
			feature string
			share   float64
		}{
			{"listing_age", 3.0 / 4},
			{"pool_size", 1.0 / 5},
		} {
			f := flagOf(t, r, tc.feature, audit.KindOutOfRange)
			h := healthOf(t, r, tc.feature)
			lo, hi := slices.Min(column(traffic, tc.feature)), slices.Max(column(traffic, tc.feature))
			if got := evidence(t, f, "unreachable_gain_share").Value; !(math.Abs(got-tc.share) <= 1e-12) {
				t.Errorf("%s unreachable gain share %v, want %v", tc.feature, got, tc.share)
			}
			if evidence(t, f, "traffic_min").Value != lo || evidence(t, f, "traffic_max").Value != hi || h.Min != lo || h.Max != hi {
				t.Errorf("%s range evidence %+v, health [%v, %v], want [%v, %v]", tc.feature, f.Evidence, h.Min, h.Max, lo, hi)
			}
		}
	})

	t.Run("missing-spike without a baseline sample", func(t *testing.T) {
		f := flagOf(t, r, "photo_count", audit.KindMissingSpike)
		if !(math.Abs(evidence(t, f, "missing_candidate_share").Value-0.6) <= 1e-12) ||
			!(math.Abs(evidence(t, f, "default_cover_share").Value-0.02) <= 1e-12) {
			t.Errorf("evidence %+v, want missing 0.6 and default cover 0.02", f.Evidence)
		}
		if h := healthOf(t, r, "photo_count"); !math.IsNaN(h.MissingBaseline) || !math.IsNaN(h.PSI) || !math.IsNaN(h.KS) {
			t.Errorf("without a baseline sample: missing %v PSI %v KS %v, want NaN", h.MissingBaseline, h.PSI, h.KS)
		}
	})

	t.Run("broken inputs are not removal candidates", func(t *testing.T) {
		// wifi_score (constant) and photo_count (missing) carry a cost and
		// near-zero drops, but a broken input is not a useless one.
		if len(r.Removals) != 0 {
			t.Errorf("removals %+v, want none", r.Removals)
		}
	})
}

func TestCompareRemovalCandidates(t *testing.T) {
	// Features with no effect (both leaves equal) and a cost are removal
	// candidates; a group saves only when every member goes.
	names := []string{"review_score", "image_quality", "affinity_a", "affinity_b", "vision_x", "vision_y", "distance_km", "free_feature"}
	splits := []split{
		{feature: "review_score", threshold: 0.5, effect: 1, gain: 10},
		{feature: "image_quality", threshold: 0.5, effect: 0, gain: 0.1},
		{feature: "affinity_a", threshold: 0.5, effect: 0, gain: 0.1},
		{feature: "affinity_b", threshold: 0.5, effect: 0, gain: 0.1},
		{feature: "vision_x", threshold: 0.5, effect: 0, gain: 0.1},
		{feature: "vision_y", threshold: 0.5, effect: 1, gain: 10},
		{feature: "distance_km", threshold: 0.5, effect: 0.5, gain: 5},
		{feature: "free_feature", threshold: 0.5, effect: 0, gain: 0.1},
	}
	base := model(t, append(slices.Clone(names), "legacy_flag"),
		append(slices.Clone(splits), split{feature: "legacy_flag", threshold: 0.5, effect: 0, gain: 0.1})...)
	cand := model(t, names, splits...)
	traffic := sample(8,
		stable, col{name: "image_quality"}, col{name: "affinity_a"}, col{name: "affinity_b"},
		col{name: "vision_x"}, col{name: "vision_y", effect: 1}, col{name: "distance_km", effect: 0.5},
		col{name: "free_feature"}, col{name: "legacy_flag"})
	cost := func(name string, v float64, group string) audit.Cost {
		return audit.Cost{Feature: name, CostPer1kRows: v, Unit: "USD", Group: group}
	}
	catalog := &audit.Catalog{Unit: "USD", Costs: map[string]audit.Cost{
		"review_score":  cost("review_score", 0.2, ""),
		"image_quality": cost("image_quality", 3, ""),
		"affinity_a":    cost("affinity_a", 1, "affinity"),
		"affinity_b":    cost("affinity_b", 0.5, "affinity"),
		"vision_x":      cost("vision_x", 0.8, "vision"),
		"vision_y":      cost("vision_y", 0.7, "vision"),
		"free_feature":  cost("free_feature", 0, ""),
		"legacy_flag":   cost("legacy_flag", 0.1, ""),
	}}
	w := world{baseline: base, candidate: cand, traffic: traffic, catalog: catalog, rowsPerDay: 2e6}
	in := w.inputs(t)
	r := compare(t, in)

	I := audit.SeverityInfo
	rc := map[string]audit.Severity{audit.KindRemovalCandidate: I}
	checkFlags(t, r, []expect{
		{"image_quality", rc, audit.HintPrune},
		{"affinity_a", rc, audit.HintPrune},
		{"affinity_b", rc, audit.HintPrune},
		{"vision_x", rc, audit.HintPrune},
		// the candidate no longer reads it: dropped (share 0, info) and free
		// to remove
		{"legacy_flag", map[string]audit.Severity{audit.KindDropped: I, audit.KindRemovalCandidate: I}, audit.HintPrune},
		{"vision_y", none(), ""},
		{"free_feature", none(), ""}, // no cost, nothing to save
		{"review_score", none(), ""},
		{"distance_km", none(), ""},
	})
	if r.Verdict != audit.VerdictPass {
		t.Errorf("verdict %s, want pass (info flags only)", r.Verdict)
	}

	// Savings per 1k rows from the catalog; per day = saving · 2e6 / 1000;
	// per 30 days = 30 · per day. Ranked by saving per unit of risk.
	want := []struct {
		feature  string
		group    string
		cost     float64
		saving   float64
		blockers []string
	}{
		{"image_quality", "", 3, 3, nil},
		// the group's saving (1 + 0.5) is listed once, on its first member
		{"affinity_a", "affinity", 1.5, 1.5, nil},
		{"legacy_flag", "", 0.1, 0.1, nil},
		{"affinity_b", "affinity", 1.5, 0, nil},
		// vision_y still matters, so dropping vision_x saves nothing
		{"vision_x", "vision", 1.5, 0, []string{"vision_y"}},
	}
	if len(r.Removals) != len(want) {
		t.Fatalf("removals %+v, want %d", r.Removals, len(want))
	}
	tol := audit.DefaultPolicy().RemovalTolerance * math.Abs(in.BaselineTable.Quality.Value)
	for i, w := range want {
		t.Run("removal "+w.feature, func(t *testing.T) {
			got := r.Removals[i]
			if got.Feature != w.feature || got.Group != w.group || got.Unit != "USD" ||
				!(math.Abs(got.CostPer1kRows-w.cost) <= 1e-12) || !(math.Abs(got.Saving-w.saving) <= 1e-12) ||
				!slices.Equal(got.Blockers, w.blockers) {
				t.Errorf("removal %d = %+v, want %+v", i, got, w)
			}
			if !(math.Abs(got.PerDay-w.saving*2000) <= 1e-9) || !(math.Abs(got.Per30Days-w.saving*60000) <= 1e-9) {
				t.Errorf("per day %v, per 30 days %v, want %v and %v", got.PerDay, got.Per30Days, w.saving*2000, w.saving*60000)
			}
			if !(got.Risk >= 0 && got.Risk < tol) {
				t.Errorf("risk %v, want in [0, %v)", got.Risk, tol)
			}
			f := flagOf(t, r, w.feature, audit.KindRemovalCandidate)
			if evidence(t, f, "saving_per_1k_rows").Value != got.Saving {
				t.Errorf("flag saving %v, removal saving %v", evidence(t, f, "saving_per_1k_rows").Value, got.Saving)
			}
			if len(w.blockers) > 0 && !strings.Contains(f.Message, "vision_y") {
				t.Errorf("message %q should name the blocker", f.Message)
			}
			if w.saving == 0 && !strings.Contains(f.Message, "saves 0 USD") {
				t.Errorf("message %q should say it saves 0 USD", f.Message)
			}
		})
	}
	if !slices.Equal(r.Unpriced, []string{"distance_km"}) || r.CostUnit != "USD" {
		t.Errorf("unpriced %v unit %q, want [distance_km] USD", r.Unpriced, r.CostUnit)
	}

	t.Run("without rows per day", func(t *testing.T) {
		in2 := in
		in2.RowsPerDay = 0
		r2 := compare(t, in2)
		for _, rm := range r2.Removals {
			if !math.IsNaN(rm.PerDay) || !math.IsNaN(rm.Per30Days) {
				t.Errorf("%s: per day %v per 30 days %v, want NaN", rm.Feature, rm.PerDay, rm.Per30Days)
			}
		}
	})

	t.Run("without a catalog", func(t *testing.T) {
		in2 := in
		in2.Catalog = nil
		r2 := compare(t, in2)
		if len(r2.Removals) != 0 || len(r2.Unpriced) != 0 {
			t.Errorf("removals %v unpriced %v without a catalog", r2.Removals, r2.Unpriced)
		}
		for _, f := range r2.Flags {
			if f.Kind == audit.KindRemovalCandidate {
				t.Errorf("removal flag on %s without a catalog", f.Feature)
			}
		}
	})
}

func TestCompareRejectsBadInput(t *testing.T) {
	m := model(t, []string{"review_score"}, split{feature: "review_score", threshold: 0.5, effect: 1, gain: 1})
	w := world{baseline: m, candidate: m, traffic: sample(9, stable)}
	in := w.inputs(t)
	bad := audit.DefaultPolicy()
	bad.PSIBins = 1
	cases := []struct {
		name string
		in   audit.Inputs
		p    audit.Policy
	}{
		{"invalid policy", in, bad},
		{"no candidate table", func() audit.Inputs { x := in; x.CandidateTable = nil; return x }(), audit.DefaultPolicy()},
		{"no traffic", func() audit.Inputs { x := in; x.Traffic = nil; return x }(), audit.DefaultPolicy()},
		{"no baseline model", func() audit.Inputs { x := in; x.Baseline = nil; return x }(), audit.DefaultPolicy()},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if r, err := audit.Compare(tc.in, tc.p); err == nil {
				t.Errorf("Compare accepted it, verdict %s", r.Verdict)
			}
		})
	}
}
