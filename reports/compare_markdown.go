package reports

import (
	"fmt"
	"io"
	"strings"

	"splitledger/audit"
)

// CompareMarkdown writes the comparison report as GitHub-flavoured markdown
// for a pull-request comment: the same sections and numbers as CompareText,
// with the tables as markdown tables (no share bars; the numbers beside
// them are all there). o.Width is ignored; o.ASCII and o.Now apply as in
// CompareText. Names, paths and messages are escaped so they render as
// written.
func CompareMarkdown(w io.Writer, r *audit.Report, o CompareOptions) error {
	if r == nil {
		panic("reports: CompareMarkdown called with a nil report")
	}
	g := newGlyphs(o.ASCII)
	v := buildView(r, g, o.now())
	m := &mdWriter{w: w}

	m.printf("### %s\n", mdText(v.Subject))

	m.printf("\n#### Needs attention (%d fail, %d warn)\n\n", v.Fail, v.Warn)
	if len(v.Attention) == 0 {
		m.printf("Nothing: no fail or warn flag.\n")
	}
	for _, f := range v.Attention {
		s := "- **" + strings.ToUpper(f.Severity) + "** " + mdCode(f.Feature, false) + " " + mdText(f.Kind)
		if f.Sample != "" {
			s += " in " + mdText(f.Sample)
		}
		if f.Evidence != "" {
			s += " (" + mdText(f.Evidence) + ")"
		}
		if f.Hint != "" {
			s += " *" + mdText(f.Hint) + "*"
		}
		if f.Message != "" {
			s += "<br>" + mdText(f.Message)
		}
		m.printf("%s\n", s)
	}
	if len(v.Noted) > 0 {
		parts := make([]string, len(v.Noted))
		for i, f := range v.Noted {
			parts[i] = mdCode(f.Feature, false) + " (" + mdText(f.Kind) + ")"
		}
		m.printf("\nAlso noted (info): %s\n", strings.Join(parts, ", "))
	}
	if len(v.Hints) > 0 {
		m.printf("\nWhat the hints ask for:\n\n")
		for _, h := range v.Hints {
			m.printf("- *%s*: %s\n", mdText(h.Hint), mdText(h.Advice))
		}
	}

	m.printf("\n#### Ledger: share of %s per feature, baseline and candidate\n\n", mdText(v.Measure))
	if len(v.Ledger) == 0 {
		m.printf("The ledger is empty: neither model declares a feature.\n")
	} else {
		legend := "Change is candidate share / baseline share"
		if v.Confidence != "" {
			legend += " with its " + v.Confidence + " interval"
		}
		m.printf("%s.\n\n", mdText(legend))
		m.row("feature", "baseline share", "candidate share", "change", "flags", "hint")
		m.printf("|---|--:|--:|--:|---|---|\n")
		for _, l := range v.Ledger {
			change := l.Ratio
			if l.Interval != "" {
				change += " " + l.Interval
			}
			m.row(mdCode(l.Feature, true), mdText(l.BaseShare), mdText(l.CandShare), mdText(change),
				mdText(strings.Join(l.Flags, ", ")), mdText(l.Hint))
		}
	}

	m.printf("\n#### Removal candidates\n\n")
	if len(v.Removals) == 0 {
		m.printf("None: every feature adds something measurable, or none was priced.\n")
	} else {
		unit, metric := v.CostUnit, v.Metric
		if unit == "" {
			unit = "catalog units"
		}
		if metric == "" {
			metric = "metric units"
		}
		m.printf("%s\n\n", mdText("Ranked by saving per unit of risk. Costs and savings in "+unit+
			"; risk is the upper bound of the quality lost without retraining, in "+metric+"."))
		m.row("feature", "group", "cost per 1k rows", "saving per 1k rows", "saving per day", "saving per 30 days", "risk at most", "blocked by")
		m.printf("|---|---|--:|--:|--:|--:|--:|---|\n")
		for _, rv := range v.Removals {
			blockers := make([]string, len(rv.Blockers))
			for i, b := range rv.Blockers {
				blockers[i] = mdCode(b, true)
			}
			m.row(mdCode(rv.Feature, true), mdCode(rv.Group, true), rv.Cost, rv.Saving, rv.PerDay, rv.Per30, rv.Risk, strings.Join(blockers, ", "))
		}
		if len(v.Groups) > 0 {
			m.printf("\n")
			for _, g := range v.Groups {
				blockers := make([]string, len(g.Blockers))
				for i, b := range g.Blockers {
					blockers[i] = mdCode(b, false)
				}
				m.printf("- %s is computed in group %s: its saving needs %s dropped too (not removal candidates).\n",
					mdCode(g.Feature, false), mdCode(g.Group, false), strings.Join(blockers, ", "))
			}
		}
	}
	if len(v.Unpriced) > 0 {
		parts := make([]string, len(v.Unpriced))
		for i, u := range v.Unpriced {
			parts[i] = mdCode(u, false)
		}
		m.printf("\nNot in the cost catalog (no saving computed): %s.\n", strings.Join(parts, ", "))
	}

	m.printf("\n#### Traffic health\n\n")
	switch {
	case len(v.Health) == 0 && v.HealthOmitted == 0:
		m.printf("No traffic sample was measured.\n")
	default:
		if v.HealthOmitted > 0 {
			m.printf("Features with something notable; %d others look steady (all are in the JSON report).\n\n", v.HealthOmitted)
		}
		if len(v.Health) > 0 {
			m.row("feature", "missing baseline", "missing candidate", "top value (share)", "PSI", "KS", "min .. max")
			m.printf("|---|--:|--:|--:|--:|--:|--:|\n")
			for _, h := range v.Health {
				m.row(mdCode(h.Feature, true), mdText(h.MissingBaseline), mdText(h.MissingCandidate), mdText(h.TopValue), h.PSI, h.KS, mdText(h.Range))
			}
		}
	}

	if len(v.Cautions) > 0 {
		m.printf("\n#### Cautions\n\n")
		for _, s := range v.Cautions {
			m.printf("- %s\n", mdText(s))
		}
	}

	m.printf("\n#### How this run was made\n\n")
	for _, l := range v.Run {
		m.printf("- **%s**: %s\n", mdText(l.Label), mdText(l.Text))
	}
	if len(v.Notes) > 0 {
		m.printf("\nNotes:\n\n")
		for _, n := range v.Notes {
			m.printf("- %s\n", mdText(n))
		}
	}
	return m.err
}

