package reports

import (
	"math"
	"time"

	"splitledger/audit"
	"splitledger/importance"
)

// The report below is invented: a holiday-rental ranking model compared
// with its retrained candidate. Its numbers are typed by hand to exercise
// the renderers (every flag kind, both hints that point at people, a
// blocked group, NaN intervals, a feature present in one version only, a
// name longer than 32 characters, non-ASCII text in messages); they are not
// the output of any computation and need no reference.

var nan = math.NaN()

// est is a traffic estimate with value and share intervals.
func est(v, lo, hi, share, slo, shi float64) importance.Estimate {
	return importance.Estimate{Value: v, Lo: lo, Hi: hi, Share: share, ShareLo: slo, ShareHi: shi}
}

// absentEst is the estimate of a version that lacks the feature.
func absentEst() importance.Estimate { return est(nan, nan, nan, nan, nan, nan) }

type fixtureFeature struct {
	name                    string
	inBase, inCand          bool
	base, cand              importance.Estimate
	ratio, ratioLo, ratioHi float64
	flags                   []string
	hint                    string
}

// fixtureLedger is sorted as the audit sorts it: largest change first.
func fixtureLedger() []fixtureFeature {
	const tb, tc = 0.0412, 0.0398 // total permutation drop (ndcg@10) per version
	e := func(total, s, slo, shi float64) importance.Estimate {
		return est(total*s, total*slo, total*shi, s, slo, shi)
	}
	return []fixtureFeature{
		{"host_response_hours", true, true, e(tb, 0.312, 0.291, 0.330), e(tc, 0.021, 0.015, 0.028), 0.0673, 0.0512, 0.0891,
			[]string{audit.KindCollapsed, audit.KindMissingSpike}, audit.HintPipelineSuspect},
		{"photo_count", true, true, e(tb, 0.064, 0.055, 0.073), e(tc, 0, 0, 0), 0.0154, 0.0136, 0.0179,
			[]string{audit.KindCollapsed, audit.KindWentConstant}, audit.HintPipelineSuspect},
		{"superhost_badge", true, false, e(tb, 0.046, 0.039, 0.054), absentEst(), nan, nan, nan,
			[]string{audit.KindDropped}, ""},
		{"neighbourhood_walk_score", false, true, absentEst(), e(tc, 0.038, 0.031, 0.046), nan, nan, nan,
			[]string{audit.KindAdded}, ""},
		{"distance_to_search_km", true, true, e(tb, 0.081, 0.072, 0.090), e(tc, 0.262, 0.244, 0.281), 3.21, 2.74, 3.80,
			[]string{audit.KindSurged}, audit.HintModelShift},
		{"nightly_price_vs_area_median", true, true, e(tb, 0.142, 0.130, 0.155), e(tc, 0.171, 0.158, 0.186), 1.20, 1.09, 1.33,
			[]string{audit.KindShifted}, audit.HintPipelineSuspect},
		{"amenity_count_reported_by_guest_reviews_last_90d", true, true, e(tb, 0.008, 0.006, 0.010), e(tc, 0.0095, 0.0072, 0.0118), 1.17, 0.86, 1.58,
			[]string{audit.KindShifted}, ""},
		{"listing_age_days", true, true, e(tb, 0.012, nan, nan), e(tc, 0.0102, nan, nan), 0.85, nan, nan,
			[]string{audit.KindOutOfRange}, ""},
		{"text_match_bm25", true, true, e(tb, 0.161, 0.149, 0.174), e(tc, 0.158, 0.146, 0.171), 0.98, 0.93, 1.04, nil, ""},
		{"review_score_mean", true, true, e(tb, 0.118, 0.107, 0.130), e(tc, 0.121, 0.110, 0.133), 1.03, 0.95, 1.11, nil, ""},
		{"cancellation_policy_strictness", true, true, e(tb, 0.024, 0.019, 0.029), e(tc, 0.026, 0.021, 0.031), 1.08, 0.90, 1.29,
			[]string{audit.KindOutOfRange}, ""},
		{"photo_aesthetic_rank", true, true, e(tb, 0.019, 0.015, 0.023), e(tc, 0.020, 0.016, 0.024), 1.05, 0.86, 1.27, nil, ""},
		{"guest_count_requested", true, true, e(tb, 0.015, nan, nan), e(tc, 0.014, nan, nan), 0.94, nan, nan, nil, ""},
		{"instant_book_enabled", true, true, e(tb, 0.006, 0.004, 0.008), e(tc, 0.005, 0.003, 0.007), 0.86, 0.60, 1.21, nil, ""},
		{"image_quality_score", true, true, e(tb, 0.0004, -0.0001, 0.0009), e(tc, 0.0003, -0.0001, 0.0008), 0.93, 0.55, 1.45,
			[]string{audit.KindRemovalCandidate}, audit.HintPrune},
		{"traveller_host_affinity", true, true, e(tb, 0.0002, -0.0002, 0.0006), e(tc, 0.0001, -0.0002, 0.0005), 0.67, 0.40, 1.30,
			[]string{audit.KindRemovalCandidate}, audit.HintPrune},
	}
}

