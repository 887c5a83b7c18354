package reports

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"encoding/xml"
	"errors"
	"flag"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"splitledger/audit"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// golden compares got with testdata/name, rewriting the file with -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("golden file %s: %v (run go test ./reports -update to create it)", path, err)
	}
	if !bytes.Equal(got, want) {
		gl, wl := strings.Split(string(got), "\n"), strings.Split(string(want), "\n")
		for i := 0; i < min(len(gl), len(wl)); i++ {
			if gl[i] != wl[i] {
				t.Fatalf("%s differs at line %d:\ngot  %q\nwant %q\n(run go test ./reports -update and review the diff)", path, i+1, gl[i], wl[i])
			}
		}
		t.Fatalf("%s differs in length: got %d lines, want %d", path, len(gl), len(wl))
	}
}

func fixedOptions(r *audit.Report, ascii bool) CompareOptions {
	return CompareOptions{ASCII: ascii, Now: r.Run.Started}
}

// Golden files are the renderers' own output, reviewed by eye in the diff
// (common practice for report renderers); the checks on widths, bytes and
// parsing below hold independently of them.
func TestCompareGolden(t *testing.T) {
	r := testReport()
	cases := []struct {
		name   string
		render func(w io.Writer) error
	}{
		{"compare_text.golden", func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, false)) }},
		{"compare_ascii.golden", func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, true)) }},
		{"compare_text_72.golden", func(w io.Writer) error {
			o := fixedOptions(r, true)
			o.Width = 72
			return CompareText(w, r, o)
		}},
		{"compare_markdown.golden", func(w io.Writer) error { return CompareMarkdown(w, r, fixedOptions(r, false)) }},
		{"compare_json.golden", func(w io.Writer) error { return CompareJSON(w, r) }},
		{"compare_csv.golden", func(w io.Writer) error { return CompareCSV(w, r) }},
		{"compare_html.golden", func(w io.Writer) error { return CompareHTML(w, r) }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := c.render(&b); err != nil {
				t.Fatal(err)
			}
			golden(t, c.name, b.Bytes())
		})
	}
}

// checkText asserts the e-mail rules: no line wider than width runes, and
// in ASCII mode no byte above 127.
func checkText(t *testing.T, out string, width int, ascii bool) {
	t.Helper()
	for i, l := range strings.Split(out, "\n") {
		if n := utf8.RuneCountInString(l); n > width {
			t.Errorf("line %d has %d runes > %d: %q", i+1, n, width, l)
		}
		if !utf8.ValidString(l) {
			t.Errorf("line %d is not valid UTF-8: %q", i+1, l)
		}
	}
	if ascii {
		for i := 0; i < len(out); i++ {
			if out[i] > 127 {
				t.Fatalf("byte %d is 0x%x (> 127) near %q", i, out[i], out[max(0, i-20):min(len(out), i+20)])
			}
		}
	}
}

func TestCompareTextWidthAndBytes(t *testing.T) {
	r := testReport()
	for _, width := range []int{0, 60, 72, 80, 100, 132} {
		for _, ascii := range []bool{false, true} {
			name := map[bool]string{false: "unicode", true: "ascii"}[ascii]
			t.Run(name+"/"+strconv.Itoa(width), func(t *testing.T) {
				var b bytes.Buffer
				o := CompareOptions{ASCII: ascii, Width: width, Now: r.Run.Started}
				if err := CompareText(&b, r, o); err != nil {
					t.Fatal(err)
				}
				checkText(t, b.String(), o.width(), ascii)
				// Every feature name appears whole in the first column of
				// the tables once its wrapped pieces are rejoined.
				var first strings.Builder
				for _, l := range strings.Split(b.String(), "\n") {
					for _, border := range []string{"|", "│"} {
						if f := strings.Split(l, border); strings.HasPrefix(l, border) && len(f) > 2 {
							first.WriteString(strings.TrimSpace(f[1]))
						}
					}
				}
				for _, l := range r.Ledger {
					if !strings.Contains(first.String(), l.Feature) {
						t.Errorf("feature %q missing from the report", l.Feature)
					}
				}
			})
		}
	}
}

