package reports_test

import (
	"math"
	"os"

	"splitledger/audit"
	"splitledger/importance"
	"splitledger/reports"
)

// A two-feature ledger written as CSV: NaN intervals are empty cells.
func ExampleCompareCSV() {
	nan := math.NaN()
	r := &audit.Report{
		Verdict: audit.VerdictWarn,
		Ledger: []audit.LedgerRow{
			{Feature: "distance_to_search_km", InBaseline: true, InCandidate: true,
				Baseline:  importance.Estimate{Value: 0.004, Lo: 0.0035, Hi: 0.0045, Share: 0.1, ShareLo: 0.09, ShareHi: 0.11},
				Candidate: importance.Estimate{Value: 0.012, Lo: 0.011, Hi: 0.013, Share: 0.3, ShareLo: 0.28, ShareHi: 0.32},
				Ratio:     3, RatioLo: 2.6, RatioHi: 3.4, Flags: []string{audit.KindSurged}, Hint: audit.HintModelShift},
			{Feature: "review_score_mean", InBaseline: true, InCandidate: true,
				Baseline:  importance.Estimate{Value: 0.02, Lo: nan, Hi: nan, Share: 0.5, ShareLo: nan, ShareHi: nan},
				Candidate: importance.Estimate{Value: 0.02, Lo: nan, Hi: nan, Share: 0.5, ShareLo: nan, ShareHi: nan},
				Ratio:     1, RatioLo: nan, RatioHi: nan},
		},
	}
	if err := reports.CompareCSV(os.Stdout, r); err != nil {
		panic(err)
	}
	// Output:
	// feature,in_baseline,in_candidate,baseline_value,baseline_lo,baseline_hi,baseline_share,baseline_share_lo,baseline_share_hi,candidate_value,candidate_lo,candidate_hi,candidate_share,candidate_share_lo,candidate_share_hi,ratio,ratio_lo,ratio_hi,flags,hint
	// distance_to_search_km,true,true,0.004,0.0035,0.0045,0.1,0.09,0.11,0.012,0.011,0.013,0.3,0.28,0.32,3,2.6,3.4,surged,model-shift
	// review_score_mean,true,true,0.02,,,0.5,,,0.02,,,0.5,,,1,,,,
}
