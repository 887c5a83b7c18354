package audit

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"splitledger/importance"
	"splitledger/importance/bootstrap"
	"splitledger/importance/forest"
	"splitledger/importance/frame"
)

// Inputs is everything a comparison needs. The driver reads the files,
// measures the tables (both models on Traffic with the same seed, so their
// bootstrap replicates pair) and hands them here.
type Inputs struct {
	Baseline, Candidate *forest.Ensemble
	Models              []ModelInfo // baseline first, then candidate
	// Traffic is the candidate traffic sample; BaselineTraffic the
	// baseline week's, or nil. Frames carry the union of both models'
	// features by name.
	Traffic, BaselineTraffic *frame.Frame
	TrafficInfo              []TrafficInfo
	// BaselineTable and CandidateTable are both models on Traffic;
	// BaselineOwnTable the baseline model on BaselineTraffic (nil without
	// it).
	BaselineTable, CandidateTable, BaselineOwnTable *importance.Table
	Catalog                                         *Catalog
	// RowsPerDay scales savings to a day (0: per 1k rows only).
	RowsPerDay float64
	Run        RunInfo
}

// Compare applies the policy to the inputs and returns the report.
func Compare(in Inputs, p Policy) (*Report, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if in.Baseline == nil || in.Candidate == nil || in.BaselineTable == nil || in.CandidateTable == nil || in.Traffic == nil {
		return nil, errors.New("audit: baseline, candidate, their tables and the traffic sample are required")
	}
	r := &Report{
		Run: in.Run, Models: in.Models, Traffic: in.TrafficInfo, Policy: p,
		BaselineQuality: in.BaselineTable.Quality, CandidateQuality: in.CandidateTable.Quality,
		BaselineTable: in.BaselineTable, CandidateTable: in.CandidateTable, BaselineOwnTable: in.BaselineOwnTable,
		Cautions: slices.Clone(Cautions),
	}
	r.Run.Measure = p.Measure
	c := &comparer{in: in, p: p, r: r, flags: map[string][]*Flag{}}
	c.features()
	c.health()
	c.trafficFlags()
	c.ledger()
	c.removals()
	c.hints()
	c.finish()
	return r, nil
}

type comparer struct {
	in    Inputs
	p     Policy
	r     *Report
	names []string // union of features, baseline order then candidate-only
	flags map[string][]*Flag
	all   []*Flag
	// per feature traffic state
	healthOf map[string]*Health
}

func (c *comparer) add(f Flag) {
	fl := f
	c.flags[f.Feature] = append(c.flags[f.Feature], &fl)
	c.all = append(c.all, &fl)
}

func (c *comparer) has(feature, kind string) bool {
	for _, f := range c.flags[feature] {
		if f.Kind == kind {
			return true
		}
	}
	return false
}

func (c *comparer) features() {
	seen := map[string]bool{}
	for _, n := range c.in.Baseline.FeatureNames {
		if !seen[n] {
			seen[n] = true
			c.names = append(c.names, n)
		}
	}
	for _, n := range c.in.Candidate.FeatureNames {
		if !seen[n] {
			seen[n] = true
			c.names = append(c.names, n)
		}
	}
}

// column returns a frame's column for a feature name, nil when absent.
func column(f *frame.Frame, name string) []float64 {
	if f == nil {
		return nil
	}
	for i, n := range f.Names {
		if n == name {
			if f.Absent != nil && f.Absent[i] {
				return nil
			}
			return f.Columns[i]
		}
	}
	return nil
}

func missingShare(col []float64) float64 {
	if len(col) == 0 {
		return math.NaN()
	}
	m := 0
	for _, v := range col {
		if v != v {
			m++
		}
	}
	return float64(m) / float64(len(col))
}

