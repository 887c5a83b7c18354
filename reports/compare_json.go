package reports

import (
	"io"
	"time"

	"splitledger/audit"
	"splitledger/importance"
)

// CompareJSONSchema names the JSON layout written by CompareJSON. Keys are
// documented in SCHEMA.md; a change that removes or renames a key, or
// changes its meaning, needs a new version.
const CompareJSONSchema = "splitledger/compare/v1"

// The structs below fix the key order of the schema (encoding/json writes
// struct fields in declaration order). Every float is a Num: NaN and ±Inf
// are null.

type compareJSON struct {
	Schema     string           `json:"schema"`
	Verdict    string           `json:"verdict"`
	FlagCounts flagCountsJSON   `json:"flag_counts"`
	Run        runJSON          `json:"run"`
	Inputs     inputsJSON       `json:"inputs"`
	Policy     policyJSON       `json:"policy"`
	Quality    qualityJSON      `json:"quality"`
	Ledger     []ledgerRowJSON  `json:"ledger"`
	Flags      []flagJSON       `json:"flags"`
	Removals   []removalJSON    `json:"removals"`
	Unpriced   []string         `json:"unpriced"`
	CostUnit   string           `json:"cost_unit"`
	Health     []healthJSON     `json:"health"`
	Notes      []string         `json:"notes"`
	Cautions   []string         `json:"cautions"`
	Tables     compareTableJSON `json:"tables"`
}

type flagCountsJSON struct {
	Fail int `json:"fail"`
	Warn int `json:"warn"`
	Info int `json:"info"`
}

type runJSON struct {
	Version         string  `json:"version"`
	Started         *string `json:"started"`
	DurationSeconds Num     `json:"duration_seconds"`
	Seed            uint64  `json:"seed"`
	Replicates      int     `json:"replicates"`
	Confidence      Num     `json:"confidence"`
	Repeats         int     `json:"repeats"`
	Metric          string  `json:"metric"`
	Measure         string  `json:"measure"`
	Workers         int     `json:"workers"`
}

type inputsJSON struct {
	Models  []modelJSON   `json:"models"`
	Traffic []trafficJSON `json:"traffic"`
}

type modelJSON struct {
	Role      string `json:"role"`
	Path      string `json:"path"`
	SHA256    string `json:"sha256"`
	Bytes     int64  `json:"bytes"`
	Format    string `json:"format"`
	Objective string `json:"objective"`
	Trees     int    `json:"trees"`
	Features  int    `json:"features"`
	Used      int    `json:"features_used"`
}

type trafficJSON struct {
	Role           string `json:"role"`
	Path           string `json:"path"`
	SHA256         string `json:"sha256"`
	Bytes          int64  `json:"bytes"`
	Rows           int    `json:"rows"`
	TotalRows      int64  `json:"total_rows"`
	SampleFraction Num    `json:"sample_fraction"`
	Units          int    `json:"units"`
}

type policyJSON struct {
	Measure             string `json:"measure"`
	CollapseFactor      Num    `json:"collapse_factor"`
	SurgeFactor         Num    `json:"surge_factor"`
	MinShare            Num    `json:"min_share"`
	ShareFloor          Num    `json:"share_floor"`
	MajorShare          Num    `json:"major_share"`
	ConstantShare       Num    `json:"constant_share"`
	MissingSpikePoints  Num    `json:"missing_spike_points"`
	MissingHighShare    Num    `json:"missing_high_share"`
	RareDefaultCover    Num    `json:"rare_default_cover"`
	OutOfRangeGainShare Num    `json:"out_of_range_gain_share"`
	PSIWarn             Num    `json:"psi_warn"`
	PSIFail             Num    `json:"psi_fail"`
	PSIBins             int    `json:"psi_bins"`
	RemovalTolerance    Num    `json:"removal_tolerance"`
	FailOnWarn          bool   `json:"fail_on_warn"`
}

type intervalJSON struct {
	Value Num `json:"value"`
	Lo    Num `json:"lo"`
	Hi    Num `json:"hi"`
}

type qualityJSON struct {
	Metric    string       `json:"metric"`
	Baseline  intervalJSON `json:"baseline"`
	Candidate intervalJSON `json:"candidate"`
}

type shareEstimateJSON struct {
	Value   Num `json:"value"`
	Lo      Num `json:"lo"`
	Hi      Num `json:"hi"`
	Share   Num `json:"share"`
	ShareLo Num `json:"share_lo"`
	ShareHi Num `json:"share_hi"`
}

