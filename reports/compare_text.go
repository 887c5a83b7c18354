package reports

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"

	"github.com/olekukonko/tablewriter"
	"github.com/olekukonko/tablewriter/pkg/twwidth"
	"github.com/olekukonko/tablewriter/tw"

	"splitledger/audit"
	"splitledger/storage/history"
)

// CompareOptions controls the text and markdown comparison reports.
type CompareOptions struct {
	// ASCII keeps every byte of the output below 128: ASCII table borders,
	// share bars drawn with '=' (baseline) and '#' (candidate), "->" and
	// "x" for arrows and ratios, and other characters of names, paths and
	// messages spelled in ASCII ("..." for an ellipsis) or replaced by '?'.
	ASCII bool
	// Width is the widest line of the text report in display columns
	// (one per rune for the report's own characters). 0 means 100; values
	// below 60 are raised to 60. Markdown ignores it.
	Width int
	// Now stamps the report's "written" line; the zero time means the
	// current time. Golden tests pass Report.Run.Started.
	Now time.Time
}

const (
	defaultWidth = 100
	minWidth     = 60
	// barCells is the length of a full share bar in the text ledger.
	barCells = 10
	// healthAllUpTo: with at most this many features the traffic health
	// section lists every feature, otherwise only notable ones.
	healthAllUpTo = 12
)

func (o CompareOptions) width() int {
	switch {
	case o.Width == 0:
		return defaultWidth
	case o.Width < minWidth:
		return minWidth
	default:
		return o.Width
	}
}

func (o CompareOptions) now() time.Time {
	if o.Now.IsZero() {
		return time.Now()
	}
	return o.Now
}

// CompareText writes the comparison report for a weekly e-mail read in a
// fixed-width font: a subject line, the flags that need attention, the
// ledger with share bars, removal candidates, traffic health, the cautions
// and how the run was made. No line is wider than o.Width columns: long
// cells and paragraphs wrap, feature names break at '_' where they must.
// NaN values print as "-". It computes nothing: every number comes from r.
func CompareText(w io.Writer, r *audit.Report, o CompareOptions) error {
	if r == nil {
		panic("reports: CompareText called with a nil report")
	}
	g := newGlyphs(o.ASCII)
	v := buildView(r, g, o.now())
	t := &textWriter{w: w, width: o.width(), g: g}
	t.line(subjectLine(v, g, t.width))
	t.attention(v)
	t.ledger(v)
	t.removals(v)
	t.health(v)
	t.cautions(v)
	t.run(v)
	return t.err
}

// ---------------------------------------------------------------------------
// The view: the report's content as display strings, shared by the text,
// markdown and HTML renderers so the three say the same thing.

type compareView struct {
	Subject             string
	Verdict             string // "pass", "warn", "fail" (as in the report)
	Baseline, Candidate string // model file base names
	Date                string
	Fail, Warn, Info    int
	Attention           []flagView // fail and warn flags, most severe first
	Noted               []flagView // info flags
	Hints               []hintView
	Measure             string
	Confidence          string // "95%", "" when unknown
	Ledger              []ledgerView
	BarScale            float64
	BarScaleText        string
	Removals            []removalView
	Groups              []removalView // removals whose group saving is blocked
	CostUnit            string
	Metric              string
	Unpriced            []string
	Health              []healthView
	HealthOmitted       int
	Cautions            []string
	Run                 []runLine
	Notes               []string
}

type flagView struct {
	Severity string // "fail", "warn", "info"
	Feature  string
	Kind     string
	Sample   string
	Evidence string
	Hint     string
	Message  string
}

type hintView struct{ Hint, Advice string }

type ledgerView struct {
	Feature                 string
	InBaseline, InCandidate bool
	BaseShare, CandShare    string
	BaseValue, CandValue    float64
	Ratio, Interval         string
	Flags                   []string
	Hint                    string
}

type removalView struct {
	Feature, Group                    string
	Cost, Saving, PerDay, Per30, Risk string
	Blockers                          []string
}

type healthView struct {
	Feature           string
	MissingBaseline   string
	MissingCandidate  string
	Missing           string // "baseline -> candidate"
	TopValue, PSI, KS string
	Range             string
}

type runLine struct{ Label, Text string }

// hintAdvice says what each hint asks the reader to do.
func hintAdvice(h string) string {
	switch h {
	case audit.HintPipelineSuspect:
		return "the feature's traffic changed together with its use: check the job that fills the column before blaming the model."
	case audit.HintModelShift:
		return "the traffic is steady but the model leans on the feature differently: review the training change behind it."
	case audit.HintPrune:
		return "the feature costs compute and adds nothing measurable: consider retraining without it and confirming with an experiment."
	default:
		return ""
	}
}

// shareKinds are the flags whose key evidence is the ledger's share change.
func shareKind(kind string) bool {
	switch kind {
	case audit.KindCollapsed, audit.KindSurged, audit.KindDropped, audit.KindAdded:
		return true
	}
	return false
}