func TestCompareTextContent(t *testing.T) {
	r := testReport()
	var b bytes.Buffer
	if err := CompareText(&b, r, fixedOptions(r, true)); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	first, _, _ := strings.Cut(out, "\n")
	// The subject line of the brief's example, with this report's names.
	// The brief's subject layout (two spaces between parts), here with
	// single spaces because the double-spaced line would pass 100 columns.
	want := "splitledger: FAIL ranker-2026-11-16.json -> ranker-2026-11-30.json 2026-11-30 4 fail, 5 warn, 4 info"
	if first != want {
		t.Errorf("subject line\ngot  %q\nwant %q", first, want)
	}
	order := []string{"Needs attention", "Ledger: share of permutation_drop", "Removal candidates", "Traffic health", "Cautions", "How this run was made"}
	at := 0
	for _, s := range order {
		i := strings.Index(out[at:], s)
		if i < 0 {
			t.Fatalf("section %q missing or out of order", s)
		}
		at += i
	}
	for _, s := range []string{
		"FAIL  host_response_hours",
		"collapsed (share 31.2% -> 2.1%, x0.067 [0.051, 0.089])",
		"pipeline-suspect", "model-shift", "prune",
		"photo_aesthetic_rank", // blocker of the vision_pack group
		"neighbourhood_walk_score, guest_count_requested",
		"seed 20261130", "200 replicates", "95% intervals",
		"sha256 3f5a9c0e7b2d",
		"ndcg@10 on the candidate traffic: baseline 0.4123 [0.4071, 0.418]",
		"34000", "1.02e+06",
	} {
		if !strings.Contains(out, s) {
			t.Errorf("report lacks %q", s)
		}
	}
	for _, c := range audit.Cautions {
		// Cautions are printed verbatim (wrapped): compare without spaces.
		squash := func(s string) string { return strings.Join(strings.Fields(s), " ") }
		if !strings.Contains(squash(out), squash(c)) {
			t.Errorf("caution missing: %q", c)
		}
	}
	// Fail flags come before warn flags.
	if strings.Index(out, "WARN  ") < strings.LastIndex(out, "FAIL  ") {
		t.Error("a warn flag is listed before a fail flag")
	}
}

func TestCompareMarkdown(t *testing.T) {
	r := testReport()
	r.Ledger[0].Feature = "host|response`hours" // a pipe and a backtick must not break the table
	var b bytes.Buffer
	if err := CompareMarkdown(&b, r, fixedOptions(r, false)); err != nil {
		t.Fatal(err)
	}
	// GitHub tables: every row of a table has as many unescaped pipes as
	// its header (GitHub Flavored Markdown spec, tables extension).
	lines := strings.Split(b.String(), "\n")
	want := -1
	for _, l := range lines {
		if !strings.HasPrefix(l, "|") {
			want = -1
			continue
		}
		n := strings.Count(l, "|") - strings.Count(l, `\|`)
		if want < 0 {
			want = n
			continue
		}
		if n != want {
			t.Errorf("table row has %d cell borders, header %d: %q", n, want, l)
		}
	}
	if !strings.Contains(b.String(), "| `` host\\|response`hours `` |") {
		t.Error("feature with a backtick and a pipe not written as a double-fenced code span")
	}
}

func TestMarkdownEscaping(t *testing.T) {
	cases := []struct{ name, in, want string }{
		{"plain", "went-constant 31.2%", "went-constant 31.2%"},
		{"emphasis", "a_b *c*", `a\_b \*c\*`},
		{"brackets", "[0.05, 0.09]", `\[0.05, 0.09\]`},
		{"html", "<script>&", `\<script\>\&`},
		{"pipe", "a|b", `a\|b`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := mdText(c.in); got != c.want {
				t.Errorf("mdText(%q) = %q, want %q", c.in, got, c.want)
			}
		})
	}
	code := []struct{ name, in, want string }{
		{"plain", "photo_count", "`photo_count`"},
		{"backtick", "a`b", "`` a`b ``"},
		{"empty", "", ""},
	}
	for _, c := range code {
		t.Run("code/"+c.name, func(t *testing.T) {
			if got := mdCode(c.in, false); got != c.want {
				t.Errorf("mdCode(%q) = %q, want %q", c.in, got, c.want)
			}
		})
	}
}

