package reports

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

	"splitledger/audit"
	"splitledger/importance"
)

// compareCSVHeader is the column list of CompareCSV.
var compareCSVHeader = []string{
	"feature", "in_baseline", "in_candidate",
	"baseline_value", "baseline_lo", "baseline_hi", "baseline_share", "baseline_share_lo", "baseline_share_hi",
	"candidate_value", "candidate_lo", "candidate_hi", "candidate_share", "candidate_share_lo", "candidate_share_hi",
	"ratio", "ratio_lo", "ratio_hi", "flags", "hint",
}

// CompareCSV writes the ledger, one row per feature in the report's order:
// feature, in_baseline, in_candidate (true/false), the primary measure's
// value, lo, hi, share, share_lo, share_hi for baseline then candidate,
// ratio, ratio_lo, ratio_hi, the flag kinds joined by ';' and the hint.
// Numbers are written exactly (shortest round-trip form); NaN and ±Inf
// are empty cells. Quoting follows RFC 4180 (encoding/csv).
func CompareCSV(w io.Writer, r *audit.Report) error {
	if r == nil {
		panic("reports: CompareCSV called with a nil report")
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(compareCSVHeader); err != nil {
		return fmt.Errorf("reports: compare CSV header: %w", err)
	}
	est := func(row []string, e importance.Estimate) []string {
		return append(row, csvCell(e.Value), csvCell(e.Lo), csvCell(e.Hi), csvCell(e.Share), csvCell(e.ShareLo), csvCell(e.ShareHi))
	}
	for _, l := range r.Ledger {
		row := make([]string, 0, len(compareCSVHeader))
		row = append(row, l.Feature, strconv.FormatBool(l.InBaseline), strconv.FormatBool(l.InCandidate))
		row = est(row, l.Baseline)
		row = est(row, l.Candidate)
		row = append(row, csvCell(l.Ratio), csvCell(l.RatioLo), csvCell(l.RatioHi), strings.Join(l.Flags, ";"), l.Hint)
		if err := cw.Write(row); err != nil {
			return fmt.Errorf("reports: compare CSV feature %q: %w", l.Feature, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("reports: compare CSV: %w", err)
	}
	return nil
}

// csvCell is csvNum with ±Inf also left empty.
func csvCell(v float64) string {
	if v-v != 0 { // NaN or ±Inf
		return ""
	}
	return csvNum(v)
}
