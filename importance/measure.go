package importance

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"splitledger/importance/bootstrap"
	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/importance/metrics"
	"splitledger/importance/parallel"
	"splitledger/importance/treeshap"
)

// TrafficMeasure names a per-feature measure computed on a traffic sample.
type TrafficMeasure int

const (
	// PermutationDrop is the quality lost when the feature's column is
	// shuffled across rows.
	PermutationDrop TrafficMeasure = iota
	// MissingBreakDrop is the quality lost when the feature is missing in
	// every row (each split takes its default branch): the no-retrain
	// estimate of removing the feature.
	MissingBreakDrop
	// FreezeDrop is the quality lost when the feature is stuck at its
	// median over the sample.
	FreezeDrop
	// PathShare is the share of rows whose path in at least one tree tests
	// the feature.
	PathShare
	// TestsPerRow is the mean number of nodes testing the feature on a
	// row's paths, summed over trees.
	TestsPerRow
	// MeanAbsSHAP is the mean over rows of |SHAP value| (raw margin,
	// summed over classes), path-dependent TreeSHAP.
	MeanAbsSHAP
	// NumTrafficMeasures counts the measures above.
	NumTrafficMeasures
)

// String gives the measure's report and JSON name.
func (m TrafficMeasure) String() string {
	switch m {
	case PermutationDrop:
		return "permutation_drop"
	case MissingBreakDrop:
		return "missing_break_drop"
	case FreezeDrop:
		return "freeze_drop"
	case PathShare:
		return "path_share"
	case TestsPerRow:
		return "tests_per_row"
	case MeanAbsSHAP:
		return "mean_abs_shap"
	default:
		return fmt.Sprintf("measure(%d)", int(m))
	}
}

// Estimate is a traffic-based value with its bootstrap interval and its share
// of the total over features. Lo/Hi are NaN when no interval was computed;
// Share is NaN when the total is not positive.
type Estimate struct {
	Value, Lo, Hi           float64
	Share, ShareLo, ShareHi float64
	// Replicates and ShareReplicates hold the bootstrap values (len B), in
	// replicate order; two tables measured on the same sample with the same
	// seed share the weights, so replicate b of both can be paired.
	Replicates      []float64 `json:"-"`
	ShareReplicates []float64 `json:"-"`
}

// FeatureRow is one feature's line of the ledger.
type FeatureRow struct {
	Feature    string
	SplitCount int
	TotalGain  float64
	MeanGain   float64
	TotalCover float64
	MeanCover  float64
	// SplitShare, GainShare and CoverShare divide the structure measures
	// by their totals over features (NaN when the total is 0 or unknown).
	SplitShare, GainShare, CoverShare float64
	// Traffic holds the traffic measures indexed by TrafficMeasure; nil
	// when no traffic was given. MeanAbsSHAP is NaN when SHAP was off.
	Traffic []Estimate
	// Absent marks a feature that the traffic did not carry (all missing).
	Absent bool
}

// Table is the per-feature ledger of one model (optionally on one traffic
// sample).
type Table struct {
	Model      string
	Features   []FeatureRow
	Metric     Metric
	K          int
	Gain       metrics.Gain
	NoRelevant metrics.NoRelevant
	// Quality is the unperturbed metric on the sample with its interval.
	Quality Estimate
	// Rows and Units are the sample's row count and bootstrap unit count
	// (query groups, or rows); ValidUnits the units that count for the
	// metric (groups with a relevant item for NDCG).
	Rows, Units, ValidUnits int
	Replicates              int
	Confidence              float64
	Seed                    uint64
	Repeats                 int
	// SHAPRows is the number of rows mean |SHAP| was computed on (0: off).
	SHAPRows int
	// Notes explain choices the reader must know (metric fallback, sampled
	// SHAP, exact expectations).
	Notes []string
}

// Feature returns the row of the named feature, or nil.
func (t *Table) Feature(name string) *FeatureRow {
	for i := range t.Features {
		if t.Features[i].Feature == name {
			return &t.Features[i]
		}
	}
	return nil
}

// ErrNoRows is returned when the traffic sample has no row to measure.
var ErrNoRows = errors.New("traffic sample has no rows")

