package reports

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	"splitledger/importance"
)

// LedgerJSONSchema names the JSON layout written by LedgerJSON.
const LedgerJSONSchema = "splitledger/importance/v1"

type estimateJSON struct {
	Value Num `json:"value"`
	Lo    Num `json:"lo"`
	Hi    Num `json:"hi"`
	Share Num `json:"share"`
}

func estJSON(e importance.Estimate) estimateJSON {
	return estimateJSON{Num(e.Value), Num(e.Lo), Num(e.Hi), Num(e.Share)}
}

type featureJSON struct {
	Feature          string        `json:"feature"`
	Absent           bool          `json:"absent_from_traffic,omitempty"`
	SplitCount       int           `json:"split_count"`
	TotalGain        Num           `json:"total_gain"`
	MeanGain         Num           `json:"mean_gain"`
	TotalCover       Num           `json:"total_cover"`
	MeanCover        Num           `json:"mean_cover"`
	SplitShare       Num           `json:"split_share"`
	GainShare        Num           `json:"gain_share"`
	CoverShare       Num           `json:"cover_share"`
	PermutationDrop  *estimateJSON `json:"permutation_drop,omitempty"`
	MissingBreakDrop *estimateJSON `json:"missing_break_drop,omitempty"`
	FreezeDrop       *estimateJSON `json:"freeze_drop,omitempty"`
	PathShare        *estimateJSON `json:"path_share,omitempty"`
	TestsPerRow      *estimateJSON `json:"tests_per_row,omitempty"`
	MeanAbsSHAP      *estimateJSON `json:"mean_abs_shap,omitempty"`
}

type tableJSON struct {
	Model      string        `json:"model"`
	Metric     string        `json:"metric,omitempty"`
	Quality    *estimateJSON `json:"quality,omitempty"`
	Rows       int           `json:"rows"`
	Units      int           `json:"units"`
	Replicates int           `json:"replicates,omitempty"`
	Confidence float64       `json:"confidence,omitempty"`
	Seed       uint64        `json:"seed,omitempty"`
	Repeats    int           `json:"repeats,omitempty"`
	SHAPRows   int           `json:"shap_rows,omitempty"`
	Notes      []string      `json:"notes,omitempty"`
	Features   []featureJSON `json:"features"`
}

// MetricName gives the report name of a table's metric, e.g. "ndcg@10".
func MetricName(t *importance.Table) string {
	if t.Metric == importance.MetricNDCG {
		return "ndcg@" + strconv.Itoa(t.K)
	}
	if t.Metric == 0 {
		return ""
	}
	return t.Metric.String()
}

func ledgerJSON(t *importance.Table) tableJSON {
	out := tableJSON{Model: t.Model, Metric: MetricName(t), Rows: t.Rows, Units: t.Units,
		Replicates: t.Replicates, Confidence: t.Confidence, Seed: t.Seed, Repeats: t.Repeats,
		SHAPRows: t.SHAPRows, Notes: t.Notes}
	if t.Metric != 0 {
		q := estJSON(t.Quality)
		q.Share = Num(math.NaN())
		out.Quality = &q
	}
	for _, f := range t.Features {
		fj := featureJSON{Feature: f.Feature, Absent: f.Absent, SplitCount: f.SplitCount,
			TotalGain: Num(f.TotalGain), MeanGain: Num(f.MeanGain), TotalCover: Num(f.TotalCover), MeanCover: Num(f.MeanCover),
			SplitShare: Num(f.SplitShare), GainShare: Num(f.GainShare), CoverShare: Num(f.CoverShare)}
		if f.Traffic != nil {
			p := func(m importance.TrafficMeasure) *estimateJSON { e := estJSON(f.Traffic[m]); return &e }
			fj.PermutationDrop = p(importance.PermutationDrop)
			fj.MissingBreakDrop = p(importance.MissingBreakDrop)
			fj.FreezeDrop = p(importance.FreezeDrop)
			fj.PathShare = p(importance.PathShare)
			fj.TestsPerRow = p(importance.TestsPerRow)
			fj.MeanAbsSHAP = p(importance.MeanAbsSHAP)
		}
		out.Features = append(out.Features, fj)
	}
	return out
}

// LedgerJSON writes one table as JSON (schema LedgerJSONSchema). NaN is null.
func LedgerJSON(w io.Writer, t *importance.Table) error {
	return writeJSON(w, struct {
		Schema string `json:"schema"`
		tableJSON
	}{LedgerJSONSchema, ledgerJSON(t)})
}

// LedgerCSV writes one row per feature: structure measures, then value,
// lo, hi and share of each traffic measure. NaN is an empty cell.
func LedgerCSV(w io.Writer, t *importance.Table) error {
	cw := csv.NewWriter(w)
	head := []string{"feature", "split_count", "total_gain", "mean_gain", "total_cover", "mean_cover"}
	hasTraffic := len(t.Features) > 0 && t.Features[0].Traffic != nil
	if hasTraffic {
		for m := importance.TrafficMeasure(0); m < importance.NumTrafficMeasures; m++ {
			for _, s := range []string{"", "_lo", "_hi", "_share"} {
				head = append(head, m.String()+s)
			}
		}
	}
	if err := cw.Write(head); err != nil {
		return err
	}
	for _, f := range t.Features {
		row := []string{f.Feature, strconv.Itoa(f.SplitCount), csvNum(f.TotalGain), csvNum(f.MeanGain), csvNum(f.TotalCover), csvNum(f.MeanCover)}
		if hasTraffic {
			for _, e := range f.Traffic {
				row = append(row, csvNum(e.Value), csvNum(e.Lo), csvNum(e.Hi), csvNum(e.Share))
			}
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func csvNum(v float64) string {
	if v != v {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// LedgerText writes the table for people: one line per feature, sorted as
// given, with the main traffic measures and their intervals.
func LedgerText(w io.Writer, t *importance.Table, ascii bool) error {
	fmt.Fprintf(w, "model %s", t.Model)
	if t.Metric != 0 {
		fmt.Fprintf(w, "   metric %s = %s   rows %d, units %d, %d replicates, %.0f%% intervals, seed %d",
			MetricName(t), fmtInterval(t.Quality.Value, t.Quality.Lo, t.Quality.Hi), t.Rows, t.Units, t.Replicates, 100*t.Confidence, t.Seed)
	}
	fmt.Fprintln(w)
	head := []string{"feature", "splits", "gain share", "cover share"}
	hasTraffic := len(t.Features) > 0 && t.Features[0].Traffic != nil
	if hasTraffic {
		head = append(head, "permutation drop", "missing-break drop", "freeze drop", "path share", "mean |SHAP|")
	}
	tb := newTable(w, ascii, head)
	for _, f := range t.Features {
		row := []string{f.Feature, strconv.Itoa(f.SplitCount), fmtPct(f.GainShare), fmtPct(f.CoverShare)}
		if hasTraffic {
			for _, m := range []importance.TrafficMeasure{importance.PermutationDrop, importance.MissingBreakDrop, importance.FreezeDrop, importance.PathShare, importance.MeanAbsSHAP} {
				e := f.Traffic[m]
				if m == importance.PathShare {
					row = append(row, fmtPct(e.Value))
					continue
				}
				row = append(row, fmtInterval(e.Value, e.Lo, e.Hi))
			}
		}
		if f.Absent {
			row[0] += " (absent)"
		}
		if err := tb.Append(row); err != nil {
			return err
		}
	}
	if err := tb.Render(); err != nil {
		return err
	}
	for _, n := range t.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}
