package reports

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"splitledger/storage/history"
)

// HistoryRuns lists recorded runs (text table, JSON or CSV).
func HistoryRuns(w io.Writer, runs []history.Run, format string) error {
	type runJSON struct {
		ID         string `json:"id"`
		Time       string `json:"time"`
		Baseline   string `json:"baseline"`
		Candidate  string `json:"candidate"`
		Traffic    string `json:"traffic"`
		Metric     string `json:"metric"`
		Verdict    string `json:"verdict"`
		Seed       uint64 `json:"seed"`
		Replicates int    `json:"replicates"`
		Flagged    int    `json:"flagged_features"`
	}
	rows := make([]runJSON, 0, len(runs))
	for _, r := range runs {
		flagged := map[string]bool{}
		for _, fr := range r.Rows {
			if len(fr.Flags) > 0 {
				flagged[fr.Feature] = true
			}
		}
		rows = append(rows, runJSON{r.ID, r.Time.UTC().Format(time.RFC3339), r.BaselineName, r.CandidateName, r.TrafficName,
			r.Metric, r.Verdict, r.Seed, r.Replicates, len(flagged)})
	}
	switch format {
	case "json":
		return writeJSON(w, struct {
			Schema string    `json:"schema"`
			Runs   []runJSON `json:"runs"`
		}{"splitledger/history/v1", rows})
	case "csv":
		cw := csv.NewWriter(w)
		cw.Write([]string{"id", "time", "baseline", "candidate", "traffic", "metric", "verdict", "seed", "replicates", "flagged_features"})
		for _, r := range rows {
			cw.Write([]string{r.ID, r.Time, r.Baseline, r.Candidate, r.Traffic, r.Metric, r.Verdict,
				strconv.FormatUint(r.Seed, 10), strconv.Itoa(r.Replicates), strconv.Itoa(r.Flagged)})
		}
		cw.Flush()
		return cw.Error()
	}
	if len(rows) == 0 {
		fmt.Fprintln(w, "no runs recorded")
		return nil
	}
	tb := newTable(w, true, []string{"time (UTC)", "verdict", "baseline", "candidate", "metric", "flagged"})
	for _, r := range rows {
		tb.Append([]string{r.Time, r.Verdict, r.Baseline, r.Candidate, r.Metric, strconv.Itoa(r.Flagged)})
	}
	return tb.Render()
}

// HistoryTrend shows one feature's measure across runs with a sparkline of
// its share and the flags of each run.
func HistoryTrend(w io.Writer, feature, measure, version string, pts []history.TrendPoint, format string, ascii bool) error {
	type pointJSON struct {
		RunID    string   `json:"run_id"`
		Time     string   `json:"time"`
		Recorded bool     `json:"recorded"`
		Value    Num      `json:"value"`
		Lo       Num      `json:"lo"`
		Hi       Num      `json:"hi"`
		Share    Num      `json:"share"`
		Flags    []string `json:"flags"`
	}
	switch format {
	case "json":
		out := struct {
			Schema  string      `json:"schema"`
			Feature string      `json:"feature"`
			Measure string      `json:"measure"`
			Version string      `json:"version"`
			Points  []pointJSON `json:"points"`
		}{"splitledger/history-trend/v1", feature, measure, version, nil}
		for _, p := range pts {
			out.Points = append(out.Points, pointJSON{p.RunID, p.Time.UTC().Format(time.RFC3339), p.Recorded,
				Num(p.Value), Num(p.Lo), Num(p.Hi), Num(p.Share), p.Flags})
		}
		return writeJSON(w, out)
	case "csv":
		cw := csv.NewWriter(w)
		cw.Write([]string{"run_id", "time", "recorded", "value", "lo", "hi", "share", "flags"})
		for _, p := range pts {
			cw.Write([]string{p.RunID, p.Time.UTC().Format(time.RFC3339), strconv.FormatBool(p.Recorded),
				csvNum(p.Value), csvNum(p.Lo), csvNum(p.Hi), csvNum(p.Share), strings.Join(p.Flags, ";")})
		}
		cw.Flush()
		return cw.Error()
	}
	shares := make([]float64, len(pts))
	for i, p := range pts {
		shares[i] = p.Share
	}
	line := history.Sparkline(shares)
	if ascii {
		line = history.SparklineASCII(shares)
	}
	fmt.Fprintf(w, "%s  %s (%s), share per run, oldest first: %s\n", feature, measure, version, line)
	tb := newTable(w, ascii, []string{"time (UTC)", "value", "share", "flags"})
	for _, p := range pts {
		tb.Append([]string{p.Time.UTC().Format("2006-01-02 15:04"), fmtInterval(p.Value, p.Lo, p.Hi), fmtPct(p.Share), strings.Join(p.Flags, ", ")})
	}
	return tb.Render()
}