// MeasureModel builds the ledger of e. With f == nil only the structure
// measures are filled. Model names the model in the table.
func MeasureModel(e *forest.Ensemble, model string, f *frame.Frame, cfg Config) (*Table, error) {
	st := MeasureStructure(e)
	t := &Table{Model: model}
	t.Features = make([]FeatureRow, e.NumFeatures())
	totSplit, totGain, totCover := 0.0, 0.0, 0.0
	for j := range t.Features {
		totSplit += float64(st.SplitCount[j])
		totGain += st.TotalGain[j]
		totCover += st.TotalCover[j]
	}
	for j, name := range e.FeatureNames {
		t.Features[j] = FeatureRow{
			Feature:    name,
			SplitCount: st.SplitCount[j],
			TotalGain:  st.TotalGain[j], MeanGain: st.MeanGain[j],
			TotalCover: st.TotalCover[j], MeanCover: st.MeanCover[j],
			SplitShare: ratio(float64(st.SplitCount[j]), totSplit),
			GainShare:  ratio(st.TotalGain[j], totGain),
			CoverShare: ratio(st.TotalCover[j], totCover),
		}
	}
	if f == nil {
		return t, nil
	}
	if err := measureTraffic(e, f, cfg, t); err != nil {
		return nil, err
	}
	return t, nil
}

func ratio(a, b float64) float64 {
	if !(b > 0) {
		return math.NaN()
	}
	return a / b
}

// columnsFor maps the ensemble's features to frame columns; features the
// frame lacks read as all-missing.
func columnsFor(e *forest.Ensemble, f *frame.Frame) ([][]float64, []bool) {
	idx := make(map[string]int, len(f.Names))
	for i, n := range f.Names {
		idx[n] = i
	}
	cols := make([][]float64, e.NumFeatures())
	absent := make([]bool, e.NumFeatures())
	var missing []float64
	for j, name := range e.FeatureNames {
		if i, ok := idx[name]; ok {
			cols[j] = f.Columns[i]
			if f.Absent != nil && f.Absent[i] {
				absent[j] = true
			}
			continue
		}
		if missing == nil {
			missing = make([]float64, f.Rows)
			for r := range missing {
				missing[r] = math.NaN()
			}
		}
		cols[j] = missing
		absent[j] = true
	}
	return cols, absent
}

// layout of the per-unit sums matrix
type layout struct {
	nf                          int
	denMetric, denRows, denSHAP int
	base                        int
	drop                        int // 3 per feature: perm, miss, freeze
	path, tests, shap           int // 1 per feature
	cols                        int
}

func newLayout(nf int) layout {
	l := layout{nf: nf, denMetric: 0, denRows: 1, denSHAP: 2, base: 3}
	l.drop = 4
	l.path = l.drop + 3*nf
	l.tests = l.path + nf
	l.shap = l.tests + nf
	l.cols = l.shap + nf
	return l
}

// measureTraffic fills the traffic measures of t.
func measureTraffic(e *forest.Ensemble, f *frame.Frame, cfg Config, t *Table) error {
	cfg = cfg.withDefaults()
	if f.Rows == 0 {
		return ErrNoRows
	}
	metric, k, err := ResolveMetric(cfg.Metric, cfg.K, e.Task, f.Label != nil)
	if err != nil {
		return err
	}
	if metric == MetricNDCG {
		if f.Group == nil {
			return fmt.Errorf("metric ndcg needs a query group column (--group)")
		}
		if err := metrics.CheckRelevance(f.Label); err != nil {
			return fmt.Errorf("label column: %w", err)
		}
	}
	if metric == MetricLogLoss && e.NumClass == 1 {
		if err := metrics.CheckBinary(f.Label); err != nil {
			return fmt.Errorf("label column: %w", err)
		}
	}
	if metric == MetricLogLoss && e.NumClass > 1 {
		if err := metrics.CheckClasses(f.Label, e.NumClass); err != nil {
			return fmt.Errorf("label column: %w", err)
		}
	}
	if metric == MetricAUC {
		if e.NumClass != 1 {
			return fmt.Errorf("metric auc needs a single-output model (this one has %d classes)", e.NumClass)
		}
		if err := metrics.CheckBinary(f.Label); err != nil {
			return fmt.Errorf("label column: %w", err)
		}
	}
	if metric == MetricRMSE && e.NumClass != 1 {
		return fmt.Errorf("metric rmse needs a single-output model (this one has %d classes)", e.NumClass)
	}
	if f.Label != nil && metric != MetricNDCG {
		for r, y := range f.Label {
			if math.IsNaN(y) || math.IsInf(y, 0) {
				return fmt.Errorf("label column: row %d: value %v is not a finite number", r, y)
			}
		}
	}
	if f.Weight != nil {
		if err := metrics.CheckWeights(f.Weight); err != nil {
			return fmt.Errorf("weight column: %w", err)
		}
	}
	t.Metric, t.K, t.Gain, t.NoRelevant = metric, k, cfg.Gain, cfg.NoRelevant
	t.Replicates, t.Confidence, t.Seed, t.Repeats = cfg.Replicates, cfg.Confidence, cfg.Seed, cfg.Repeats
	t.Rows = f.Rows
	if metric.additive() {
		t.Repeats = 0
		t.Notes = append(t.Notes, "permutation drop is the exact expectation over all shuffles (the metric is a mean of per-row terms)")
	} else {
		t.Notes = append(t.Notes, fmt.Sprintf("permutation drop averages %d shuffles (the same shuffles for every feature)", cfg.Repeats))
	}
	if f.Label == nil {
		t.Notes = append(t.Notes, "the sample has no label: drops are mean |change in raw score|, not quality")
	}

	run, err := newRun(e, f, cfg, metric, k)
	if err != nil {
		return err
	}
	for j := range t.Features {
		t.Features[j].Absent = run.absent[j]
	}
	t.Units, t.ValidUnits = len(run.units), 0
	run.compute()
	if metric.additive() {
		run.linearizePermutation()
	}
	for u := range run.units {
		if run.sums[u*run.lay.cols+run.lay.denMetric] > 0 {
			t.ValidUnits++
		}
	}
	if t.ValidUnits == 0 {
		if metric == MetricNDCG {
			return fmt.Errorf("no query group has a relevant item: NDCG is undefined on this sample")
		}
		return fmt.Errorf("every row has weight 0: the metric is undefined on this sample")
	}
	t.SHAPRows = run.shapRows
	if run.shapRows > 0 && run.shapRows < f.Rows {
		t.Notes = append(t.Notes, fmt.Sprintf("mean |SHAP| computed on %d of %d rows (whole units, fixed stride)", run.shapRows, f.Rows))
	}
	run.summarise(t)
	return nil
}