func TestCompareJSON(t *testing.T) {
	r := testReport()
	var b bytes.Buffer
	if err := CompareJSON(&b, r); err != nil {
		t.Fatal(err)
	}
	var doc map[string]any
	if err := json.Unmarshal(b.Bytes(), &doc); err != nil {
		t.Fatalf("JSON does not parse: %v", err)
	}
	if doc["schema"] != "splitledger/compare/v1" {
		t.Errorf("schema = %v", doc["schema"])
	}
	// The top-level keys in their documented order (SCHEMA.md).
	keys := []string{"schema", "verdict", "flag_counts", "run", "inputs", "policy", "quality", "ledger", "flags",
		"removals", "unpriced", "cost_unit", "health", "notes", "cautions", "tables"}
	dec := json.NewDecoder(bytes.NewReader(b.Bytes()))
	if _, err := dec.Token(); err != nil {
		t.Fatal(err)
	}
	for i := 0; dec.More(); i++ {
		k, err := dec.Token()
		if err != nil {
			t.Fatal(err)
		}
		if i >= len(keys) || k != keys[i] {
			t.Fatalf("key %d is %v, want %v", i, k, keys[min(i, len(keys)-1)])
		}
		var skip json.RawMessage
		if err := dec.Decode(&skip); err != nil {
			t.Fatal(err)
		}
	}
	var got struct {
		FlagCounts struct{ Fail, Warn, Info int } `json:"flag_counts"`
		Ledger     []struct {
			Feature  string
			Baseline struct {
				Share   *float64 `json:"share"`
				ShareLo *float64 `json:"share_lo"`
			}
			Ratio   *float64 `json:"ratio"`
			RatioLo *float64 `json:"ratio_lo"`
		}
		Removals []struct {
			Blockers        []string `json:"blockers"`
			SavingPer30Days *float64 `json:"saving_per_30_days"`
		}
	}
	if err := json.Unmarshal(b.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	if got.FlagCounts.Fail != 4 || got.FlagCounts.Warn != 5 || got.FlagCounts.Info != 4 {
		t.Errorf("flag counts %+v, want 4 fail, 5 warn, 4 info", got.FlagCounts)
	}
	// Values round-trip exactly (shortest representation); NaN is null.
	if p := got.Ledger[0].Ratio; p == nil || *p != 0.0673 {
		t.Errorf("ledger[0].ratio = %v, want 0.0673", p)
	}
	if got.Ledger[2].Ratio != nil || got.Ledger[2].Baseline.Share == nil || *got.Ledger[2].Baseline.Share != 0.046 {
		t.Errorf("dropped feature: ratio %v (want null), baseline share %v (want 0.046)", got.Ledger[2].Ratio, got.Ledger[2].Baseline.Share)
	}
	if got.Ledger[7].Baseline.ShareLo != nil || got.Ledger[7].RatioLo != nil {
		t.Error("NaN interval not written as null")
	}
	if len(got.Removals) != 2 || len(got.Removals[1].Blockers) != 1 || got.Removals[0].SavingPer30Days == nil || *got.Removals[0].SavingPer30Days != 1.02e6 {
		t.Errorf("removals %+v", got.Removals)
	}
}

func TestCompareJSONEmptyListsAndInf(t *testing.T) {
	r := &audit.Report{Verdict: audit.VerdictPass, Ledger: []audit.LedgerRow{{Feature: "review_score_mean", InBaseline: true, InCandidate: true,
		Baseline: est(1, nan, nan, 0.5, nan, nan), Candidate: est(1, nan, nan, 0.5, nan, nan), Ratio: math.Inf(1), RatioLo: math.Inf(-1), RatioHi: nan}}}
	var b bytes.Buffer
	if err := CompareJSON(&b, r); err != nil {
		t.Fatal(err)
	}
	s := b.String()
	for _, want := range []string{`"flags": []`, `"removals": []`, `"unpriced": []`, `"health": []`, `"cautions": []`, `"ratio": null`, `"ratio_lo": null`, `"started": null`} {
		if !strings.Contains(s, want) {
			t.Errorf("JSON lacks %s", want)
		}
	}
	if strings.Contains(s, `"tables": {}`) == false {
		t.Error("tables should be an empty object without importance tables")
	}
}

func TestCompareCSV(t *testing.T) {
	r := testReport()
	var b bytes.Buffer
	if err := CompareCSV(&b, r); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatalf("CSV does not parse: %v", err)
	}
	if len(recs) != len(r.Ledger)+1 {
		t.Fatalf("%d records, want header + %d", len(recs), len(r.Ledger))
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	cases := []struct {
		name, feature, column, want string
	}{
		{"ratio exact", "host_response_hours", "ratio", "0.0673"},
		{"flags joined", "host_response_hours", "flags", "collapsed;missing-spike"},
		{"hint", "distance_to_search_km", "hint", "model-shift"},
		{"absent version", "superhost_badge", "in_candidate", "false"},
		{"NaN is empty", "superhost_badge", "candidate_share", ""},
		{"NaN interval", "listing_age_days", "ratio_lo", ""},
		{"long name whole", "amenity_count_reported_by_guest_reviews_last_90d", "baseline_share", "0.008"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			for _, rec := range recs[1:] {
				if rec[0] == c.feature {
					if got := rec[col[c.column]]; got != c.want {
						t.Errorf("%s %s = %q, want %q", c.feature, c.column, got, c.want)
					}
					return
				}
			}
			t.Errorf("feature %s missing", c.feature)
		})
	}
}