// trafficKind reports the flags about the traffic itself.
func trafficKind(kind string) bool {
	switch kind {
	case audit.KindWentConstant, audit.KindMissingSpike, audit.KindOutOfRange, audit.KindShifted:
		return true
	}
	return false
}

// subjectLine fits the subject on one line of width columns: first with
// single spaces, then by eliding the start the candidate's name shares
// with the baseline's, then without the date, then by cutting the middle
// out of the longer model name.
func subjectLine(v *compareView, g glyphs, width int) string {
	if textWidth(v.Subject) <= width {
		return v.Subject
	}
	verdict := strings.ToUpper(v.Verdict)
	if verdict == "" {
		verdict = "-"
	}
	base, cand, date := v.Baseline, v.Candidate, " "+v.Date
	build := func() string {
		return fmt.Sprintf("splitledger: %s %s %s %s%s %d fail, %d warn, %d info",
			verdict, base, g.arrow, cand, date, v.Fail, v.Warn, v.Info)
	}
	s := build()
	if textWidth(s) > width {
		cand = sharedPrefixElided(base, cand, g)
		s = build()
	}
	if textWidth(s) > width {
		date = "" // the run section still dates the run
		s = build()
	}
	for excess := textWidth(s) - width; excess > 0; excess = textWidth(s) - width {
		b, c := []rune(base), []rune(cand)
		if len(b) <= 4 && len(c) <= 4 {
			break
		}
		if len(b) >= len(c) {
			base = elideMiddle(b, excess, g)
		} else {
			cand = elideMiddle(c, excess, g)
		}
		s = build()
	}
	return s
}

// sharedPrefixElided replaces the part of cand's name that repeats the
// start of base with an ellipsis, cut after a separator so what is left
// reads as a whole: ranker-2026-11-16.json, ranker-2026-11-30.json gives
// "…30.json". Names sharing fewer than 4 runes come back unchanged.
func sharedPrefixElided(base, cand string, g glyphs) string {
	b, c := []rune(base), []rune(cand)
	n := 0
	for n < len(b) && n < len(c) && b[n] == c[n] {
		n++
	}
	cut := -1
	for i := n - 1; i >= 3; i-- {
		if strings.ContainsRune("-_./", c[i]) {
			cut = i + 1
			break
		}
	}
	if cut < 4 || cut >= len(c) {
		return cand
	}
	mark := "…"
	if g.ascii {
		mark = "..."
	}
	return mark + string(c[cut:])
}

// elideMiddle drops at least drop runes from the middle of a name (more
// when the name already holds an ellipsis or the mark needs room), marking
// the cut with one ellipsis ("..." in ASCII mode). At least one rune of
// the name's start and end stays when the name has them.
func elideMiddle(r []rune, drop int, g glyphs) string {
	mark := []rune("…")
	if g.ascii {
		mark = []rune("...")
	}
	// An earlier cut is undone first so there is only ever one mark.
	if i := indexRunes(r, mark); i >= 0 {
		r = append(append([]rune{}, r[:i]...), r[i+len(mark):]...)
	} else {
		drop += len(mark)
	}
	keep := max(len(r)-drop, 2)
	if keep >= len(r) {
		keep = len(r) - 1
	}
	head := (keep + 1) / 2
	tail := keep - head
	return string(r[:head]) + string(mark) + string(r[len(r)-tail:])
}

func indexRunes(r, sub []rune) int {
	for i := 0; i+len(sub) <= len(r); i++ {
		match := true
		for k := range sub {
			if r[i+k] != sub[k] {
				match = false
				break
			}
		}
		if match {
			return i
		}
	}
	return -1
}