// run holds one measurement's shared, read-only inputs and its outputs.
type run struct {
	e      *forest.Ensemble
	f      *frame.Frame
	cfg    Config
	metric Metric
	k      int
	cols   [][]float64
	absent []bool
	vc     []valueClasses
	splits [][]nodeSplit
	walk   [][]wnode
	masks  *maskForest // leaf-mask form of the trees that qualify
	// per feature, offsets of its difference array and touched-bin bits in
	// a row's flat arrays (rowState.diff, .mark); zero length if categorical
	diffOff, markOff []int32
	init             []pathState // per feature: every class still on the path
	// class distributions of each feature in the traffic (weighted),
	// numeric: prefix sums over bins; special classes separately
	prefix    [][]float64
	pClass    [][]float64 // categorical: mass per class; numeric: [missing, zero]
	medianC   []int       // class of the median per feature
	rowClass  []int32     // shuffled metrics: each row's class per feature, row by row (rows x features)
	perms     [][]int32   // per repeat, a permutation of rows: row i takes row perms[k][i]'s values
	units     [][]int32
	chunks    [][2]int // unit ranges
	lay       layout
	sums      []float64 // units x lay.cols
	shapOn    []bool    // unit is in the SHAP subsample
	shapAt    []int32   // per row: offset of its |SHAP| values in shapAbs, -1 if not sampled
	shapAbs   []float64 // sampled rows x features, |SHAP| summed over classes
	shapRows  int
	aucScores [][]float64 // AUC only: per (feature, perturbation) scores
	aucBase   []float64
	boot      *bootstrap.Weights
	// additive metrics: per chunk, per feature, loss sums by value class
	// (numeric: a difference array over bins, then missing and zero;
	// categorical: per class), the last entry of each feature a constant
	// added to every class; colOff gives each feature's offset.
	colSums [][]float64
	colOff  []int
}