// svgParts returns every <svg>...</svg> element of an HTML page.
func svgParts(t *testing.T, page string) []string {
	t.Helper()
	var out []string
	for {
		i := strings.Index(page, "<svg")
		if i < 0 {
			return out
		}
		j := strings.Index(page[i:], "</svg>")
		if j < 0 {
			t.Fatal("unclosed <svg>")
		}
		out = append(out, page[i:i+j+len("</svg>")])
		page = page[i+j:]
	}
}

func TestCompareHTML(t *testing.T) {
	r := testReport()
	r.Ledger[1].Feature = `photo_count<script>alert("x")</script>`
	var b bytes.Buffer
	if err := CompareHTML(&b, r); err != nil {
		t.Fatal(err)
	}
	page := b.String()
	// Self-contained: no script, no fetched resource (the only URL is the
	// SVG namespace name, which is never fetched).
	for _, bad := range []string{"<script", "src=", "@import", "url(", "<link"} {
		if strings.Contains(strings.ToLower(page), bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	if n, ns := strings.Count(page, "http"), strings.Count(page, `xmlns="http://www.w3.org/2000/svg"`); n != ns {
		t.Errorf("page has %d URLs, only %d are the SVG namespace", n, ns)
	}
	// One chart for the primary measure, and one per other measure with a
	// finite share: missing_break_drop, freeze_drop, path_share,
	// tests_per_row, gain_share, cover_share, split_share (mean |SHAP| is
	// NaN in the fixture, so it has none).
	parts := svgParts(t, page)
	if len(parts) != 8 {
		t.Errorf("%d <svg> charts, want 8", len(parts))
	}
	for i, p := range parts {
		dec := xml.NewDecoder(strings.NewReader(p))
		rects := 0
		for {
			tok, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("chart %d is not well-formed XML: %v", i, err)
			}
			if se, ok := tok.(xml.StartElement); ok && se.Name.Local == "rect" {
				rects++
			}
		}
		// two legend swatches and at most two bars per ledger feature
		if rects < 2+len(r.Ledger) || rects > 2+2*len(r.Ledger) {
			t.Errorf("chart %d has %d rects", i, rects)
		}
	}
	if !strings.Contains(page, "photo_count&lt;script&gt;") {
		t.Error("feature name not escaped")
	}
}

// TestCompareHTMLScreenshot renders the page in a headless browser when
// one is installed (optional external check; CI has none and skips).
func TestCompareHTMLScreenshot(t *testing.T) {
	const browser = "/usr/bin/chromium"
	if _, err := os.Stat(browser); err != nil {
		t.Skipf("no headless browser at %s: screenshot check skipped", browser)
	}
	dir := t.TempDir()
	page := filepath.Join(dir, "compare.html")
	var b bytes.Buffer
	if err := CompareHTML(&b, testReport()); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(page, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	shot := filepath.Join(dir, "compare.png")
	cmd := exec.Command(browser, "--headless", "--disable-gpu", "--no-sandbox", "--hide-scrollbars",
		"--window-size=1100,3000", "--screenshot="+shot, "file://"+page)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("browser: %v\n%s", err, out)
	}
	png, err := os.ReadFile(shot)
	if err != nil {
		t.Fatal(err)
	}
	// PNG signature (ISO/IEC 15948, section 5.2).
	if !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) || len(png) < 1000 {
		t.Errorf("screenshot is not a PNG (%d bytes)", len(png))
	}
}