// topValue returns the most common non-missing value and its share of all
// rows (ties: the smaller value).
func topValue(col []float64) (float64, float64) {
	counts := map[float64]int{}
	for _, v := range col {
		if v == v {
			counts[v]++
		}
	}
	best, bestN := math.NaN(), 0
	for v, n := range counts {
		if n > bestN || (n == bestN && v < best) {
			best, bestN = v, n
		}
	}
	if len(col) == 0 {
		return math.NaN(), math.NaN()
	}
	return best, float64(bestN) / float64(len(col))
}

func minMax(col []float64) (float64, float64) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range col {
		if v == v {
			lo = math.Min(lo, v)
			hi = math.Max(hi, v)
		}
	}
	if lo > hi {
		return math.NaN(), math.NaN()
	}
	return lo, hi
}

// thresholds returns the sorted distinct numeric thresholds of a feature
// in e (nil when e does not declare or split on it).
func thresholds(e *forest.Ensemble, name string) []float64 {
	j := slices.Index(e.FeatureNames, name)
	if j < 0 {
		return nil
	}
	var t []float64
	for ti := range e.Trees {
		for i := range e.Trees[ti].Nodes {
			n := &e.Trees[ti].Nodes[i]
			if !n.IsLeaf() && int(n.Feature) == j && n.Flags&forest.FlagCategorical == 0 {
				t = append(t, n.Threshold)
			}
		}
	}
	sort.Float64s(t)
	return slices.Compact(t)
}

func (c *comparer) health() {
	c.healthOf = map[string]*Health{}
	for _, name := range c.names {
		cand := column(c.in.Traffic, name)
		h := &Health{Feature: name, MissingBaseline: math.NaN(), PSI: math.NaN(), KS: math.NaN()}
		if cand == nil {
			h.MissingCandidate, h.TopValue, h.TopValueShare, h.Min, h.Max = 1, math.NaN(), math.NaN(), math.NaN(), math.NaN()
		} else {
			h.MissingCandidate = missingShare(cand)
			h.TopValue, h.TopValueShare = topValue(cand)
			h.Min, h.Max = minMax(cand)
		}
		if c.in.BaselineTraffic != nil {
			base := column(c.in.BaselineTraffic, name)
			if base == nil {
				h.MissingBaseline = 1
			} else {
				h.MissingBaseline = missingShare(base)
				if cand != nil {
					th := thresholds(c.in.Candidate, name)
					if len(th) == 0 {
						th = thresholds(c.in.Baseline, name)
					}
					edges := psiEdges(th, finiteSorted(base), c.p.PSIBins)
					le := c.in.Candidate.Rule == forest.LessEqualFloat64
					h.PSI = PSI(binCountsRule(base, edges, le), binCountsRule(cand, edges, le), 1e-4)
					h.KS = KS(base, cand)
				}
			}
		}
		c.healthOf[name] = h
		c.r.Health = append(c.r.Health, *h)
	}
}

// gainShare is a feature's structure gain share in e (split share when the
// file has no gain), 0 when e does not declare it.
func gainShare(t *importance.Table, name string) float64 {
	if t == nil {
		return 0
	}
	f := t.Feature(name)
	if f == nil {
		return 0
	}
	if f.GainShare == f.GainShare {
		return f.GainShare
	}
	if f.SplitShare == f.SplitShare {
		return f.SplitShare
	}
	return 0
}

func splits(t *importance.Table, name string) int {
	if f := t.Feature(name); f != nil {
		return f.SplitCount
	}
	return 0
}