type mdWriter struct {
	w   io.Writer
	err error
}

func (m *mdWriter) printf(format string, a ...any) {
	if m.err == nil {
		_, m.err = fmt.Fprintf(m.w, format, a...)
	}
}

// row writes one table row; cells must already be escaped.
func (m *mdWriter) row(cells ...string) {
	m.printf("| %s |\n", strings.Join(cells, " | "))
}

// mdText escapes the characters that markdown (CommonMark with GitHub's
// tables) would read as markup, so s renders as written. A pipe is escaped
// too, which keeps table cells whole.
func mdText(s string) string {
	var b strings.Builder
	for _, r := range s {
		if strings.ContainsRune("\\`*_[]<>|~&#", r) {
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	return b.String()
}

// mdCode writes s as a code span whose fence is longer than any run of
// backticks inside it; inTable escapes pipes, which GitHub reads as cell
// borders even inside code. Empty s gives "".
func mdCode(s string, inTable bool) string {
	if s == "" {
		return ""
	}
	run, longest := 0, 0
	for _, r := range s {
		if r == '`' {
			run++
			longest = max(longest, run)
		} else {
			run = 0
		}
	}
	if inTable {
		s = strings.ReplaceAll(s, "|", `\|`)
	}
	fence := strings.Repeat("`", longest+1)
	if longest > 0 || strings.HasPrefix(s, " ") || strings.HasSuffix(s, " ") {
		s = " " + s + " "
	}
	return fence + s + fence
}