func TestCompareEmptyReport(t *testing.T) {
	r := &audit.Report{}
	renders := []struct {
		name   string
		render func(w io.Writer) error
	}{
		{"text", func(w io.Writer) error { return CompareText(w, r, CompareOptions{ASCII: true, Now: time.Unix(0, 0)}) }},
		{"markdown", func(w io.Writer) error { return CompareMarkdown(w, r, CompareOptions{}) }},
		{"json", func(w io.Writer) error { return CompareJSON(w, r) }},
		{"csv", func(w io.Writer) error { return CompareCSV(w, r) }},
		{"html", func(w io.Writer) error { return CompareHTML(w, r) }},
	}
	for _, c := range renders {
		t.Run(c.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := c.render(&b); err != nil {
				t.Fatal(err)
			}
			if b.Len() == 0 {
				t.Error("empty output")
			}
		})
	}
	var b bytes.Buffer
	if err := CompareText(&b, r, CompareOptions{ASCII: true, Now: time.Unix(0, 0)}); err != nil {
		t.Fatal(err)
	}
	if first, _, _ := strings.Cut(b.String(), "\n"); first != "splitledger: -  - -> -  1970-01-01  0 fail, 0 warn, 0 info" {
		t.Errorf("subject of an empty report: %q", first)
	}
}

type failWriter struct{ n int }

var errSink = errors.New("sink full")

func (f *failWriter) Write(p []byte) (int, error) {
	if f.n <= 0 {
		return 0, errSink
	}
	f.n--
	return len(p), nil
}

func TestCompareWriteErrors(t *testing.T) {
	r := testReport()
	counter := &failWriter{n: math.MaxInt}
	if err := CompareText(counter, r, fixedOptions(r, false)); err != nil {
		t.Fatal(err)
	}
	writes := math.MaxInt - counter.n
	renders := []struct {
		name   string
		n      int // writes that succeed before the sink fails
		render func(w io.Writer) error
	}{
		{"text/first", 0, func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, false)) }},
		{"text/middle", writes / 2, func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, false)) }},
		{"text/last", writes - 1, func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, false)) }},
		{"markdown", 3, func(w io.Writer) error { return CompareMarkdown(w, r, fixedOptions(r, false)) }},
		{"json", 0, func(w io.Writer) error { return CompareJSON(w, r) }},
		{"csv", 0, func(w io.Writer) error { return CompareCSV(w, r) }},
		{"html", 3, func(w io.Writer) error { return CompareHTML(w, r) }},
	}
	for _, c := range renders {
		t.Run(c.name, func(t *testing.T) {
			if err := c.render(&failWriter{n: c.n}); !errors.Is(err, errSink) {
				t.Errorf("error %v, want the writer's error", err)
			}
		})
	}
}

func TestClean(t *testing.T) {
	cases := []struct {
		name, in  string
		ascii     bool
		want      string
		wantASCII bool
	}{
		{"plain", "host_response_hours", true, "host_response_hours", true},
		{"controls", "a\tb\nc", false, "a b c", true},
		{"arrow", "a → b ≥ 0.10", true, "a -> b >= 0.10", true},
		{"unknown", "séjour", true, "s?jour", true},
		{"unicode kept", "séjour → b", false, "séjour → b", false},
		{"bidi override", "a\u202eb", false, "a?b", true},
		{"invalid utf-8", "a\xffb", true, "a?b", true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := newGlyphs(c.ascii).clean(c.in)
			if got != c.want {
				t.Errorf("clean(%q) = %q, want %q", c.in, got, c.want)
			}
		})
	}
}

func TestShareBar(t *testing.T) {
	// Bar lengths are round(share / scale * width) cells (common practice).
	cases := []struct {
		name     string
		v, scale float64
		width    int
		want     string
	}{
		{"full", 0.31, 0.31, 10, "##########"},
		{"third", 0.1, 0.3, 9, "###"},
		{"tiny", 0.0001, 0.3, 10, "."},
		{"zero", 0, 0.3, 10, ""},
		{"NaN", nan, 0.3, 10, ""},
		{"clip", 0.5, 0.3, 10, "##########"},
		{"no scale", 0.1, 0, 10, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := shareBar(c.v, c.scale, c.width, '#', '.'); got != c.want {
				t.Errorf("shareBar(%v, %v, %d) = %q, want %q", c.v, c.scale, c.width, got, c.want)
			}
		})
	}
}