// trafficFlags: went-constant, missing-spike, out-of-range, shifted.
func (c *comparer) trafficFlags() {
	type sample struct {
		label string
		f     *frame.Frame
		e     *forest.Ensemble
		t     *importance.Table
	}
	samples := []sample{{"candidate traffic", c.in.Traffic, c.in.Candidate, c.in.CandidateTable}}
	if c.in.BaselineTraffic != nil {
		samples = append(samples, sample{"baseline traffic", c.in.BaselineTraffic, c.in.Baseline, c.in.BaselineOwnTable})
	}
	for _, name := range c.names {
		h := c.healthOf[name]
		for _, s := range samples {
			col := column(s.f, name)
			if splits(s.t, name) == 0 && (s.label != "candidate traffic" || splits(c.in.BaselineTable, name) == 0) {
				continue // neither model reading this sample splits on it
			}
			major := math.Max(gainShare(s.t, name), gainShare(c.in.BaselineTable, name)) >= c.p.MajorShare
			sev := SeverityWarn
			if major {
				sev = SeverityFail
			}
			if col == nil || missingShare(col) == 1 {
				continue // all missing: missing-spike's business
			}
			top, share := topValue(col)
			th := thresholds(s.e, name)
			single := singleBranch(th, s.e.Rule, col)
			if share >= c.p.ConstantShare || single {
				msg := fmt.Sprintf("%s: %.1f%% of rows hold the value %s while the model splits on it", s.label, 100*share, fmtValue(top))
				if single && share < c.p.ConstantShare {
					msg = fmt.Sprintf("%s: every row takes the same branch at all of the model's splits on it", s.label)
				}
				c.add(Flag{Kind: KindWentConstant, Feature: name, Severity: sev, Sample: s.label,
					Evidence: []Evidence{ev("top_value", top), ev("top_value_share", share)}, Message: msg})
				continue
			}
			if len(th) > 0 {
				lo, hi := minMax(col)
				frac := unreachableGainShare(s.e, name, lo, hi)
				if frac >= c.p.OutOfRangeGainShare/2 {
					sv := SeverityInfo
					if frac >= c.p.OutOfRangeGainShare {
						sv = SeverityWarn
					}
					c.add(Flag{Kind: KindOutOfRange, Feature: name, Severity: sv, Sample: s.label,
						Evidence: []Evidence{ev("unreachable_gain_share", frac), ev("traffic_min", lo), ev("traffic_max", hi)},
						Message:  fmt.Sprintf("%s: %.0f%% of the feature's split gain sits on splits outside the traffic range [%s, %s]", s.label, 100*frac, fmtValue(lo), fmtValue(hi))})
				}
			}
		}
		// missing-spike
		major := math.Max(gainShare(c.in.CandidateTable, name), gainShare(c.in.BaselineTable, name)) >= c.p.MajorShare
		sev := SeverityWarn
		if major {
			sev = SeverityFail
		}
		used := splits(c.in.CandidateTable, name) > 0 || splits(c.in.BaselineTable, name) > 0
		if !used {
			continue
		}
		if c.in.BaselineTraffic != nil {
			if d := h.MissingCandidate - h.MissingBaseline; d >= c.p.MissingSpikePoints {
				c.add(Flag{Kind: KindMissingSpike, Feature: name, Severity: sev, Sample: "candidate traffic",
					Evidence: []Evidence{ev("missing_baseline_share", h.MissingBaseline), ev("missing_candidate_share", h.MissingCandidate)},
					Message:  fmt.Sprintf("missing in %.1f%% of candidate rows, %.1f%% in the baseline week", 100*h.MissingCandidate, 100*h.MissingBaseline)})
			}
			if h.PSI >= c.p.PSIWarn {
				sv := SeverityWarn
				if h.PSI >= c.p.PSIFail {
					sv = SeverityFail
				}
				c.add(Flag{Kind: KindShifted, Feature: name, Severity: sv, Sample: "candidate traffic",
					Evidence: []Evidence{ev("psi", h.PSI), ev("ks", h.KS)},
					Message:  fmt.Sprintf("distribution moved between the samples: PSI %.3f, KS %.3f", h.PSI, h.KS)})
			}
		} else if h.MissingCandidate >= c.p.MissingHighShare {
			if dc := defaultCoverShare(c.in.Candidate, name); dc == dc && dc < c.p.RareDefaultCover {
				c.add(Flag{Kind: KindMissingSpike, Feature: name, Severity: sev, Sample: "candidate traffic",
					Evidence: []Evidence{ev("missing_candidate_share", h.MissingCandidate), ev("default_cover_share", dc)},
					Message:  fmt.Sprintf("missing in %.1f%% of rows, but only %.1f%% of the training cover took the default branches", 100*h.MissingCandidate, 100*dc)})
			}
		}
	}
}