type ledgerRowJSON struct {
	Feature     string            `json:"feature"`
	InBaseline  bool              `json:"in_baseline"`
	InCandidate bool              `json:"in_candidate"`
	Baseline    shareEstimateJSON `json:"baseline"`
	Candidate   shareEstimateJSON `json:"candidate"`
	Ratio       Num               `json:"ratio"`
	RatioLo     Num               `json:"ratio_lo"`
	RatioHi     Num               `json:"ratio_hi"`
	Flags       []string          `json:"flags"`
	Hint        string            `json:"hint"`
}

type evidenceJSON struct {
	Name  string `json:"name"`
	Value Num    `json:"value"`
	Lo    Num    `json:"lo"`
	Hi    Num    `json:"hi"`
}

type flagJSON struct {
	Kind     string         `json:"kind"`
	Feature  string         `json:"feature"`
	Severity string         `json:"severity"`
	Sample   string         `json:"sample"`
	Evidence []evidenceJSON `json:"evidence"`
	Hint     string         `json:"hint"`
	Message  string         `json:"message"`
	Streak   int            `json:"streak"`
}

type removalJSON struct {
	Feature         string   `json:"feature"`
	Group           string   `json:"group"`
	CostPer1kRows   Num      `json:"cost_per_1k_rows"`
	Unit            string   `json:"unit"`
	SavingPer1kRows Num      `json:"saving_per_1k_rows"`
	SavingPerDay    Num      `json:"saving_per_day"`
	SavingPer30Days Num      `json:"saving_per_30_days"`
	Risk            Num      `json:"risk"`
	Blockers        []string `json:"blockers"`
}

type healthJSON struct {
	Feature          string `json:"feature"`
	MissingBaseline  Num    `json:"missing_baseline"`
	MissingCandidate Num    `json:"missing_candidate"`
	TopValueShare    Num    `json:"top_value_share"`
	TopValue         Num    `json:"top_value"`
	Min              Num    `json:"min"`
	Max              Num    `json:"max"`
	PSI              Num    `json:"psi"`
	KS               Num    `json:"ks"`
}

type compareTableJSON struct {
	Baseline    *tableJSON `json:"baseline,omitempty"`
	Candidate   *tableJSON `json:"candidate,omitempty"`
	BaselineOwn *tableJSON `json:"baseline_own,omitempty"`
}

// CompareJSON writes the whole comparison as one JSON object with schema
// CompareJSONSchema ("splitledger/compare/v1"), documented key by key in
// SCHEMA.md. Keys keep a fixed order, lists are [] rather than null when
// empty, NaN and ±Inf numbers are null, and strings are written as given.
func CompareJSON(w io.Writer, r *audit.Report) error {
	if r == nil {
		panic("reports: CompareJSON called with a nil report")
	}
	return writeJSON(w, compareJSONOf(r))
}