// buildView turns r into display strings. now stamps the "written" line
// (none when zero) and dates the subject when the run has no start time.
func buildView(r *audit.Report, g glyphs, now time.Time) *compareView {
	c := g.clean
	v := &compareView{Verdict: c(r.Verdict), Measure: c(r.Run.Measure), Metric: c(r.Run.Metric), CostUnit: c(r.CostUnit)}
	if v.Measure == "" {
		v.Measure = c(r.Policy.Measure)
	}
	if r.Run.Confidence > 0 && r.Run.Confidence < 1 {
		v.Confidence = strconv.FormatFloat(100*r.Run.Confidence, 'f', -1, 64) + "%"
	}
	v.Baseline, v.Candidate = "-", "-"
	for i, m := range r.Models {
		switch {
		case m.Role == "baseline" || (m.Role == "" && i == 0):
			v.Baseline = c(baseName(m.Path))
		case m.Role == "candidate" || (m.Role == "" && i == 1):
			v.Candidate = c(baseName(m.Path))
		}
	}
	v.Date = "-"
	switch {
	case !r.Run.Started.IsZero():
		v.Date = r.Run.Started.UTC().Format("2006-01-02")
	case !now.IsZero():
		v.Date = now.UTC().Format("2006-01-02")
	}

	rows := make(map[string]*audit.LedgerRow, len(r.Ledger))
	for i := range r.Ledger {
		rows[r.Ledger[i].Feature] = &r.Ledger[i]
	}
	order := make([]int, len(r.Flags))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return r.Flags[order[a]].Severity > r.Flags[order[b]].Severity })
	hints := map[string]bool{}
	for _, i := range order {
		f := r.Flags[i]
		kind := f.Kind
		if f.Streak > 0 {
			kind += " (" + history.StreakLabel(f.Streak) + ")"
		}
		fv := flagView{Severity: c(f.Severity.String()), Feature: c(f.Feature), Kind: c(kind), Sample: c(f.Sample),
			Hint: c(f.Hint), Message: c(f.Message), Evidence: c(flagEvidence(f, rows[f.Feature], g))}
		switch {
		case f.Severity >= audit.SeverityFail:
			v.Fail++
			v.Attention = append(v.Attention, fv)
		case f.Severity == audit.SeverityWarn:
			v.Warn++
			v.Attention = append(v.Attention, fv)
		default:
			v.Info++
			v.Noted = append(v.Noted, fv)
		}
		if f.Hint != "" {
			hints[f.Hint] = true
		}
	}
	for _, l := range r.Ledger {
		if l.Hint != "" {
			hints[l.Hint] = true
		}
	}
	for _, h := range []string{audit.HintPipelineSuspect, audit.HintModelShift, audit.HintPrune} {
		if hints[h] {
			v.Hints = append(v.Hints, hintView{h, hintAdvice(h)})
		}
	}
	verdict := strings.ToUpper(v.Verdict)
	if verdict == "" {
		verdict = "-"
	}
	v.Subject = fmt.Sprintf("splitledger: %s  %s %s %s  %s  %d fail, %d warn, %d info",
		verdict, v.Baseline, g.arrow, v.Candidate, v.Date, v.Fail, v.Warn, v.Info)

	// ledger
	var bs, cs []float64
	for _, l := range r.Ledger {
		lv := ledgerView{Feature: c(l.Feature), InBaseline: l.InBaseline, InCandidate: l.InCandidate,
			BaseShare: fmtShare(l.Baseline.Share), CandShare: fmtShare(l.Candidate.Share),
			BaseValue: l.Baseline.Share, CandValue: l.Candidate.Share,
			Ratio: g.times + fmtRatio(l.Ratio), Hint: c(l.Hint)}
		if !l.InBaseline {
			lv.BaseShare, lv.BaseValue = "absent", math.NaN()
		}
		if !l.InCandidate {
			lv.CandShare, lv.CandValue = "absent", math.NaN()
		}
		if math.IsNaN(l.Ratio) {
			lv.Ratio = "-"
		}
		if !math.IsNaN(l.RatioLo) && !math.IsNaN(l.RatioHi) {
			lv.Interval = "[" + fmtRatio(l.RatioLo) + ", " + fmtRatio(l.RatioHi) + "]"
		}
		for _, k := range l.Flags {
			lv.Flags = append(lv.Flags, c(k))
		}
		bs, cs = append(bs, lv.BaseValue), append(cs, lv.CandValue)
		v.Ledger = append(v.Ledger, lv)
	}
	v.BarScale = barScale(bs, cs)
	v.BarScaleText = fmtPct(v.BarScale)

	// removals
	for _, m := range r.Removals {
		unit := m.Unit
		if unit == "" {
			unit = r.CostUnit
		}
		if v.CostUnit == "" {
			v.CostUnit = c(unit)
		}
		rv := removalView{Feature: c(m.Feature), Group: c(m.Group), Cost: fmtNum(m.CostPer1kRows),
			Saving: fmtNum(m.Saving), PerDay: fmtNum(m.PerDay), Per30: fmtNum(m.Per30Days), Risk: fmtNum(m.Risk)}
		for _, b := range m.Blockers {
			rv.Blockers = append(rv.Blockers, c(b))
		}
		v.Removals = append(v.Removals, rv)
		if m.Group != "" && len(m.Blockers) > 0 {
			v.Groups = append(v.Groups, rv)
		}
	}
	for _, u := range r.Unpriced {
		v.Unpriced = append(v.Unpriced, c(u))
	}

	// traffic health
	notable := map[string]bool{}
	for _, f := range r.Flags {
		if trafficKind(f.Kind) {
			notable[f.Feature] = true
		}
	}
	p := r.Policy
	for _, h := range r.Health {
		show := len(r.Health) <= healthAllUpTo || notable[h.Feature] ||
			h.PSI >= p.PSIWarn || h.TopValueShare >= p.ConstantShare ||
			h.MissingCandidate-h.MissingBaseline >= p.MissingSpikePoints
		if !show {
			v.HealthOmitted++
			continue
		}
		hv := healthView{Feature: c(h.Feature), MissingBaseline: fmtPct(h.MissingBaseline), MissingCandidate: fmtPct(h.MissingCandidate),
			PSI: fmtNum(h.PSI), KS: fmtNum(h.KS), TopValue: "-", Range: "-"}
		hv.Missing = hv.MissingBaseline + " " + g.arrow + " " + hv.MissingCandidate
		if !math.IsNaN(h.TopValueShare) {
			hv.TopValue = fmtNum(h.TopValue) + " (" + fmtPct(h.TopValueShare) + ")"
		}
		if !math.IsNaN(h.Min) || !math.IsNaN(h.Max) {
			hv.Range = fmtNum(h.Min) + " .. " + fmtNum(h.Max)
		}
		v.Health = append(v.Health, hv)
	}
	for _, s := range r.Cautions {
		v.Cautions = append(v.Cautions, c(s))
	}
	v.Run = runLines(r, g, now)
	for _, n := range r.Notes {
		v.Notes = append(v.Notes, c(n))
	}
	return v
}