func ev(name string, v float64) Evidence {
	return Evidence{Name: name, Value: v, Lo: math.NaN(), Hi: math.NaN()}
}

// pct writes a share as a percentage: one decimal, or two significant
// digits below 0.1% so a small share does not read as zero.
func pct(v float64) string {
	if v != 0 && math.Abs(v) < 0.001 {
		return fmt.Sprintf("%.2g%%", 100*v)
	}
	return fmt.Sprintf("%.1f%%", 100*v)
}

func fmtValue(v float64) string {
	return fmt.Sprintf("%.6g", v)
}

// singleBranch reports whether every row of col takes the same branch at
// all of a model's numeric splits on the feature, given their sorted
// thresholds th and the model's rule (no missing rows, all values in one
// interval between consecutive thresholds).
func singleBranch(th []float64, rule forest.Rule, col []float64) bool {
	if len(th) == 0 {
		return false
	}
	bin := -1
	for _, v := range col {
		if v != v {
			return false
		}
		var b int
		if rule == forest.LessThanFloat32 {
			x := float64(float32(v))
			b = sort.Search(len(th), func(i int) bool { return th[i] > x })
		} else {
			b = sort.SearchFloat64s(th, v)
		}
		if bin >= 0 && b != bin {
			return false
		}
		bin = b
	}
	return bin >= 0
}

// unreachableGainShare is the share of the feature's split gain on splits
// whose threshold lies outside [lo, hi], so that non-missing rows all take
// one side. NaN without gain statistics.
func unreachableGainShare(e *forest.Ensemble, name string, lo, hi float64) float64 {
	j := slices.Index(e.FeatureNames, name)
	if j < 0 || lo != lo {
		return 0
	}
	tot, out := 0.0, 0.0
	for ti := range e.Trees {
		t := &e.Trees[ti]
		if t.Gain == nil {
			return math.NaN()
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsLeaf() || int(n.Feature) != j || n.Flags&forest.FlagCategorical != 0 {
				continue
			}
			tot += t.Gain[i]
			var allRight, allLeft bool
			if e.Rule == forest.LessThanFloat32 {
				allRight = float64(float32(lo)) >= n.Threshold
				allLeft = float64(float32(hi)) < n.Threshold
			} else {
				allRight = lo > n.Threshold
				allLeft = hi <= n.Threshold
			}
			if allRight || allLeft {
				out += t.Gain[i]
			}
		}
	}
	if !(tot > 0) {
		return 0
	}
	return out / tot
}

// defaultCoverShare is the cover-weighted share of the training cover that
// went to the default child at e's splits on the feature (NaN without
// covers or splits).
func defaultCoverShare(e *forest.Ensemble, name string) float64 {
	j := slices.Index(e.FeatureNames, name)
	if j < 0 {
		return math.NaN()
	}
	num, den := 0.0, 0.0
	for ti := range e.Trees {
		t := &e.Trees[ti]
		if t.Cover == nil {
			return math.NaN()
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsLeaf() || int(n.Feature) != j {
				continue
			}
			d := n.Right
			if n.Flags&forest.FlagDefaultLeft != 0 {
				d = n.Left
			}
			num += t.Cover[d]
			den += t.Cover[i]
		}
	}
	if !(den > 0) {
		return math.NaN()
	}
	return num / den
}