func compareJSONOf(r *audit.Report) compareJSON {
	out := compareJSON{
		Schema:   CompareJSONSchema,
		Verdict:  r.Verdict,
		Run:      runJSONOf(r.Run),
		Inputs:   inputsJSON{Models: []modelJSON{}, Traffic: []trafficJSON{}},
		Policy:   policyJSONOf(r.Policy),
		Ledger:   []ledgerRowJSON{},
		Flags:    []flagJSON{},
		Removals: []removalJSON{},
		Unpriced: nonNil(r.Unpriced),
		CostUnit: r.CostUnit,
		Health:   []healthJSON{},
		Notes:    nonNil(r.Notes),
		Cautions: nonNil(r.Cautions),
		Quality: qualityJSON{Metric: r.Run.Metric,
			Baseline:  intervalJSON{Num(r.BaselineQuality.Value), Num(r.BaselineQuality.Lo), Num(r.BaselineQuality.Hi)},
			Candidate: intervalJSON{Num(r.CandidateQuality.Value), Num(r.CandidateQuality.Lo), Num(r.CandidateQuality.Hi)}},
	}
	for _, m := range r.Models {
		out.Inputs.Models = append(out.Inputs.Models, modelJSON{Role: m.Role, Path: m.Path, SHA256: m.SHA256, Bytes: m.Bytes,
			Format: m.Format, Objective: m.Objective, Trees: m.Trees, Features: m.Features, Used: m.Used})
	}
	for _, t := range r.Traffic {
		out.Inputs.Traffic = append(out.Inputs.Traffic, trafficJSON{Role: t.Role, Path: t.Path, SHA256: t.SHA256, Bytes: t.Bytes,
			Rows: t.Rows, TotalRows: t.TotalRows, SampleFraction: Num(t.SampleFraction), Units: t.Units})
	}
	for _, l := range r.Ledger {
		out.Ledger = append(out.Ledger, ledgerRowJSON{Feature: l.Feature, InBaseline: l.InBaseline, InCandidate: l.InCandidate,
			Baseline: shareEstimateOf(l.Baseline), Candidate: shareEstimateOf(l.Candidate),
			Ratio: Num(l.Ratio), RatioLo: Num(l.RatioLo), RatioHi: Num(l.RatioHi), Flags: nonNil(l.Flags), Hint: l.Hint})
	}
	for _, f := range r.Flags {
		switch {
		case f.Severity >= audit.SeverityFail:
			out.FlagCounts.Fail++
		case f.Severity == audit.SeverityWarn:
			out.FlagCounts.Warn++
		default:
			out.FlagCounts.Info++
		}
		fj := flagJSON{Kind: f.Kind, Feature: f.Feature, Severity: f.Severity.String(), Sample: f.Sample,
			Evidence: []evidenceJSON{}, Hint: f.Hint, Message: f.Message, Streak: f.Streak}
		for _, e := range f.Evidence {
			fj.Evidence = append(fj.Evidence, evidenceJSON{e.Name, Num(e.Value), Num(e.Lo), Num(e.Hi)})
		}
		out.Flags = append(out.Flags, fj)
	}
	for _, m := range r.Removals {
		unit := m.Unit
		if unit == "" {
			unit = r.CostUnit
		}
		out.Removals = append(out.Removals, removalJSON{Feature: m.Feature, Group: m.Group, CostPer1kRows: Num(m.CostPer1kRows),
			Unit: unit, SavingPer1kRows: Num(m.Saving), SavingPerDay: Num(m.PerDay), SavingPer30Days: Num(m.Per30Days),
			Risk: Num(m.Risk), Blockers: nonNil(m.Blockers)})
	}
	for _, h := range r.Health {
		out.Health = append(out.Health, healthJSON{Feature: h.Feature, MissingBaseline: Num(h.MissingBaseline),
			MissingCandidate: Num(h.MissingCandidate), TopValueShare: Num(h.TopValueShare), TopValue: Num(h.TopValue),
			Min: Num(h.Min), Max: Num(h.Max), PSI: Num(h.PSI), KS: Num(h.KS)})
	}
	table := func(t *importance.Table) *tableJSON {
		if t == nil {
			return nil
		}
		j := ledgerJSON(t)
		return &j
	}
	out.Tables = compareTableJSON{table(r.BaselineTable), table(r.CandidateTable), table(r.BaselineOwnTable)}
	return out
}

func runJSONOf(ri audit.RunInfo) runJSON {
	out := runJSON{Version: ri.Version, DurationSeconds: Num(ri.Duration.Seconds()), Seed: ri.Seed,
		Replicates: ri.Replicates, Confidence: Num(ri.Confidence), Repeats: ri.Repeats,
		Metric: ri.Metric, Measure: ri.Measure, Workers: ri.Workers}
	if !ri.Started.IsZero() {
		s := ri.Started.UTC().Format(time.RFC3339Nano)
		out.Started = &s
	}
	return out
}

func policyJSONOf(p audit.Policy) policyJSON {
	return policyJSON{Measure: p.Measure, CollapseFactor: Num(p.CollapseFactor), SurgeFactor: Num(p.SurgeFactor),
		MinShare: Num(p.MinShare), ShareFloor: Num(p.ShareFloor), MajorShare: Num(p.MajorShare),
		ConstantShare: Num(p.ConstantShare), MissingSpikePoints: Num(p.MissingSpikePoints),
		MissingHighShare: Num(p.MissingHighShare), RareDefaultCover: Num(p.RareDefaultCover),
		OutOfRangeGainShare: Num(p.OutOfRangeGainShare), PSIWarn: Num(p.PSIWarn), PSIFail: Num(p.PSIFail),
		PSIBins: p.PSIBins, RemovalTolerance: Num(p.RemovalTolerance), FailOnWarn: p.FailOnWarn}
}

func shareEstimateOf(e importance.Estimate) shareEstimateJSON {
	return shareEstimateJSON{Num(e.Value), Num(e.Lo), Num(e.Hi), Num(e.Share), Num(e.ShareLo), Num(e.ShareHi)}
}

// nonNil returns s, or an empty slice for nil so JSON writes [] not null.
func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}
