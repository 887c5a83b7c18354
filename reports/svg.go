package reports

import (
	"math"
	"strconv"
	"unicode/utf8"
)

// shareChart is one hand-drawn SVG chart: for each feature, a baseline bar
// above a candidate bar showing the share of one measure, each with a
// whisker over its interval, features in ledger order (sorted by change).
// All coordinates are in SVG user units; the template in compare_html.go
// draws it with every string escaped.
type shareChart struct {
	Title                 string
	Width, Height         float64
	PlotX, PlotW          float64
	PlotTop, PlotBottom   float64
	ChangeX               float64
	LegendY, TickY        float64
	Ticks                 []chartTick
	Rows                  []chartRow
	HasChange, HasWhisker bool
}

type chartTick struct {
	X     float64
	Label string
}

type chartRow struct {
	Label, Full string
	LabelY      float64
	Change      string
	Bars        []chartBar
	Absent      []chartAbsent
}

type chartBar struct {
	Fill       string
	X, Y, W, H float64
	// Whisker is an SVG path over the interval with end caps ("" = none).
	Whisker string
	Title   string
}

// chartAbsent marks a version that lacks the feature.
type chartAbsent struct {
	X, Y float64
	Text string
}

// chartInput is one feature's shares in both versions.
type chartInput struct {
	Feature string
	Base    chartShare
	Cand    chartShare
	Change  string
}

// chartShare is one version's share with its interval; Present false
// means the version lacks the feature.
type chartShare struct {
	Present       bool
	Share, Lo, Hi float64
}

const (
	chartLabelW   = 240.0
	chartPlotW    = 430.0
	chartChangeW  = 110.0
	chartRowH     = 28.0
	chartBarH     = 9.0
	chartTop      = 48.0
	chartLabelMax = 34 // runes of a feature label before it is cut
	baselineFill  = "#7f93b8"
	candidateFill = "#d9822b"
)

// newShareChart lays out a chart of rows. The axis runs from 0 to a round
// value at or above the largest finite share or interval end; NaN shares
// draw no bar and NaN interval ends no whisker. An empty rows gives a chart
// with axes only.
func newShareChart(title string, rows []chartInput) shareChart {
	c := shareChart{Title: title, PlotX: chartLabelW, PlotW: chartPlotW, PlotTop: chartTop}
	c.ChangeX = c.PlotX + c.PlotW + 26 // clear of the last tick label, centred on the axis end
	c.Width = c.PlotX + c.PlotW + chartChangeW
	c.LegendY, c.TickY = 16, chartTop-8
	top := 0.0
	for _, r := range rows {
		for _, s := range []chartShare{r.Base, r.Cand} {
			if !s.Present {
				continue
			}
			for _, v := range []float64{s.Share, s.Lo, s.Hi} {
				if v > top && !math.IsInf(v, 1) {
					top = v
				}
			}
		}
	}
	axisMax, step := niceAxis(top)
	for t := 0.0; t <= axisMax+step/2; t += step {
		c.Ticks = append(c.Ticks, chartTick{X: c.PlotX + t/axisMax*c.PlotW, Label: pctLabel(t)})
	}
	x := func(v float64) float64 { return c.PlotX + math.Min(math.Max(v, 0), axisMax)/axisMax*c.PlotW }
	for i, r := range rows {
		y := c.PlotTop + float64(i)*chartRowH
		row := chartRow{Label: r.Feature, Full: r.Feature, LabelY: y + chartRowH/2 + 4, Change: r.Change}
		if utf8.RuneCountInString(r.Feature) > chartLabelMax {
			rs := []rune(r.Feature)
			row.Label = string(rs[:chartLabelMax-1]) + "…"
		}
		if r.Change != "" {
			c.HasChange = true
		}
		for k, s := range []chartShare{r.Base, r.Cand} {
			by := y + 4 + float64(k)*(chartBarH+2)
			fill, name := baselineFill, "baseline"
			if k == 1 {
				fill, name = candidateFill, "candidate"
			}
			if !s.Present {
				row.Absent = append(row.Absent, chartAbsent{X: c.PlotX + 4, Y: by + chartBarH - 1, Text: name + ": absent"})
				continue
			}
			b := chartBar{Fill: fill, X: c.PlotX, Y: by, H: chartBarH, Title: name + " share " + fmtShare(s.Share)}
			if s.Share > 0 {
				b.W = x(s.Share) - c.PlotX
			}
			if !math.IsNaN(s.Lo) && !math.IsNaN(s.Hi) {
				b.Title += " [" + fmtShare(s.Lo) + ", " + fmtShare(s.Hi) + "]"
				mid := by + chartBarH/2
				x1, x2 := x(s.Lo), x(s.Hi)
				b.Whisker = "M" + svgNum(x1) + " " + svgNum(mid-4) + "V" + svgNum(mid+4) +
					"M" + svgNum(x1) + " " + svgNum(mid) + "H" + svgNum(x2) +
					"M" + svgNum(x2) + " " + svgNum(mid-4) + "V" + svgNum(mid+4)
				c.HasWhisker = true
			}
			row.Bars = append(row.Bars, b)
		}
		c.Rows = append(c.Rows, row)
	}
	c.PlotBottom = c.PlotTop + float64(len(rows))*chartRowH
	c.Height = c.PlotBottom + 12
	return c
}

// niceAxis returns an axis end at or above top and a step of 1, 2, 2.5 or
// 5 times a power of ten giving four to five ticks. top <= 0 (or NaN)
// gives an axis of 0 to 10%.
func niceAxis(top float64) (end, step float64) {
	if !(top > 0) {
		return 0.1, 0.025
	}
	raw := top / 4
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*p >= raw {
			step = m * p
			break
		}
	}
	end = math.Ceil(top/step-1e-9) * step
	return end, step
}

// pctLabel writes a share as a percentage without trailing zeros.
func pctLabel(v float64) string {
	return strconv.FormatFloat(math.Round(v*100*1e6)/1e6, 'f', -1, 64) + "%"
}

// svgNum writes a coordinate with at most one decimal.
func svgNum(v float64) string {
	return strconv.FormatFloat(math.Round(v*10)/10, 'f', -1, 64)
}