// primary returns the policy's measure for a feature of a table (a zero
// estimate with share 0 when the table lacks the feature).
func primary(t *importance.Table, name, measure string) (importance.Estimate, bool) {
	nan := math.NaN()
	zero := importance.Estimate{Lo: nan, Hi: nan, ShareLo: nan, ShareHi: nan}
	if t == nil {
		return zero, false
	}
	f := t.Feature(name)
	if f == nil {
		return zero, false
	}
	structure := func(v float64) importance.Estimate {
		return importance.Estimate{Value: v, Lo: nan, Hi: nan, Share: v, ShareLo: nan, ShareHi: nan}
	}
	switch measure {
	case "split_share":
		return structure(f.SplitShare), true
	case "gain_share":
		return structure(f.GainShare), true
	case "cover_share":
		return structure(f.CoverShare), true
	}
	if f.Traffic == nil {
		return zero, true
	}
	for m := importance.TrafficMeasure(0); m < importance.NumTrafficMeasures; m++ {
		if m.String() == measure {
			return f.Traffic[m], true
		}
	}
	return zero, true
}

// ledger pairs the versions and flags collapse, surge, dropped and added.
func (c *comparer) ledger() {
	bt := c.in.BaselineTable
	weekly := c.in.BaselineOwnTable != nil
	if weekly {
		bt = c.in.BaselineOwnTable
		c.r.Notes = append(c.r.Notes, "shares compare the baseline model on its own week with the candidate model on the candidate week (independent bootstrap replicates)")
	} else {
		c.r.Notes = append(c.r.Notes, "shares compare both models on the same traffic sample (paired bootstrap: the same weights for both)")
	}
	ct := c.in.CandidateTable
	conf := ct.Confidence
	if !(conf > 0) {
		conf = 0.95
	}
	floor := c.p.ShareFloor
	for _, name := range c.names {
		be, inB := primary(bt, name, c.p.Measure)
		ce, inC := primary(ct, name, c.p.Measure)
		row := LedgerRow{Feature: name, InBaseline: inB, InCandidate: inC, Baseline: be, Candidate: ce}
		sb, sc := nz(be.Share), nz(ce.Share)
		row.Ratio = (sc + floor) / (sb + floor)
		row.RatioLo, row.RatioHi = math.NaN(), math.NaN()
		if be.ShareReplicates != nil && ce.ShareReplicates != nil && len(be.ShareReplicates) == len(ce.ShareReplicates) {
			lr := make([]float64, len(be.ShareReplicates))
			for b := range lr {
				lr[b] = math.Log((nz(ce.ShareReplicates[b]) + floor) / (nz(be.ShareReplicates[b]) + floor))
			}
			lo, hi := bootstrap.PercentileInterval(lr, conf)
			row.RatioLo, row.RatioHi = math.Exp(lo), math.Exp(hi)
		}
		usedB := inB && splits(bt, name) > 0
		usedC := inC && splits(ct, name) > 0
		switch {
		case usedB && !usedC:
			sev := SeverityInfo
			if sb >= c.p.MajorShare {
				sev = SeverityWarn
			}
			c.add(Flag{Kind: KindDropped, Feature: name, Severity: sev,
				Evidence: []Evidence{ev("baseline_share", sb)},
				Message:  fmt.Sprintf("used by the baseline (share %.1f%%), not by the candidate", 100*sb)})
		case usedC && !usedB:
			sev := SeverityInfo
			if sc >= c.p.MajorShare {
				sev = SeverityWarn
			}
			c.add(Flag{Kind: KindAdded, Feature: name, Severity: sev,
				Evidence: []Evidence{ev("candidate_share", sc)},
				Message:  fmt.Sprintf("used by the candidate (share %.1f%%), not by the baseline", 100*sc)})
		case usedB && usedC && math.Max(sb, sc) >= c.p.MinShare:
			noInterval := row.RatioLo != row.RatioLo
			e := Evidence{Name: "share_ratio", Value: row.Ratio, Lo: row.RatioLo, Hi: row.RatioHi}
			if row.Ratio <= 1/c.p.CollapseFactor && (noInterval || row.RatioHi < 1) {
				c.add(Flag{Kind: KindCollapsed, Feature: name, Severity: SeverityWarn,
					Evidence: []Evidence{ev("baseline_share", sb), ev("candidate_share", sc), e},
					Message:  fmt.Sprintf("share of %s fell from %s to %s (x%.2g)", c.p.Measure, pct(sb), pct(sc), row.Ratio)})
			}
			if row.Ratio >= c.p.SurgeFactor && (noInterval || row.RatioLo > 1) {
				c.add(Flag{Kind: KindSurged, Feature: name, Severity: SeverityWarn,
					Evidence: []Evidence{ev("baseline_share", sb), ev("candidate_share", sc), e},
					Message:  fmt.Sprintf("share of %s rose from %s to %s (x%.3g)", c.p.Measure, pct(sb), pct(sc), row.Ratio)})
			}
		}
		c.r.Ledger = append(c.r.Ledger, row)
	}
}