func newRun(e *forest.Ensemble, f *frame.Frame, cfg Config, metric Metric, k int) (*run, error) {
	r := &run{e: e, f: f, cfg: cfg, metric: metric, k: k}
	r.cols, r.absent = columnsFor(e, f)
	nf := e.NumFeatures()
	medians := make([]float64, nf)
	parallel.Chunks(nf, 1, cfg.Workers, func(_, j, _ int) {
		medians[j] = medianOf(r.cols[j])
	})
	r.vc = buildClasses(e, r.cols, medians)
	r.splits = compileSplits(e, r.vc)
	r.walk = compileWalk(e, r.splits, r.vc)
	r.masks = compileMasks(e, r.splits, r.vc, cfg.Workers)
	r.diffOff, r.markOff = make([]int32, nf+1), make([]int32, nf+1)
	for j := range r.vc {
		nd, nm := 0, 0
		if !r.vc[j].categorical {
			nd, nm = (r.vc[j].nb+1)*e.NumClass, (r.vc[j].nb+1+63)/64
		}
		r.diffOff[j+1] = r.diffOff[j] + int32(nd)
		r.markOff[j+1] = r.markOff[j] + int32(nm)
	}
	r.masks.placeRow(r.diffOff, r.markOff, e.NumClass)
	r.init = make([]pathState, nf)
	for j := range r.vc {
		r.init[j] = pathState{lo: 0, hi: int32(r.vc[j].nb), m: true, z: r.vc[j].zeroMode}
	}
	r.medianC = make([]int, nf)
	for j := range medians {
		r.medianC[j] = r.vc[j].classOf(medians[j])
	}
	// class masses
	r.prefix = make([][]float64, nf)
	r.pClass = make([][]float64, nf)
	if metric.additive() {
		parallel.Chunks(nf, 1, cfg.Workers, func(_, j, _ int) {
			c := &r.vc[j]
			mass := make([]float64, c.n)
			total := 0.0
			for row, v := range r.cols[j] {
				w := 1.0
				if f.Weight != nil {
					w = f.Weight[row]
				}
				mass[c.classOf(v)] += w
				total += w
			}
			for i := range mass {
				mass[i] /= total
			}
			if c.categorical {
				r.pClass[j] = mass
				return
			}
			p := make([]float64, c.nb+1)
			for b := 0; b < c.nb; b++ {
				p[b+1] = p[b] + mass[b]
			}
			r.prefix[j] = p
			r.pClass[j] = mass[c.nb:]
		})
	} else {
		// row by row, so a shuffle's donor row is one read (two cache
		// lines), not one per feature
		r.rowClass = make([]int32, f.Rows*nf)
		parallel.Chunks(f.Rows, 4096, cfg.Workers, func(_, lo, hi int) {
			for j := range r.vc {
				c, col := &r.vc[j], r.cols[j]
				for row := lo; row < hi; row++ {
					r.rowClass[row*nf+j] = int32(c.classOf(col[row]))
				}
			}
		})
		rng := rand.New(rand.NewPCG(cfg.Seed, 0x5eed5eed))
		r.perms = make([][]int32, cfg.Repeats)
		for i := range r.perms {
			p := make([]int32, f.Rows)
			for row := range p {
				p[row] = int32(row)
			}
			rng.Shuffle(len(p), func(a, b int) { p[a], p[b] = p[b], p[a] })
			r.perms[i] = p
		}
	}
	// units: query groups (metric and bootstrap clusters), else rows
	if f.Group != nil {
		r.units = f.Groups()
	} else {
		r.units = make([][]int32, f.Rows)
		for row := range r.units {
			r.units[row] = []int32{int32(row)}
		}
	}
	lo, rows := 0, 0
	for u := range r.units {
		rows += len(r.units[u])
		if rows >= 1024 {
			r.chunks = append(r.chunks, [2]int{lo, u + 1})
			lo, rows = u+1, 0
		}
	}
	if lo < len(r.units) {
		r.chunks = append(r.chunks, [2]int{lo, len(r.units)})
	}
	r.lay = newLayout(nf)
	if metric.additive() {
		r.colOff = make([]int, nf+1)
		for j := range r.vc {
			n := r.vc[j].n + 1
			if !r.vc[j].categorical {
				n = r.vc[j].nb + 4 // diff (nb+1), missing, zero, constant
			}
			r.colOff[j+1] = r.colOff[j] + n
		}
		r.colSums = make([][]float64, len(r.chunks))
	}
	r.sums = make([]float64, len(r.units)*r.lay.cols)
	if cfg.SHAP {
		x, err := treeshap.New(e)
		if err != nil {
			return nil, fmt.Errorf("mean |SHAP|: %w", err)
		}
		r.shapOn = make([]bool, len(r.units))
		stride := 1
		if f.Rows > cfg.SHAPRows {
			stride = (f.Rows + cfg.SHAPRows - 1) / cfg.SHAPRows
		}
		var rows []int32
		for u := 0; u < len(r.units); u += stride {
			r.shapOn[u] = true
			rows = append(rows, r.units[u]...)
		}
		r.shapRows = len(rows)
		sub := make([][]float64, nf)
		for j := range sub {
			c := make([]float64, len(rows))
			for i, row := range rows {
				c[i] = r.cols[j][row]
			}
			sub[j] = c
		}
		r.shapAbs = make([]float64, len(rows)*nf)
		x.AbsRows(r.shapAbs, sub, len(rows), cfg.Workers)
		r.shapAt = make([]int32, f.Rows)
		for i := range r.shapAt {
			r.shapAt[i] = -1
		}
		for i, row := range rows {
			r.shapAt[row] = int32(i * nf)
		}
	}
	if metric == MetricAUC {
		r.aucBase = make([]float64, f.Rows)
		r.aucScores = make([][]float64, nf*(cfg.Repeats+2))
		for i := range r.aucScores {
			r.aucScores[i] = make([]float64, f.Rows)
		}
	}
	return r, nil
}

func medianOf(col []float64) float64 {
	fr := frame.Frame{Columns: [][]float64{col}, Rows: len(col)}
	return fr.Median(0)
}