// flagEvidence gives a flag's key numbers: the ledger's share change for
// share flags, otherwise the flag's own evidence.
func flagEvidence(f audit.Flag, row *audit.LedgerRow, g glyphs) string {
	if shareKind(f.Kind) && row != nil {
		base, cand := fmtShare(row.Baseline.Share), fmtShare(row.Candidate.Share)
		if !row.InBaseline {
			base = "absent"
		}
		if !row.InCandidate {
			cand = "absent"
		}
		s := "share " + base + " " + g.arrow + " " + cand
		if row.InBaseline && row.InCandidate && !math.IsNaN(row.Ratio) {
			s += ", " + g.times + fmtRatio(row.Ratio)
			if !math.IsNaN(row.RatioLo) && !math.IsNaN(row.RatioHi) {
				s += " [" + fmtRatio(row.RatioLo) + ", " + fmtRatio(row.RatioHi) + "]"
			}
		}
		return s
	}
	parts := make([]string, 0, len(f.Evidence))
	for _, e := range f.Evidence {
		parts = append(parts, fmtEvidence(e))
	}
	return strings.Join(parts, ", ")
}

// fmtEvidence writes "name value [lo, hi]"; a name ending in "share"
// ("candidate missing share") prints as a percentage.
func fmtEvidence(e audit.Evidence) string {
	f := fmtNum
	if strings.HasSuffix(strings.ToLower(e.Name), "share") {
		f = fmtShare
	}
	s := f(e.Value)
	if e.Name != "" {
		s = e.Name + " " + s
	}
	if !math.IsNaN(e.Lo) && !math.IsNaN(e.Hi) {
		s += " [" + f(e.Lo) + ", " + f(e.Hi) + "]"
	}
	return s
}

// fmtRatio formats a share ratio: two significant digits below 0.1
// (0.067), two decimals up to 10 (0.85, 3.21), one up to 100, none above;
// "-" for NaN, "inf" for +Inf.
func fmtRatio(v float64) string {
	a := math.Abs(v)
	switch {
	case math.IsNaN(v):
		return "-"
	case math.IsInf(v, 0):
		if v > 0 {
			return "inf"
		}
		return "-inf"
	case a >= 100:
		return strconv.FormatFloat(v, 'f', 0, 64)
	case a >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	case a >= 0.1:
		return strconv.FormatFloat(v, 'f', 2, 64)
	default:
		return strconv.FormatFloat(v, 'g', 2, 64)
	}
}

// fmtShare formats a share as a percentage with one decimal, or with two
// significant digits when it is below 0.1% and not zero (0.04%), so a
// small share does not read as none. NaN is "-".
func fmtShare(v float64) string {
	if a := math.Abs(v); a > 0 && a < 0.001 {
		return strconv.FormatFloat(100*v, 'g', 2, 64) + "%"
	}
	return fmtPct(v)
}