// fixtureTable builds one version's importance table from the ledger, with
// every traffic measure filled (mean |SHAP| off, so NaN) and invented
// structure shares.
func fixtureTable(model string, ff []fixtureFeature, candidate bool) *importance.Table {
	t := &importance.Table{Model: model, Metric: importance.MetricNDCG, K: 10, Rows: 48000, Units: 3120, ValidUnits: 2980,
		Replicates: 200, Confidence: 0.95, Seed: 20261130, Repeats: 20,
		Notes: []string{"permutation drop averages 20 shuffles (the same shuffles for every feature)"}}
	t.Quality = est(0.4123, 0.4071, 0.4180, nan, nan, nan)
	if candidate {
		t.Quality = est(0.4019, 0.3960, 0.4077, nan, nan, nan)
	}
	for i, f := range ff {
		if (candidate && !f.inCand) || (!candidate && !f.inBase) {
			continue
		}
		p := f.base
		if candidate {
			p = f.cand
		}
		// Other measures: the primary share bent by a per-feature factor.
		k := 1 + 0.1*float64(i%5) - 0.2
		scale := func(total, s float64) importance.Estimate {
			return est(total*s*k, total*p.ShareLo*k, total*p.ShareHi*k, s*k, p.ShareLo*k, p.ShareHi*k)
		}
		traffic := make([]importance.Estimate, importance.NumTrafficMeasures)
		traffic[importance.PermutationDrop] = p
		traffic[importance.MissingBreakDrop] = scale(0.0517, p.Share)
		traffic[importance.FreezeDrop] = scale(0.0233, p.Share)
		traffic[importance.PathShare] = est(0.2+0.05*float64(i%7), nan, nan, p.Share*k, nan, nan)
		traffic[importance.TestsPerRow] = est(0.4+0.1*float64(i%3), nan, nan, p.Share/k, nan, nan)
		traffic[importance.MeanAbsSHAP] = absentEst()
		split := 40 + 7*(i%9)
		t.Features = append(t.Features, importance.FeatureRow{Feature: f.name, SplitCount: split,
			TotalGain: 1200 * p.Share * k, MeanGain: 1200 * p.Share * k / float64(split),
			TotalCover: 9.5e5 / float64(i+2), MeanCover: 9.5e5 / float64(i+2) / float64(split),
			SplitShare: float64(split) / 960, GainShare: p.Share * k, CoverShare: 0.9 / float64(i+6),
			Traffic: traffic})
	}
	return t
}

