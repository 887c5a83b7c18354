package reports

import (
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"
	"time"

	"splitledger/audit"
	"splitledger/importance"
)

// CompareHTML writes the comparison report as one self-contained HTML page
// (inline CSS, no script, no external font or image): the sections of
// CompareText as HTML tables, plus an inline SVG chart of baseline and
// candidate share per feature with interval whiskers for the primary
// measure (features in ledger order, sorted by change), and one folded
// chart for each other measure of the importance tables that has a finite
// share. Every string is escaped by html/template. The page carries no
// clock time of its own, so the same report gives the same bytes.
func CompareHTML(w io.Writer, r *audit.Report) error {
	if r == nil {
		panic("reports: CompareHTML called with a nil report")
	}
	g := newGlyphs(false)
	v := buildView(r, g, time.Time{})
	page := htmlPage{View: v, VerdictClass: "v-" + v.Verdict, Upper: strings.ToUpper(v.Verdict)}
	if page.Upper == "" {
		page.Upper = "-"
	}
	page.Primary = primaryChart(r, v)
	page.Others = otherCharts(r)
	if err := compareHTMLTemplate.Execute(w, page); err != nil {
		return fmt.Errorf("reports: compare HTML: %w", err)
	}
	return nil
}

type htmlPage struct {
	View         *compareView
	VerdictClass string
	Upper        string
	Primary      shareChart
	Others       []shareChart
}

func primaryChart(r *audit.Report, v *compareView) shareChart {
	rows := make([]chartInput, len(r.Ledger))
	for i, l := range r.Ledger {
		rows[i] = chartInput{Feature: l.Feature,
			Base:   chartShare{l.InBaseline, l.Baseline.Share, l.Baseline.ShareLo, l.Baseline.ShareHi},
			Cand:   chartShare{l.InCandidate, l.Candidate.Share, l.Candidate.ShareLo, l.Candidate.ShareHi},
			Change: v.Ledger[i].Ratio}
		if rows[i].Change == "-" {
			rows[i].Change = ""
		}
	}
	return newShareChart("Share of "+v.Measure+" (primary measure), baseline and candidate, sorted by change", rows)
}

// otherCharts draws the shares of every other measure held by both
// importance tables, in ledger order, skipping measures with no finite
// share (SHAP off, no traffic).
func otherCharts(r *audit.Report) []shareChart {
	bt, ct := r.BaselineTable, r.CandidateTable
	if bt == nil || ct == nil {
		return nil
	}
	primary := r.Run.Measure
	if primary == "" {
		primary = r.Policy.Measure
	}
	type measure struct {
		name  string
		share func(f *importance.FeatureRow) (v, lo, hi float64, ok bool)
	}
	var ms []measure
	for m := importance.TrafficMeasure(0); m < importance.NumTrafficMeasures; m++ {
		m := m
		ms = append(ms, measure{m.String(), func(f *importance.FeatureRow) (float64, float64, float64, bool) {
			if int(m) >= len(f.Traffic) {
				return 0, 0, 0, false
			}
			e := f.Traffic[m]
			return e.Share, e.ShareLo, e.ShareHi, true
		}})
	}
	nan := math.NaN()
	ms = append(ms,
		measure{"gain_share", func(f *importance.FeatureRow) (float64, float64, float64, bool) { return f.GainShare, nan, nan, true }},
		measure{"cover_share", func(f *importance.FeatureRow) (float64, float64, float64, bool) { return f.CoverShare, nan, nan, true }},
		measure{"split_share", func(f *importance.FeatureRow) (float64, float64, float64, bool) { return f.SplitShare, nan, nan, true }},
	)
	index := func(t *importance.Table) map[string]*importance.FeatureRow {
		idx := make(map[string]*importance.FeatureRow, len(t.Features))
		for i := range t.Features {
			idx[t.Features[i].Feature] = &t.Features[i]
		}
		return idx
	}
	tables := []map[string]*importance.FeatureRow{index(bt), index(ct)}
	var out []shareChart
	for _, m := range ms {
		if m.name == primary {
			continue
		}
		rows := make([]chartInput, 0, len(r.Ledger))
		finite := false
		for _, l := range r.Ledger {
			in := chartInput{Feature: l.Feature}
			for k, t := range tables {
				s := chartShare{Share: nan, Lo: nan, Hi: nan}
				if f := t[l.Feature]; f != nil {
					if v, lo, hi, ok := m.share(f); ok {
						s = chartShare{true, v, lo, hi}
						finite = finite || !math.IsNaN(v) && !math.IsInf(v, 0)
					}
				}
				if k == 0 {
					in.Base = s
				} else {
					in.Cand = s
				}
			}
			rows = append(rows, in)
		}
		if finite {
			out = append(out, newShareChart("Share of "+m.name+", baseline and candidate, in ledger order", rows))
		}
	}
	return out
}