func baseName(p string) string {
	if p == "" {
		return "-"
	}
	return filepath.Base(strings.ReplaceAll(p, `\`, "/"))
}

func runLines(r *audit.Report, g glyphs, now time.Time) []runLine {
	c := g.clean
	var out []runLine
	for _, m := range r.Models {
		s := c(m.Path) + " (" + c(m.Format)
		if m.Objective != "" {
			s += ", " + c(m.Objective)
		}
		s += fmt.Sprintf(", %d trees, %d of %d features used; %s, sha256 %s)", m.Trees, m.Used, m.Features, fmtBytes(m.Bytes), shortHash(m.SHA256))
		out = append(out, runLine{c(m.Role) + " model", s})
	}
	for _, t := range r.Traffic {
		s := c(t.Path) + " (" + fmtCount(int64(t.Rows))
		if t.TotalRows > 0 {
			s += " of " + fmtCount(t.TotalRows)
		}
		s += " rows"
		if t.SampleFraction > 0 && t.SampleFraction < 1 {
			s += " (" + fmtPct(t.SampleFraction) + " sample)"
		}
		s += fmt.Sprintf(", %s bootstrap units; %s, sha256 %s)", fmtCount(int64(t.Units)), fmtBytes(t.Bytes), shortHash(t.SHA256))
		out = append(out, runLine{c(t.Role), s})
	}
	ri := r.Run
	boot := fmt.Sprintf("%d replicates", ri.Replicates)
	if ri.Confidence > 0 {
		boot += ", " + strconv.FormatFloat(100*ri.Confidence, 'f', -1, 64) + "% intervals"
	}
	boot += fmt.Sprintf(", seed %d", ri.Seed)
	if ri.Repeats > 0 {
		boot += fmt.Sprintf("; permutation repeats %d", ri.Repeats)
	}
	out = append(out, runLine{"bootstrap", boot})
	metric := c(ri.Metric)
	if metric == "" {
		metric = "-"
	}
	out = append(out, runLine{"metric", metric + " on the candidate traffic: baseline " +
		fmtInterval(r.BaselineQuality.Value, r.BaselineQuality.Lo, r.BaselineQuality.Hi) + ", candidate " +
		fmtInterval(r.CandidateQuality.Value, r.CandidateQuality.Lo, r.CandidateQuality.Hi)})
	measure := ri.Measure
	if measure == "" {
		measure = r.Policy.Measure
	}
	out = append(out, runLine{"primary measure", c(measure)})
	p := r.Policy
	failOnWarn := ""
	if p.FailOnWarn {
		failOnWarn = ", fail on warn"
	}
	out = append(out, runLine{"policy", fmt.Sprintf("collapse %s%s, surge %s%s, min share %s, major share %s, constant share %s, missing spike %s, PSI warn %s / fail %s, removal tolerance %s%s",
		g.times, fmtNum(p.CollapseFactor), g.times, fmtNum(p.SurgeFactor), fmtPct(p.MinShare), fmtPct(p.MajorShare),
		fmtPct(p.ConstantShare), fmtPct(p.MissingSpikePoints), fmtNum(p.PSIWarn), fmtNum(p.PSIFail),
		strconv.FormatFloat(100*p.RemovalTolerance, 'g', 4, 64)+"%", failOnWarn)})
	run := "-"
	if !ri.Started.IsZero() {
		run = "started " + ri.Started.UTC().Format("2006-01-02 15:04:05 UTC")
	}
	run += ", took " + fmtDuration(ri.Duration)
	if ri.Workers > 0 {
		run += fmt.Sprintf(", %d workers", ri.Workers)
	}
	if ri.Version != "" {
		run += ", splitledger " + c(ri.Version)
	}
	out = append(out, runLine{"run", run})
	if !now.IsZero() {
		out = append(out, runLine{"written", now.UTC().Format("2006-01-02 15:04:05 UTC")})
	}
	return out
}

func shortHash(h string) string {
	if h == "" {
		return "-"
	}
	if len(h) > 12 {
		return h[:12]
	}
	return h
}

// fmtBytes writes a size in B, KiB, MiB or GiB.
func fmtBytes(n int64) string {
	const k = 1024
	switch {
	case n < 0:
		return "-"
	case n < k:
		return strconv.FormatInt(n, 10) + " B"
	case n < k*k:
		return strconv.FormatFloat(float64(n)/k, 'f', 1, 64) + " KiB"
	case n < k*k*k:
		return strconv.FormatFloat(float64(n)/(k*k), 'f', 1, 64) + " MiB"
	default:
		return strconv.FormatFloat(float64(n)/(k*k*k), 'f', 1, 64) + " GiB"
	}
}

// fmtCount writes an integer with thousands separated by commas.
func fmtCount(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	if neg {
		s = s[1:]
	}
	var b strings.Builder
	for i, ch := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(ch)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

func fmtDuration(d time.Duration) string {
	switch {
	case d <= 0:
		return "-"
	case d < time.Second:
		return d.Round(time.Millisecond).String()
	default:
		return d.Round(time.Second).String()
	}
}

// asciiSpelling spells common non-ASCII characters of names and messages.
var asciiSpelling = map[rune]string{
	'→': "->", '←': "<-", '⇒': "=>", '×': "x", '…': "...", '–': "-", '—': "-", '−': "-", '‐': "-",
	'‘': "'", '’': "'", '“': `"`, '”': `"`, '≤': "<=", '≥': ">=", '≠': "!=", '≈': "~", '±': "+/-",
	'Δ': "delta", 'µ': "u", 'μ': "u", '·': ".", '•': "*", '°': "deg", '€': "EUR", '£': "GBP",
	'\u00a0': " ", '\u2009': " ", '\u202f': " ",
}

// clean makes an outside string safe to print: control characters (tabs,
// newlines) become spaces and invisible format characters '?'; in ASCII
// mode every other rune above 127 is spelled in ASCII or becomes '?'.
func (g glyphs) clean(s string) string {
	ok := true
	for i := 0; i < len(s); i++ {
		if b := s[i]; b < 0x20 || b >= 0x7f {
			ok = false
			break
		}
	}
	if ok {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		switch {
		case r == utf8.RuneError || unicode.Is(unicode.Cf, r):
			b.WriteByte('?')
		case unicode.IsControl(r) || r == '\u2028' || r == '\u2029':
			b.WriteByte(' ')
		case r < utf8.RuneSelf || !g.ascii:
			b.WriteRune(r)
		default:
			if sp, ok := asciiSpelling[r]; ok {
				b.WriteString(sp)
			} else {
				b.WriteByte('?')
			}
		}
	}
	return b.String()
}

// ---------------------------------------------------------------------------
// Text layout.

// textWidth is a string's width in columns, measured as the table writer
// measures it so tables and wrapped paragraphs agree.
func textWidth(s string) int { return twwidth.Width(s) }

// breakWord cuts one word into pieces no wider than w, preferring to cut
// after '_', '-', '.', '/' or ',' in the second half of a piece. It takes
// time linear in the word's length.
func breakWord(s string, w int) []string {
	if w < 1 {
		w = 1
	}
	if textWidth(s) <= w {
		return []string{s}
	}
	var out []string
	start, width, best := 0, 0, -1
	for i, r := range s {
		rw := textWidth(string(r))
		if width+rw > w && i > start {
			cut := i
			if best > start {
				cut = best
			}
			out = append(out, s[start:cut])
			start, width, best = cut, textWidth(s[cut:i]), -1
		}
		width += rw
		if strings.ContainsRune("_-./,", r) && width*2 >= w {
			best = i + utf8.RuneLen(r)
		}
	}
	return append(out, s[start:])
}

// wrapWords wraps s at spaces into lines no wider than w. Runs of spaces
// between words on one line are kept (they align columns); the spaces at
// a break are dropped. A word wider than w starts a new line and is cut by
// breakWord. Empty s gives one empty line.
func wrapWords(s string, w int) []string {
	var lines []string
	cur, curW := "", 0
	for i := 0; i < len(s); {
		j := i
		for j < len(s) && s[j] == ' ' {
			j++
		}
		k := j
		for k < len(s) && s[k] != ' ' {
			k++
		}
		if k == j {
			break
		}
		gap, word := s[i:j], s[j:k]
		i = k
		ww := textWidth(word)
		switch {
		case cur != "" && curW+len(gap)+ww <= w:
			cur, curW = cur+gap+word, curW+len(gap)+ww
		case ww <= w:
			if cur != "" {
				lines = append(lines, cur)
			}
			cur, curW = word, ww
		default:
			if cur != "" {
				lines = append(lines, cur)
			}
			pieces := breakWord(word, w)
			lines = append(lines, pieces[:len(pieces)-1]...)
			cur = pieces[len(pieces)-1]
			curW = textWidth(cur)
		}
	}
	return append(lines, cur)
}

type textWriter struct {
	w     io.Writer
	width int
	g     glyphs
	err   error
}

func (t *textWriter) line(s string) {
	if t.err != nil {
		return
	}
	lines := []string{s}
	if textWidth(s) > t.width {
		lines = wrapWords(s, t.width)
	}
	for _, l := range lines {
		_, t.err = io.WriteString(t.w, l+"\n")
		if t.err != nil {
			return
		}
	}
}

func (t *textWriter) blank() {
	if t.err == nil {
		_, t.err = io.WriteString(t.w, "\n")
	}
}

// para writes s wrapped with first as the first line's prefix and an
// indent of rest spaces on the following lines.
func (t *textWriter) para(first string, rest int, s string) {
	if t.err != nil {
		return
	}
	fw := textWidth(first)
	avail := t.width - max(fw, rest)
	if avail < 10 {
		avail = 10
	}
	lines := wrapWords(s, avail)
	pad := strings.Repeat(" ", rest)
	for i, l := range lines {
		p := pad
		if i == 0 {
			p = first
		}
		if _, t.err = io.WriteString(t.w, strings.TrimRight(p+l, " ")+"\n"); t.err != nil {
			return
		}
	}
}

func (t *textWriter) heading(s string) {
	t.blank()
	t.line(s)
	t.line(strings.Repeat("-", min(textWidth(s), t.width)))
}

// column describes one column of a fitted text table.
type column struct {
	head  string
	right bool // right-aligned (numbers)
	// wrap: the column's cells may wrap below their natural width, down to
	// min columns. Other columns keep their cells whole and only wrap the
	// header.
	wrap bool
	min  int
}

// table writes rows under cols, wrapping cells so that the whole table is
// no wider than the page. Cells may hold several lines ("\n").
func (t *textWriter) table(cols []column, rows [][]string) {
	if t.err != nil {
		return
	}
	n := len(cols)
	avail := t.width - (3*n + 1)
	widths := make([]int, n)
	// Two floors: first headers wrap at spaces down to their cells'
	// width, then wrapping cells wrap down to their column's min.
	headFloor := make([]int, n)
	floor := make([]int, n)
	for j, c := range cols {
		body := 0
		for _, row := range rows {
			for _, l := range strings.Split(row[j], "\n") {
				body = max(body, textWidth(l))
			}
		}
		widths[j], headFloor[j] = body, body
		for _, l := range strings.Split(c.head, "\n") {
			widths[j] = max(widths[j], textWidth(l))
			for _, word := range strings.Fields(l) {
				headFloor[j] = max(headFloor[j], textWidth(word))
			}
		}
		floor[j] = max(c.min, 1)
		if !c.wrap {
			floor[j] = max(floor[j], body)
		}
		headFloor[j] = max(headFloor[j], floor[j])
	}
	total := 0
	for _, wd := range widths {
		total += wd
	}
	for _, fl := range [][]int{headFloor, floor} {
		for total > avail {
			best := -1
			for j := range cols {
				if widths[j] > fl[j] && (best < 0 || widths[j] > widths[best]) {
					best = j
				}
			}
			if best < 0 {
				break
			}
			widths[best]--
			total--
		}
	}
	fit := func(cell string, wd int) string {
		var out []string
		for _, l := range strings.Split(cell, "\n") {
			if textWidth(l) <= wd {
				out = append(out, l)
				continue
			}
			out = append(out, wrapWords(l, wd)...)
		}
		return strings.Join(out, "\n")
	}
	head := make([]string, n)
	align := make([]tw.Align, n)
	for j, c := range cols {
		head[j] = fit(c.head, widths[j])
		align[j] = tw.AlignLeft
		if c.right {
			align[j] = tw.AlignRight
		}
	}
	tb := newTable(t.w, t.g.ascii, head)
	tb.Options(tablewriter.WithTrimSpace(tw.Off))
	tb.Configure(func(cfg *tablewriter.Config) { cfg.Row.Alignment.PerColumn = align })
	for _, row := range rows {
		cells := make([]string, n)
		for j := range cols {
			cells[j] = fit(row[j], widths[j])
		}
		if err := tb.Append(cells); err != nil {
			t.err = fmt.Errorf("reports: table row %q: %w", row[0], err)
			return
		}
	}
	if err := tb.Render(); err != nil {
		t.err = fmt.Errorf("reports: render table: %w", err)
	}
}

func (t *textWriter) attention(v *compareView) {
	t.heading(fmt.Sprintf("Needs attention (%d fail, %d warn)", v.Fail, v.Warn))
	if len(v.Attention) == 0 {
		t.line("Nothing: no fail or warn flag.")
	}
	for _, f := range v.Attention {
		s := f.Feature + "  " + f.Kind
		if f.Sample != "" {
			s += " in " + f.Sample
		}
		if f.Evidence != "" {
			s += " (" + f.Evidence + ")"
		}
		if f.Hint != "" {
			s += "  " + f.Hint
		}
		t.para(strings.ToUpper(f.Severity)+"  ", 6, s)
		if f.Message != "" {
			t.para("      ", 6, f.Message)
		}
	}
	if len(v.Noted) > 0 {
		parts := make([]string, len(v.Noted))
		for i, f := range v.Noted {
			parts[i] = f.Feature + " (" + f.Kind + ")"
		}
		t.blank()
		t.para("Also noted (info): ", 2, strings.Join(parts, ", "))
	}
	if len(v.Hints) > 0 {
		t.blank()
		t.line("What the hints ask for:")
		for _, h := range v.Hints {
			t.para(fmt.Sprintf("  %-17s ", h.Hint), 20, h.Advice)
		}
	}
}

func (t *textWriter) ledger(v *compareView) {
	t.heading("Ledger: share of " + v.Measure + " per feature, baseline and candidate")
	if len(v.Ledger) == 0 {
		t.line("The ledger is empty: neither model declares a feature.")
		return
	}
	// Bars get what is left after the other columns at modest widths.
	changeW, flagsW, featW := 0, 0, 0
	for _, l := range v.Ledger {
		changeW = max(changeW, textWidth(l.Ratio), textWidth(l.Interval))
		featW = max(featW, textWidth(l.Feature))
		for _, f := range l.Flags {
			flagsW = max(flagsW, textWidth(f)+1)
		}
	}
	avail := t.width - 13 - 7 - (min(featW, 20) + max(changeW, 6) + min(max(flagsW, 5), 18))
	bar := min(max(avail, 0), barCells)
	legend := "Two lines per feature: baseline first, candidate second; change is candidate share / baseline share"
	if v.Confidence != "" {
		legend += " with its " + v.Confidence + " interval"
	}
	if bar > 0 && v.BarScale > 0 {
		legend += fmt.Sprintf("; bars ('%c' baseline, '%c' candidate) fill at %s", t.g.baseBar, t.g.candBar, v.BarScaleText)
	}
	t.line(legend + ".")
	cols := []column{
		{head: "feature", wrap: true, min: 8},
		{head: "share"},
		{head: "change", right: true, wrap: true, min: 7},
		{head: "flags", wrap: true, min: 13},
	}
	rows := make([][]string, 0, len(v.Ledger))
	for _, l := range v.Ledger {
		share := func(s string, val float64, fill rune) string {
			out := fmt.Sprintf("%6s", s)
			if b := shareBar(val, v.BarScale, bar, fill, t.g.tinyBar); b != "" {
				out += " " + b
			}
			return out
		}
		flags := strings.Join(l.Flags, ", ")
		if l.Hint != "" {
			if flags != "" {
				flags += "\n"
			}
			flags += "hint: " + l.Hint
		}
		rows = append(rows, []string{
			l.Feature,
			share(l.BaseShare, l.BaseValue, t.g.baseBar) + "\n" + share(l.CandShare, l.CandValue, t.g.candBar),
			l.Ratio + "\n" + l.Interval,
			flags,
		})
	}
	t.table(cols, rows)
}

func (t *textWriter) removals(v *compareView) {
	t.heading("Removal candidates")
	if len(v.Removals) == 0 {
		t.line("None: every feature adds something measurable, or none was priced.")
	} else {
		unit := v.CostUnit
		if unit == "" {
			unit = "catalog units"
		}
		metric := v.Metric
		if metric == "" {
			metric = "metric units"
		}
		t.line("Ranked by saving per unit of risk. Costs and savings in " + unit +
			"; risk is the upper bound of the quality lost without retraining, in " + metric + ".")
		cols := []column{
			{head: "feature", wrap: true, min: 8},
			{head: "cost per\n1k rows", right: true},
			{head: "saving per\n1k rows", right: true},
			{head: "saving\nper day", right: true},
			{head: "saving per\n30 days", right: true},
			{head: "risk at\nmost", right: true},
		}
		rows := make([][]string, 0, len(v.Removals))
		for _, m := range v.Removals {
			name := m.Feature
			if m.Group != "" {
				name += "\n(group " + m.Group + ")"
			}
			rows = append(rows, []string{name, m.Cost, m.Saving, m.PerDay, m.Per30, m.Risk})
		}
		t.table(cols, rows)
		for _, m := range v.Groups {
			t.para("  ", 2, fmt.Sprintf("%s is computed in group %s: its saving needs %s dropped too (not removal candidates).",
				m.Feature, m.Group, strings.Join(m.Blockers, ", ")))
		}
	}
	if len(v.Unpriced) > 0 {
		t.blank()
		t.para("Not in the cost catalog (no saving computed): ", 2, strings.Join(v.Unpriced, ", ")+".")
	}
}

func (t *textWriter) health(v *compareView) {
	t.heading("Traffic health")
	if len(v.Health) == 0 && v.HealthOmitted == 0 {
		t.line("No traffic sample was measured.")
		return
	}
	if v.HealthOmitted > 0 {
		t.line(fmt.Sprintf("Features with something notable; %d others look steady (all are in the JSON report).", v.HealthOmitted))
	}
	if len(v.Health) == 0 {
		return
	}
	cols := []column{
		{head: "feature", wrap: true, min: 8},
		{head: "missing\nbaseline " + t.g.arrow + " candidate", wrap: true, min: 6},
		{head: "top value\n(share)", right: true},
		{head: "PSI", right: true},
		{head: "KS", right: true},
		{head: "min .. max", wrap: true, min: 6},
	}
	rows := make([][]string, 0, len(v.Health))
	for _, h := range v.Health {
		rows = append(rows, []string{h.Feature, h.Missing, h.TopValue, h.PSI, h.KS, h.Range})
	}
	t.table(cols, rows)
}

func (t *textWriter) cautions(v *compareView) {
	if len(v.Cautions) == 0 {
		return
	}
	t.heading("Cautions")
	for _, s := range v.Cautions {
		t.para("- ", 2, s)
	}
}

func (t *textWriter) run(v *compareView) {
	t.heading("How this run was made")
	lw := 0
	for _, l := range v.Run {
		lw = max(lw, textWidth(l.Label))
	}
	lw = min(lw, 20)
	for _, l := range v.Run {
		label := l.Label
		if pad := lw - textWidth(label); pad > 0 {
			label += strings.Repeat(" ", pad)
		}
		t.para("  "+label+"  ", lw+4, l.Text)
	}
	if len(v.Notes) > 0 {
		t.blank()
		t.line("Notes:")
		for _, n := range v.Notes {
			t.para("  - ", 4, n)
		}
	}
}