func testReport() *audit.Report {
	ff := fixtureLedger()
	started := time.Date(2026, 11, 30, 6, 0, 0, 0, time.UTC)
	r := &audit.Report{
		Verdict: audit.VerdictFail,
		Run: audit.RunInfo{Version: "0.1.0", Started: started, Duration: 83400 * time.Millisecond, Seed: 20261130,
			Replicates: 200, Confidence: 0.95, Repeats: 20, Metric: "ndcg@10", Measure: "permutation_drop", Workers: 2},
		Models: []audit.ModelInfo{
			{Role: "baseline", Path: "models/ranker-2026-11-16.json", SHA256: "3f5a9c0e7b2d41f6a8c3e5d7b9f1a2c4e6d8b0a1c3e5f7d9b2a4c6e8f0a1b3c5",
				Bytes: 4_718_592, Format: "xgboost-json", Objective: "rank:ndcg", Trees: 300, Features: 15, Used: 15},
			{Role: "candidate", Path: "models/ranker-2026-11-30.json", SHA256: "9d1e3f5a7c9b2d4f6e8a0c2e4f6a8b0d2c4e6f8a0b2d4c6e8f0a2b4d6c8e0f1a",
				Bytes: 5_033_164, Format: "xgboost-json", Objective: "rank:ndcg", Trees: 320, Features: 15, Used: 15},
		},
		Traffic: []audit.TrafficInfo{
			{Role: "candidate traffic", Path: "traffic/searches-2026-w48.parquet", SHA256: "c0ffee12345678901234567890abcdef1234567890abcdef1234567890abcdef",
				Bytes: 12_897_484, Rows: 48000, TotalRows: 1_210_400, SampleFraction: 48000.0 / 1_210_400, Units: 3120},
			{Role: "baseline traffic", Path: "traffic/searches-2026-w47.parquet", SHA256: "facade0987654321fedcba0987654321fedcba0987654321fedcba0987654321",
				Bytes: 12_634_112, Rows: 47500, TotalRows: 1_187_000, SampleFraction: 47500.0 / 1_187_000, Units: 3088},
		},
		Policy:           audit.DefaultPolicy(),
		BaselineQuality:  est(0.4123, 0.4071, 0.4180, nan, nan, nan),
		CandidateQuality: est(0.4019, 0.3960, 0.4077, nan, nan, nan),
		CostUnit:         "USD",
		Unpriced:         []string{"neighbourhood_walk_score", "guest_count_requested"},
		Notes: []string{
			"permutation drop averages 20 shuffles (the same shuffles for every feature)",
			"ratio intervals are paired: both models scored the same candidate rows → same bootstrap weights",
		},
		Cautions: audit.Cautions,
	}
	for _, f := range ff {
		r.Ledger = append(r.Ledger, audit.LedgerRow{Feature: f.name, InBaseline: f.inBase, InCandidate: f.inCand,
			Baseline: f.base, Candidate: f.cand, Ratio: f.ratio, RatioLo: f.ratioLo, RatioHi: f.ratioHi, Flags: f.flags, Hint: f.hint})
	}
	ev := func(name string, v, lo, hi float64) audit.Evidence {
		return audit.Evidence{Name: name, Value: v, Lo: lo, Hi: hi}
	}
	r.Flags = []audit.Flag{
		{Kind: audit.KindCollapsed, Feature: "host_response_hours", Severity: audit.SeverityFail,
			Evidence: []audit.Evidence{ev("baseline share", 0.312, 0.291, 0.330), ev("candidate share", 0.021, 0.015, 0.028), ev("share ratio", 0.0673, 0.0512, 0.0891)},
			Hint:     audit.HintPipelineSuspect, Message: "Its share fell from 31.2% to 2.1% while its missing share rose by 61 points."},
		{Kind: audit.KindMissingSpike, Feature: "host_response_hours", Severity: audit.SeverityFail, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("baseline missing share", 0.004, nan, nan), ev("candidate missing share", 0.618, nan, nan)},
			Hint:     audit.HintPipelineSuspect, Message: "61.8% of candidate rows are missing the value (0.4% last week)."},
		{Kind: audit.KindWentConstant, Feature: "photo_count", Severity: audit.SeverityFail, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("top value share", 1, nan, nan), ev("top value", 0, nan, nan), ev("permutation drop", 0, 0, 0)},
			Hint:     audit.HintPipelineSuspect, Message: "Every candidate row holds 0 while the model still splits on it 61 times."},
		{Kind: audit.KindCollapsed, Feature: "photo_count", Severity: audit.SeverityFail,
			Evidence: []audit.Evidence{ev("baseline share", 0.064, 0.055, 0.073), ev("candidate share", 0, 0, 0), ev("share ratio", 0.0154, 0.0136, 0.0179)},
			Hint:     audit.HintPipelineSuspect, Message: "Its share fell from 6.4% to 0.0%."},
		{Kind: audit.KindDropped, Feature: "superhost_badge", Severity: audit.SeverityWarn,
			Evidence: []audit.Evidence{ev("baseline share", 0.046, 0.039, 0.054)},
			Message:  "The candidate does not declare it; it carried 4.6% of the baseline's permutation drop."},
		{Kind: audit.KindSurged, Feature: "distance_to_search_km", Severity: audit.SeverityWarn,
			Evidence: []audit.Evidence{ev("baseline share", 0.081, 0.072, 0.090), ev("candidate share", 0.262, 0.244, 0.281), ev("share ratio", 3.21, 2.74, 3.80)},
			Hint:     audit.HintModelShift, Message: "Its share rose 3.2-fold while its traffic stayed steady (PSI 0.02)."},
		{Kind: audit.KindShifted, Feature: "nightly_price_vs_area_median", Severity: audit.SeverityWarn, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("PSI", 0.17, nan, nan), ev("KS", 0.112, nan, nan)},
			Hint:     audit.HintPipelineSuspect, Message: "The distribution moved against last week (PSI 0.17 ≥ 0.10)."},
		{Kind: audit.KindOutOfRange, Feature: "listing_age_days", Severity: audit.SeverityWarn, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("unreachable gain share", 0.31, nan, nan), ev("sample max", 1460, nan, nan)},
			Message:  "31% of its gain sits on splits above 1460, the sample's largest value; thresholds up to 5110 days."},
		{Kind: audit.KindShifted, Feature: "amenity_count_reported_by_guest_reviews_last_90d", Severity: audit.SeverityWarn, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("PSI", 0.12, nan, nan), ev("KS", 0.064, nan, nan)},
			Message:  "The distribution moved against last week (PSI 0.12)."},
		{Kind: audit.KindAdded, Feature: "neighbourhood_walk_score", Severity: audit.SeverityInfo,
			Evidence: []audit.Evidence{ev("candidate share", 0.038, 0.031, 0.046)},
			Message:  "New in the candidate: 3.8% of its permutation drop."},
		{Kind: audit.KindOutOfRange, Feature: "cancellation_policy_strictness", Severity: audit.SeverityInfo, Sample: "candidate traffic",
			Evidence: []audit.Evidence{ev("unreachable gain share", 0.14, nan, nan)},
			Message:  "14% of its gain sits on splits no candidate row reaches."},
		{Kind: audit.KindRemovalCandidate, Feature: "traveller_host_affinity", Severity: audit.SeverityInfo,
			Evidence: []audit.Evidence{ev("missing-break drop", 0.00001, -0.00002, 0.00004), ev("permutation drop", 0.000004, -0.000008, 0.000024)},
			Hint:     audit.HintPrune, Message: "Both drops stay below 0.05% of the baseline metric."},
		{Kind: audit.KindRemovalCandidate, Feature: "image_quality_score", Severity: audit.SeverityInfo,
			Evidence: []audit.Evidence{ev("missing-break drop", 0.00002, -0.00001, 0.00005), ev("permutation drop", 0.000016, -0.000004, 0.000037)},
			Hint:     audit.HintPrune, Message: "Both drops stay below 0.05% of the baseline metric."},
	}
	r.Removals = []audit.Removal{
		{Feature: "traveller_host_affinity", CostPer1kRows: 0.85, Unit: "USD", Saving: 0.85, PerDay: 34000, Per30Days: 1.02e6, Risk: 0.00004},
		{Feature: "image_quality_score", Group: "vision_pack", CostPer1kRows: 1.2, Unit: "USD", Saving: 0, PerDay: 0, Per30Days: 0,
			Risk: 0.00005, Blockers: []string{"photo_aesthetic_rank"}},
	}
	h := func(name string, mb, mc, top, topv, lo, hi, psi, ks float64) audit.Health {
		return audit.Health{Feature: name, MissingBaseline: mb, MissingCandidate: mc, TopValueShare: top, TopValue: topv, Min: lo, Max: hi, PSI: psi, KS: ks}
	}
	r.Health = []audit.Health{
		h("host_response_hours", 0.004, 0.618, 0.081, 1, 0, 72, 0.41, 0.23),
		h("photo_count", 0, 0, 1, 0, 0, 0, 3.2, 0.91),
		h("superhost_badge", 0, 0, 0.71, 0, 0, 1, 0.001, 0.004),
		h("neighbourhood_walk_score", 1, 0.02, 0.03, 68, 0, 100, nan, nan),
		h("distance_to_search_km", 0, 0, 0.002, 1.5, 0.01, 812.4, 0.02, 0.031),
		h("nightly_price_vs_area_median", 0.001, 0.001, 0.004, 1, 0.18, 6.9, 0.17, 0.112),
		h("amenity_count_reported_by_guest_reviews_last_90d", 0.12, 0.13, 0.09, 7, 0, 41, 0.12, 0.064),
		h("listing_age_days", 0, 0, 0.003, 365, 0, 1460, 0.04, 0.05),
		h("text_match_bm25", 0, 0, 0.001, 0, 0, 38.2, 0.01, 0.012),
		h("review_score_mean", 0.06, 0.06, 0.11, 4.8, 1, 5, 0.01, 0.02),
		h("cancellation_policy_strictness", 0, 0, 0.44, 2, 0, 4, 0.003, 0.01),
		h("photo_aesthetic_rank", 0.02, 0.02, 0.001, 0.5, 0, 1, 0.02, 0.03),
		h("guest_count_requested", 0, 0, 0.52, 2, 1, 16, 0.01, 0.02),
		h("instant_book_enabled", 0, 0, 0.63, 1, 0, 1, 0.002, 0.01),
		h("image_quality_score", 0.001, 0.001, 0.001, 0.73, 0, 1, 0.01, 0.02),
		h("traveller_host_affinity", 0.3, 0.31, nan, nan, -2.1, 3.4, 0.01, 0.02),
	}
	r.BaselineTable = fixtureTable("models/ranker-2026-11-16.json", ff, false)
	r.CandidateTable = fixtureTable("models/ranker-2026-11-30.json", ff, true)
	return r
}