var compareHTMLTemplate = template.Must(template.New("compare").Funcs(template.FuncMap{
	"n":     svgNum,
	"upper": strings.ToUpper,
	"join":  strings.Join,
}).Parse(compareHTMLSource))

const compareHTMLSource = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.View.Subject}}</title>
<style>
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: #1d2330; margin: 2em auto; max-width: 980px; padding: 0 1em; line-height: 1.4; }
h1 { font-size: 1.4em; margin: 0; }
h2 { font-size: 1.15em; border-bottom: 1px solid #d5d9e0; padding-bottom: .2em; margin-top: 2em; }
header { padding: .8em 1em; border-radius: 6px; border-left: 8px solid #888; background: #f3f4f6; }
header.v-pass { border-color: #2e8540; } header.v-warn { border-color: #d9a400; } header.v-fail { border-color: #c0392b; }
table { border-collapse: collapse; font-size: .9em; margin: .6em 0; }
th, td { border: 1px solid #d5d9e0; padding: .25em .5em; vertical-align: top; text-align: left; }
th { background: #f3f4f6; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
code { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: .95em; }
.sev { font-weight: bold; padding: 0 .3em; border-radius: 3px; color: #fff; }
.sev-fail { background: #c0392b; } .sev-warn { background: #b07f00; } .sev-info { background: #6b7280; }
.hint { font-style: italic; }
.msg { color: #4b5563; }
ul.flags li { margin-bottom: .4em; }
figure { margin: 1em 0; }
figcaption { font-size: .9em; color: #4b5563; }
details { margin: .5em 0; }
dl.run { display: grid; grid-template-columns: max-content auto; gap: .2em 1em; }
dl.run dt { font-weight: bold; } dl.run dd { margin: 0; }
</style>
</head>
<body>
<header class="{{.VerdictClass}}">
<h1>splitledger: {{.Upper}}</h1>
<p><code>{{.View.Baseline}}</code> → <code>{{.View.Candidate}}</code> · {{.View.Date}} · {{.View.Fail}} fail, {{.View.Warn}} warn, {{.View.Info}} info</p>
</header>

<section>
<h2>Needs attention ({{.View.Fail}} fail, {{.View.Warn}} warn)</h2>
{{- if not .View.Attention}}
<p>Nothing: no fail or warn flag.</p>
{{- else}}
<ul class="flags">
{{- range .View.Attention}}
<li><span class="sev sev-{{.Severity}}">{{upper .Severity}}</span> <code>{{.Feature}}</code> {{.Kind}}{{if .Sample}} in {{.Sample}}{{end}}{{if .Evidence}} ({{.Evidence}}){{end}}{{if .Hint}} <span class="hint">{{.Hint}}</span>{{end}}{{if .Message}}<br><span class="msg">{{.Message}}</span>{{end}}</li>
{{- end}}
</ul>
{{- end}}
{{- if .View.Noted}}
<p>Also noted (info): {{range $i, $f := .View.Noted}}{{if $i}}, {{end}}<code>{{$f.Feature}}</code> ({{$f.Kind}}){{end}}</p>
{{- end}}
{{- if .View.Hints}}
<p>What the hints ask for:</p>
<ul>
{{- range .View.Hints}}
<li><span class="hint">{{.Hint}}</span>: {{.Advice}}</li>
{{- end}}
</ul>
{{- end}}
</section>

<section>
<h2>Ledger: share of {{.View.Measure}} per feature, baseline and candidate</h2>
{{- if not .View.Ledger}}
<p>The ledger is empty: neither model declares a feature.</p>
{{- else}}
<p>Change is candidate share / baseline share{{if .View.Confidence}} with its {{.View.Confidence}} interval{{end}}.</p>
{{template "chart" .Primary}}
<table>
<tr><th>feature</th><th>baseline share</th><th>candidate share</th><th>change</th><th>flags</th><th>hint</th></tr>
{{- range .View.Ledger}}
<tr><td><code>{{.Feature}}</code></td><td class="num">{{.BaseShare}}</td><td class="num">{{.CandShare}}</td><td class="num">{{.Ratio}}{{if .Interval}} {{.Interval}}{{end}}</td><td>{{join .Flags ", "}}</td><td class="hint">{{.Hint}}</td></tr>
{{- end}}
</table>
{{- range .Others}}
<details>
<summary>{{.Title}}</summary>
{{template "chart" .}}
</details>
{{- end}}
{{- end}}
</section>

<section>
<h2>Removal candidates</h2>
{{- if not .View.Removals}}
<p>None: every feature adds something measurable, or none was priced.</p>
{{- else}}
<p>Ranked by saving per unit of risk. Costs and savings in {{or .View.CostUnit "catalog units"}}; risk is the upper bound of the quality lost without retraining, in {{or .View.Metric "metric units"}}.</p>
<table>
<tr><th>feature</th><th>group</th><th>cost per 1k rows</th><th>saving per 1k rows</th><th>saving per day</th><th>saving per 30 days</th><th>risk at most</th><th>blocked by</th></tr>
{{- range .View.Removals}}
<tr><td><code>{{.Feature}}</code></td><td>{{if .Group}}<code>{{.Group}}</code>{{end}}</td><td class="num">{{.Cost}}</td><td class="num">{{.Saving}}</td><td class="num">{{.PerDay}}</td><td class="num">{{.Per30}}</td><td class="num">{{.Risk}}</td><td>{{range $i, $b := .Blockers}}{{if $i}}, {{end}}<code>{{$b}}</code>{{end}}</td></tr>
{{- end}}
</table>
{{- if .View.Groups}}
<ul>
{{- range .View.Groups}}
<li><code>{{.Feature}}</code> is computed in group <code>{{.Group}}</code>: its saving needs {{range $i, $b := .Blockers}}{{if $i}}, {{end}}<code>{{$b}}</code>{{end}} dropped too (not removal candidates).</li>
{{- end}}
</ul>
{{- end}}
{{- end}}
{{- if .View.Unpriced}}
<p>Not in the cost catalog (no saving computed): {{range $i, $u := .View.Unpriced}}{{if $i}}, {{end}}<code>{{$u}}</code>{{end}}.</p>
{{- end}}
</section>

<section>
<h2>Traffic health</h2>
{{- if and (not .View.Health) (not .View.HealthOmitted)}}
<p>No traffic sample was measured.</p>
{{- else}}
{{- if .View.HealthOmitted}}
<p>Features with something notable; {{.View.HealthOmitted}} others look steady (all are in the JSON report).</p>
{{- end}}
{{- if .View.Health}}
<table>
<tr><th>feature</th><th>missing baseline</th><th>missing candidate</th><th>top value (share)</th><th>PSI</th><th>KS</th><th>min .. max</th></tr>
{{- range .View.Health}}
<tr><td><code>{{.Feature}}</code></td><td class="num">{{.MissingBaseline}}</td><td class="num">{{.MissingCandidate}}</td><td class="num">{{.TopValue}}</td><td class="num">{{.PSI}}</td><td class="num">{{.KS}}</td><td class="num">{{.Range}}</td></tr>
{{- end}}
</table>
{{- end}}
{{- end}}
</section>
{{- if .View.Cautions}}

<section>
<h2>Cautions</h2>
<ul>
{{- range .View.Cautions}}
<li>{{.}}</li>
{{- end}}
</ul>
</section>
{{- end}}

<section>
<h2>How this run was made</h2>
<dl class="run">
{{- range .View.Run}}
<dt>{{.Label}}</dt><dd>{{.Text}}</dd>
{{- end}}
</dl>
{{- if .View.Notes}}
<p>Notes:</p>
<ul>
{{- range .View.Notes}}
<li>{{.}}</li>
{{- end}}
</ul>
{{- end}}
</section>
</body>
</html>
{{define "chart"}}<figure>
<svg xmlns="http://www.w3.org/2000/svg" width="{{n .Width}}" height="{{n .Height}}" viewBox="0 0 {{n .Width}} {{n .Height}}" role="img" aria-label="{{.Title}}" font-family="system-ui, sans-serif" font-size="12">
<title>{{.Title}}</title>
<rect x="{{n .PlotX}}" y="7" width="12" height="9" fill="` + baselineFill + `"/>
<text x="{{n .PlotX}}" dx="16" y="{{n .LegendY}}" fill="#1d2330">baseline</text>
<rect x="{{n .PlotX}}" y="7" width="12" height="9" fill="` + candidateFill + `" transform="translate(90)"/>
<text x="{{n .PlotX}}" dx="106" y="{{n .LegendY}}" fill="#1d2330">candidate</text>
{{- if .HasWhisker}}
<text x="{{n .PlotX}}" dx="190" y="{{n .LegendY}}" fill="#4b5563">whiskers: share interval</text>
{{- end}}
{{- $c := .}}
{{- range .Ticks}}
<line x1="{{n .X}}" y1="{{n $c.PlotTop}}" x2="{{n .X}}" y2="{{n $c.PlotBottom}}" stroke="#e1e4e8"/>
<text x="{{n .X}}" y="{{n $c.TickY}}" text-anchor="middle" fill="#4b5563">{{.Label}}</text>
{{- end}}
{{- if .HasChange}}
<text x="{{n .ChangeX}}" y="{{n .TickY}}" fill="#4b5563">change</text>
{{- end}}
{{- range .Rows}}
<g>
<title>{{.Full}}</title>
<text x="{{n $c.PlotX}}" dx="-8" y="{{n .LabelY}}" text-anchor="end" fill="#1d2330">{{.Label}}</text>
{{- range .Bars}}
<rect x="{{n .X}}" y="{{n .Y}}" width="{{n .W}}" height="{{n .H}}" fill="{{.Fill}}"><title>{{.Title}}</title></rect>
{{- if .Whisker}}
<path d="{{.Whisker}}" stroke="#1d2330" stroke-width="1" fill="none"/>
{{- end}}
{{- end}}
{{- range .Absent}}
<text x="{{n .X}}" y="{{n .Y}}" font-size="9" fill="#6b7280">{{.Text}}</text>
{{- end}}
{{- if .Change}}
<text x="{{n $c.ChangeX}}" y="{{n .LabelY}}" fill="#1d2330">{{.Change}}</text>
{{- end}}
</g>
{{- end}}
<line x1="{{n .PlotX}}" y1="{{n .PlotTop}}" x2="{{n .PlotX}}" y2="{{n .PlotBottom}}" stroke="#1d2330"/>
</svg>
<figcaption>{{.Title}}</figcaption>
</figure>
{{end}}`