func nz(v float64) float64 {
	if v != v {
		return 0
	}
	return v
}

// removals names removal candidates and prices them.
func (c *comparer) removals() {
	ct := c.in.CandidateTable
	q := math.Abs(c.in.BaselineTable.Quality.Value)
	tol := c.p.RemovalTolerance * q
	if c.in.Catalog == nil {
		return
	}
	if ct.Metric == importance.MetricMeanAbsDelta {
		c.r.Notes = append(c.r.Notes, "no label column: removal candidates need a quality metric, so none are named")
		return
	}
	cat := c.in.Catalog
	c.r.CostUnit = cat.Unit
	isCand := map[string]bool{}
	risk := map[string]float64{}
	for name, cost := range cat.Costs {
		if cost.CostPer1kRows <= 0 {
			continue
		}
		if c.has(name, KindWentConstant) || c.has(name, KindMissingSpike) {
			continue // zero drops there mean a broken input, not a useless one
		}
		f := ct.Feature(name)
		if f == nil {
			if slices.Contains(c.names, name) { // baseline-only feature
				isCand[name], risk[name] = true, 0
			}
			continue
		}
		if f.Traffic == nil {
			continue
		}
		mb := f.Traffic[importance.MissingBreakDrop]
		pd := f.Traffic[importance.PermutationDrop]
		hiM, hiP := upper(mb), upper(pd)
		if hiM < tol && hiP < tol {
			isCand[name] = true
			risk[name] = math.Max(hiM, hiP)
		}
	}
	groups := map[string][]string{}
	for name, cost := range cat.Costs {
		if cost.Group != "" {
			groups[cost.Group] = append(groups[cost.Group], name)
		}
	}
	for g := range groups {
		sort.Strings(groups[g])
	}
	var out []Removal
	for name := range isCand {
		cost := cat.Costs[name]
		rm := Removal{Feature: name, Group: cost.Group, CostPer1kRows: cost.CostPer1kRows, Unit: cat.Unit, Risk: risk[name]}
		rm.Saving = cost.CostPer1kRows
		if cost.Group != "" {
			total := 0.0
			for _, m := range groups[cost.Group] {
				total += cat.Costs[m].CostPer1kRows
				if !isCand[m] {
					rm.Blockers = append(rm.Blockers, m)
				}
			}
			rm.CostPer1kRows = total
			rm.Saving = 0
			if len(rm.Blockers) == 0 {
				// the group's saving is listed once, on its first member
				if groups[cost.Group][0] == name {
					rm.Saving = total
				}
			}
		}
		rm.PerDay, rm.Per30Days = math.NaN(), math.NaN()
		if c.in.RowsPerDay > 0 {
			rm.PerDay = rm.Saving * c.in.RowsPerDay / 1000
			rm.Per30Days = 30 * rm.PerDay
		}
		out = append(out, rm)
		c.add(Flag{Kind: KindRemovalCandidate, Feature: name, Severity: SeverityInfo,
			Evidence: []Evidence{ev("risk_upper", rm.Risk), ev("saving_per_1k_rows", rm.Saving)},
			Message:  removalMessage(rm, tol)})
	}
	sort.Slice(out, func(i, j int) bool {
		ki := out[i].Saving / math.Max(out[i].Risk, 1e-12)
		kj := out[j].Saving / math.Max(out[j].Risk, 1e-12)
		if ki != kj {
			return ki > kj
		}
		return out[i].Feature < out[j].Feature
	})
	c.r.Removals = out
	for _, name := range c.names {
		if splits(ct, name) > 0 {
			if _, ok := cat.Costs[name]; !ok {
				c.r.Unpriced = append(c.r.Unpriced, name)
			}
		}
	}
}