func TestNiceAxis(t *testing.T) {
	// Axis ends on 1, 2, 2.5 or 5 times a power of ten (common practice).
	cases := []struct {
		name           string
		top, end, step float64
	}{
		{"31%", 0.31, 0.4, 0.1},
		{"8%", 0.08, 0.08, 0.02},
		{"exact", 0.2, 0.2, 0.05},
		{"none", 0, 0.1, 0.025},
		{"NaN", nan, 0.1, 0.025},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			end, step := niceAxis(c.top)
			if !(math.Abs(end-c.end) <= 1e-12) || !(math.Abs(step-c.step) <= 1e-12) {
				t.Errorf("niceAxis(%v) = %v, %v; want %v, %v", c.top, end, step, c.end, c.step)
			}
		})
	}
}

func TestWrapWords(t *testing.T) {
	cases := []struct {
		name string
		in   string
		w    int
		want []string
	}{
		{"fits", "a b c", 10, []string{"a b c"}},
		{"wrap", "alpha beta gamma", 10, []string{"alpha beta", "gamma"}},
		{"long name at underscore", "amenity_count_reported_by_guest", 16, []string{"amenity_count_", "reported_by_", "guest"}},
		{"hard break", "abcdefghij", 4, []string{"abcd", "efgh", "ij"}},
		{"empty", "", 5, []string{""}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := wrapWords(c.in, c.w)
			if strings.Join(got, "|") != strings.Join(c.want, "|") {
				t.Errorf("wrapWords(%q, %d) = %q, want %q", c.in, c.w, got, c.want)
			}
		})
	}
}

// FuzzCompareText feeds odd names and messages through the text report and
// checks the e-mail rules hold for any input.
func FuzzCompareText(f *testing.F) {
	f.Add("host_response_hours", "Its share fell.", 100, true)
	f.Add(strings.Repeat("very_long_feature_name_", 6), "x", 60, true)
	f.Add("naïve_prix_€", "a\tb\r\nc → d", 72, false)
	f.Add("", "", 0, false)
	f.Add("a b\u202e", strings.Repeat("word ", 60), 61, true)
	f.Fuzz(func(t *testing.T, name, msg string, width int, ascii bool) {
		if width < 0 || width > 400 {
			return
		}
		r := testReport()
		r.Ledger[0].Feature = name
		r.Flags[0].Feature = name
		r.Flags[0].Message = msg
		r.Notes = append(r.Notes, msg)
		r.Removals[1].Blockers = []string{name}
		r.Health[0].Feature = name
		var b bytes.Buffer
		o := CompareOptions{ASCII: ascii, Width: width, Now: r.Run.Started}
		if err := CompareText(&b, r, o); err != nil {
			t.Fatal(err)
		}
		checkText(t, b.String(), o.width(), ascii)
	})
}

func BenchmarkCompare(b *testing.B) {
	r := testReport()
	// A wide model: the fixture's features repeated to 240 ledger rows.
	base := r.Ledger
	for i := 1; len(r.Ledger) < 240; i++ {
		for _, l := range base {
			l.Feature = l.Feature + "_v" + strconv.Itoa(i)
			r.Ledger = append(r.Ledger, l)
		}
	}
	renders := []struct {
		name   string
		render func(w io.Writer) error
	}{
		{"text", func(w io.Writer) error { return CompareText(w, r, fixedOptions(r, false)) }},
		{"markdown", func(w io.Writer) error { return CompareMarkdown(w, r, fixedOptions(r, false)) }},
		{"json", func(w io.Writer) error { return CompareJSON(w, r) }},
		{"csv", func(w io.Writer) error { return CompareCSV(w, r) }},
		{"html", func(w io.Writer) error { return CompareHTML(w, r) }},
	}
	for _, c := range renders {
		b.Run(c.name, func(b *testing.B) {
			for b.Loop() {
				if err := c.render(io.Discard); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// TestSchemaDocumentsEveryKey keeps SCHEMA.md in step with CompareJSON:
// every object key the report writes must appear there in backticks.
func TestSchemaDocumentsEveryKey(t *testing.T) {
	doc, err := os.ReadFile("SCHEMA.md")
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := CompareJSON(&b, testReport()); err != nil {
		t.Fatal(err)
	}
	var v any
	if err := json.Unmarshal(b.Bytes(), &v); err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	var walk func(any)
	walk = func(v any) {
		switch x := v.(type) {
		case map[string]any:
			for k, e := range x {
				seen[k] = true
				walk(e)
			}
		case []any:
			for _, e := range x {
				walk(e)
			}
		}
	}
	walk(v)
	for k := range seen {
		if !bytes.Contains(doc, []byte("`"+k+"`")) {
			t.Errorf("SCHEMA.md does not document key %q", k)
		}
	}
}
