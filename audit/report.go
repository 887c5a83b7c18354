// Package audit compares two model versions on traffic: it pairs features
// across versions, applies the flag rules of a Policy, prices removal
// candidates from a cost catalog and decides the verdict. It computes; the
// reports package only renders its Report.
package audit

import (
	"fmt"
	"time"

	"splitledger/importance"
)

// Severity orders how much a flag matters for the gate.
type Severity int

const (
	// SeverityInfo is reported but never moves the verdict.
	SeverityInfo Severity = iota
	// SeverityWarn makes the verdict at least warn.
	SeverityWarn
	// SeverityFail makes the verdict fail.
	SeverityFail
)

// String gives "info", "warn" or "fail".
func (s Severity) String() string {
	switch s {
	case SeverityInfo:
		return "info"
	case SeverityWarn:
		return "warn"
	case SeverityFail:
		return "fail"
	default:
		return fmt.Sprintf("severity(%d)", int(s))
	}
}

// Flag kinds (the project's vocabulary).
const (
	KindCollapsed        = "collapsed"
	KindSurged           = "surged"
	KindWentConstant     = "went-constant"
	KindMissingSpike     = "missing-spike"
	KindOutOfRange       = "out-of-range"
	KindShifted          = "shifted"
	KindDropped          = "dropped"
	KindAdded            = "added"
	KindRemovalCandidate = "removal-candidate"
)

// Hints combine flags into a reading of the cause.
const (
	// HintPipelineSuspect: the feature's use changed together with its
	// traffic (constant, missing, shifted): check the producer first.
	HintPipelineSuspect = "pipeline-suspect"
	// HintModelShift: the feature's share moved while its traffic is
	// stable: the model changed how it uses the feature.
	HintModelShift = "model-shift"
	// HintPrune: the feature costs compute and adds nothing measurable.
	HintPrune = "prune"
)

// Verdicts.
const (
	VerdictPass = "pass"
	VerdictWarn = "warn"
	VerdictFail = "fail"
)

// Evidence is one number behind a flag, with its interval when it has one
// (Lo/Hi NaN otherwise).
type Evidence struct {
	Name  string
	Value float64
	Lo    float64
	Hi    float64
}

// Flag is one finding about one feature.
type Flag struct {
	Kind     string
	Feature  string
	Severity Severity
	// Sample names the traffic sample a traffic flag was seen in
	// ("candidate traffic", "baseline traffic"), "" for model flags.
	Sample   string
	Evidence []Evidence
	// Hint is one of the Hint constants, or "".
	Hint string
	// Message is one line for people.
	Message string
	// Streak counts the consecutive recorded runs, this one included, in
	// which the flag fired for the feature (1 = new); 0 without history.
	Streak int
}

// ModelInfo describes one model input.
type ModelInfo struct {
	Role      string // "baseline" or "candidate"
	Path      string
	SHA256    string
	Bytes     int64
	Format    string
	Objective string
	Trees     int
	Features  int
	Used      int
}

// TrafficInfo describes one traffic sample input.
type TrafficInfo struct {
	Role           string // "candidate traffic" or "baseline traffic"
	Path           string
	SHA256         string // of the files' bytes, in path order
	Bytes          int64
	Rows           int
	TotalRows      int64
	SampleFraction float64
	Units          int
}

// LedgerRow is one feature's line: its share of the primary measure in
// both versions and the change, with paired intervals.
type LedgerRow struct {
	Feature string
	// InBaseline / InCandidate: the version declares the feature.
	InBaseline, InCandidate bool
	// Baseline and Candidate are the primary measure (value, interval,
	// share and share interval) in each version.
	Baseline, Candidate importance.Estimate
	// Ratio is candidate share / baseline share (with a small floor, see
	// Policy.ShareFloor); RatioLo/RatioHi its bootstrap interval.
	Ratio, RatioLo, RatioHi float64
	// Flags are the kinds fired for the feature, Hint the combined hint.
	Flags []string
	Hint  string
}

// Removal is one removal candidate with its saving.
type Removal struct {
	Feature string
	Group   string
	// CostPer1kRows is the feature's (or its group's) catalog cost, in Unit.
	CostPer1kRows float64
	Unit          string
	// Saving is what dropping it saves per 1k rows (0 when blocked);
	// PerDay and Per30Days scale it by Inputs.RowsPerDay (NaN without it).
	Saving, PerDay, Per30Days float64
	// Risk is the upper bound of the no-retrain quality loss (max of the
	// missing-break and permutation drop upper bounds), in metric units.
	Risk float64
	// Blockers are group members that are not removal candidates: the
	// group's saving needs all of them gone.
	Blockers []string
}

// Health is one feature's traffic state.
type Health struct {
	Feature string
	// Missing shares in the baseline and candidate samples (NaN: no sample).
	MissingBaseline, MissingCandidate float64
	// TopValueShare is the share of candidate rows holding the most common
	// non-missing value; TopValue that value.
	TopValueShare, TopValue float64
	// Min and Max of the candidate sample's non-missing values.
	Min, Max float64
	// PSI and KS compare the two samples (NaN without a baseline sample).
	PSI, KS float64
}

// RunInfo says how the run was made.
type RunInfo struct {
	Version    string
	Started    time.Time
	Duration   time.Duration
	Seed       uint64
	Replicates int
	Confidence float64
	Repeats    int
	Metric     string
	Measure    string
	Workers    int
}

// Report is the whole result of a comparison.
type Report struct {
	Verdict string
	Run     RunInfo
	Models  []ModelInfo
	Traffic []TrafficInfo
	Policy  Policy
	// Quality is each version's metric on the candidate traffic.
	BaselineQuality, CandidateQuality importance.Estimate
	// Ledger has one row per feature of either version, sorted by change.
	Ledger []LedgerRow
	Flags  []Flag
	// Removals are ranked by saving per unit of risk; Unpriced lists used
	// features absent from the cost catalog.
	Removals []Removal
	Unpriced []string
	CostUnit string
	Health   []Health
	// Notes explain the run's choices (from the importance tables and the
	// audit); Cautions are the standing warnings every report carries.
	Notes    []string
	Cautions []string
	// Tables are the importance ledgers behind the report: baseline and
	// candidate on the candidate traffic, and the baseline on its own
	// traffic when given (nil otherwise).
	BaselineTable, CandidateTable, BaselineOwnTable *importance.Table
}

// Cautions every report carries: importance is association, credit is
// shared, removals need retraining and an experiment, and people-facing
// models fall under review.
var Cautions = []string{
	"Importance measures association with the model's output on this traffic, not causation.",
	"Correlated features share credit and can hide each other: a low share does not mean the information is unused.",
	"A removal is confirmed only by retraining without the feature and an online experiment; the estimates here do not retrain.",
	"Where the model decides about people (credit, housing, insurance, employment), changing its inputs can fall under regulation and fairness review: follow your organisation's model-risk process and local rules.",
}