func upper(e importance.Estimate) float64 {
	if e.Hi == e.Hi {
		return e.Hi
	}
	return e.Value
}

func removalMessage(rm Removal, tol float64) string {
	s := fmt.Sprintf("no-retrain loss below the tolerance (upper bound %.3g < %.3g); saves %s %s per 1k rows", rm.Risk, tol, fmtValue(rm.Saving), rm.Unit)
	if len(rm.Blockers) > 0 {
		s += "; group " + rm.Group + " is saved only with " + strings.Join(rm.Blockers, ", ")
	}
	return s
}

// hints combines each feature's flags into one hint.
func (c *comparer) hints() {
	for name, fl := range c.flags {
		has := func(k string) bool { return c.has(name, k) }
		traffic := has(KindWentConstant) || has(KindMissingSpike) || has(KindShifted) || has(KindOutOfRange)
		hint := ""
		switch {
		case traffic && (has(KindCollapsed) || has(KindSurged) || has(KindWentConstant) || has(KindMissingSpike) || has(KindDropped)):
			hint = HintPipelineSuspect
		case has(KindCollapsed) || has(KindSurged):
			hint = HintModelShift
		case has(KindRemovalCandidate):
			hint = HintPrune
		}
		for _, f := range fl {
			f.Hint = hint
			if hint == HintPipelineSuspect && f.Kind == KindCollapsed {
				f.Severity = SeverityFail
			}
		}
	}
}

func (c *comparer) finish() {
	sevOrder := func(f *Flag) int { return -int(f.Severity) }
	sort.SliceStable(c.all, func(i, j int) bool {
		a, b := c.all[i], c.all[j]
		if sevOrder(a) != sevOrder(b) {
			return sevOrder(a) < sevOrder(b)
		}
		if a.Feature != b.Feature {
			return a.Feature < b.Feature
		}
		return a.Kind < b.Kind
	})
	verdict := VerdictPass
	for _, f := range c.all {
		c.r.Flags = append(c.r.Flags, *f)
		switch f.Severity {
		case SeverityFail:
			verdict = VerdictFail
		case SeverityWarn:
			if verdict == VerdictPass {
				verdict = VerdictWarn
			}
		}
	}
	c.r.Verdict = verdict
	for i := range c.r.Ledger {
		row := &c.r.Ledger[i]
		for _, f := range c.flags[row.Feature] {
			row.Flags = append(row.Flags, f.Kind)
			row.Hint = f.Hint
		}
		sort.Strings(row.Flags)
		row.Flags = slices.Compact(row.Flags)
	}
	sort.SliceStable(c.r.Ledger, func(i, j int) bool {
		a, b := c.r.Ledger[i], c.r.Ledger[j]
		da, db := math.Abs(math.Log(a.Ratio)), math.Abs(math.Log(b.Ratio))
		if da != db {
			return da > db
		}
		return a.Feature < b.Feature
	})
	seen := map[string]bool{}
	for _, t := range []*importance.Table{c.in.BaselineTable, c.in.CandidateTable, c.in.BaselineOwnTable} {
		if t == nil {
			continue
		}
		for _, n := range t.Notes {
			if !seen[n] {
				seen[n] = true
				c.r.Notes = append(c.r.Notes, n)
			}
		}
	}
}
