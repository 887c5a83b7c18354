package cli

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"time"

	"github.com/spf13/pflag"

	"splitledger/audit"
	"splitledger/importance"
	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/reports"
	"splitledger/storage/history"
)

// compareOptions are the compare command's inputs after flag parsing.
type compareOptions struct {
	baseline, candidate string
	baselineTraffic     string
	tf                  trafficFlags
	mf                  modelFlags
	ms                  measureFlags
	costs               string
	rowsPerDay          float64
	policyPath          string
	measure             string
	failOn              string
	format              string
	out                 string
	ascii               bool
	quiet               bool
	historyDir          string
	// label, when set, turns an input path into the name reports show
	// (the demo shows demo/<file> instead of its temporary folder).
	label func(string) string
}

func (o *compareOptions) show(path string) string {
	if o.label != nil {
		return o.label(path)
	}
	return path
}

func (o *compareOptions) add(fs *pflag.FlagSet, withModels bool) {
	if withModels {
		fs.StringVar(&o.baseline, "baseline", "", "the model now serving (file)")
		fs.StringVar(&o.candidate, "candidate", "", "the model proposed to replace it (file; may be the same file)")
		o.tf.add(fs, "traffic", "candidate traffic sample (Parquet file, directory or glob); both models are scored on it")
		fs.StringVar(&o.baselineTraffic, "baseline-traffic", "", "baseline week's traffic sample: the baseline is also measured on it and traffic flags compare the two samples")
		fs.StringVar(&o.costs, "costs", "", "cost catalog CSV: feature,cost_per_1k_rows,unit[,group]")
		fs.Float64Var(&o.rowsPerDay, "rows-per-day", 0, "rows scored per day online, to turn savings into per-day figures")
		fs.StringVar(&o.policyPath, "policy", "", "policy JSON file overriding the default thresholds (see --print-policy)")
		o.mf.add(fs)
	}
	o.ms.add(fs)
	fs.StringVar(&o.measure, "measure", "", "primary measure for collapse/surge (default from the policy: permutation_drop)")
	fs.StringVar(&o.failOn, "fail-on", "fail", "verdict that exits 1: fail or warn")
	fs.StringVar(&o.format, "format", "text", "report format: text, markdown, json, csv or html")
	fs.StringVar(&o.out, "out", "", "write the report here (atomically; default stdout)")
	fs.BoolVar(&o.ascii, "ascii", false, "ASCII-only text report")
	fs.BoolVar(&o.quiet, "quiet", false, "no progress lines on stderr")
	fs.StringVar(&o.historyDir, "history", os.Getenv("SPLITLEDGER_HISTORY"), "append the run to the history dataset in this folder (default $SPLITLEDGER_HISTORY)")
}

func compareCommand() command {
	return command{
		name:    "compare",
		summary: "the whole job: measure baseline and candidate on traffic, flag what changed, price what could go, decide the gate",
		usage:   "compare --baseline A --candidate B --traffic T [--baseline-traffic T0] [--label COL --group COL] [--costs C] [--format F]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var o compareOptions
			o.add(fs, true)
			printPolicy := fs.Bool("print-policy", false, "print the default policy as JSON and exit")
			return func(e *env, args []string) error {
				if *printPolicy {
					return audit.WritePolicy(e.stdout, audit.DefaultPolicy())
				}
				if len(args) > 0 {
					return usagef("unexpected arguments %q", args)
				}
				if o.baseline == "" || o.candidate == "" || o.tf.path == "" {
					return usagef("--baseline, --candidate and --traffic are required")
				}
				return runCompare(e, &o)
			}
		},
	}
}

// progress prints a line on stderr when it is a terminal.
func progress(e *env, quiet bool, format string, a ...any) {
	if e.stderrTTY && !quiet {
		fmt.Fprintf(e.stderr, "splitledger: "+format+"\n", a...)
	}
}

// runCompare wires storage -> importance -> audit -> reports (-> history).
func runCompare(e *env, o *compareOptions) error {
	started := time.Now().UTC()
	if err := oneOf("format", o.format, "text", "markdown", "json", "csv", "html"); err != nil {
		return err
	}
	if err := oneOf("fail-on", o.failOn, "fail", "warn"); err != nil {
		return err
	}
	policy := audit.DefaultPolicy()
	if o.policyPath != "" {
		p, err := audit.ReadPolicy(o.policyPath)
		if err != nil {
			return err
		}
		policy = p
	}
	if o.measure != "" {
		policy.Measure = o.measure
		if err := policy.Validate(); err != nil {
			return usageError{"--measure: " + err.Error()}
		}
	}
	cfg, err := o.ms.config()
	if err != nil {
		return err
	}
	var catalog *audit.Catalog
	if o.costs != "" {
		if catalog, err = audit.ReadCatalog(o.costs); err != nil {
			return err
		}
	}
	progress(e, o.quiet, "reading models")
	base, err := o.mf.load(o.baseline)
	if err != nil {
		return err
	}
	cand, err := o.mf.load(o.candidate)
	if err != nil {
		return err
	}
	models := []audit.ModelInfo{modelInfo("baseline", o.show(o.baseline), base), modelInfo("candidate", o.show(o.candidate), cand)}
	for i, p := range []string{o.baseline, o.candidate} {
		sum, size, err := fileDigest(p)
		if err != nil {
			return err
		}
		models[i].SHA256, models[i].Bytes = sum, size
	}
	union := unionNames(base.FeatureNames, cand.FeatureNames)
	progress(e, o.quiet, "reading traffic %s", o.tf.path)
	traffic, err := readUnion(o, o.tf.path, union, cand.FeatureNames, cfg.Seed)
	if err != nil {
		return err
	}
	infos := []audit.TrafficInfo{trafficInfo("candidate traffic", o.show(o.tf.path), traffic)}
	paths := []string{o.tf.path}
	var baseTraffic *frame.Frame
	if o.baselineTraffic != "" {
		progress(e, o.quiet, "reading baseline traffic %s", o.baselineTraffic)
		if baseTraffic, err = readUnion(o, o.baselineTraffic, union, base.FeatureNames, cfg.Seed); err != nil {
			return err
		}
		infos = append(infos, trafficInfo("baseline traffic", o.show(o.baselineTraffic), baseTraffic))
		paths = append(paths, o.baselineTraffic)
	}
	for i := range infos {
		sum, size, err := fileDigest(paths[i])
		if err != nil {
			return err
		}
		infos[i].SHA256, infos[i].Bytes = sum, size
	}
	measure := func(m *forest.Ensemble, name string, f *frame.Frame, src string) (*importance.Table, error) {
		progress(e, o.quiet, "measuring %s on %s", name, src)
		t, err := importance.MeasureModel(m, name, f, cfg)
		if err != nil {
			return nil, fmt.Errorf("%s on %s: %w", name, src, err)
		}
		return t, nil
	}
	bt, err := measure(base, o.show(o.baseline), traffic, o.show(o.tf.path))
	if err != nil {
		return err
	}
	ct, err := measure(cand, o.show(o.candidate), traffic, o.show(o.tf.path))
	if err != nil {
		return err
	}
	var bown *importance.Table
	if baseTraffic != nil {
		if bown, err = measure(base, o.show(o.baseline), baseTraffic, o.show(o.baselineTraffic)); err != nil {
			return err
		}
	}
	infos[0].Units = ct.Units
	if bown != nil {
		infos[1].Units = bown.Units
	}
	run := audit.RunInfo{
		Version: Version, Started: started, Seed: cfg.Seed, Replicates: ct.Replicates, Confidence: ct.Confidence,
		Repeats: ct.Repeats, Metric: reports.MetricName(ct), Workers: cfg.Workers,
	}
	if run.Workers <= 0 {
		run.Workers = runtime.GOMAXPROCS(0)
	}
	rep, err := audit.Compare(audit.Inputs{
		Baseline: base, Candidate: cand, Models: models,
		Traffic: traffic, BaselineTraffic: baseTraffic, TrafficInfo: infos,
		BaselineTable: bt, CandidateTable: ct, BaselineOwnTable: bown,
		Catalog: catalog, RowsPerDay: o.rowsPerDay, Run: run,
	}, policy)
	if err != nil {
		return err
	}
	if o.historyDir != "" {
		if err := recordHistory(e, o, rep); err != nil {
			return err
		}
	}
	rep.Run.Duration = time.Since(started).Round(time.Millisecond)
	err = writeOutput(e, o.out, func(w io.Writer) error {
		ro := reports.CompareOptions{ASCII: o.ascii}
		switch o.format {
		case "markdown":
			return reports.CompareMarkdown(w, rep, ro)
		case "json":
			return reports.CompareJSON(w, rep)
		case "csv":
			return reports.CompareCSV(w, rep)
		case "html":
			return reports.CompareHTML(w, rep)
		}
		return reports.CompareText(w, rep, ro)
	})
	if err != nil {
		return err
	}
	if rep.Verdict == audit.VerdictFail || (rep.Verdict == audit.VerdictWarn && (o.failOn == "warn" || policy.FailOnWarn)) {
		return gateError{rep.Verdict}
	}
	return nil
}

// readUnion reads a traffic sample with the union of both models' feature
// columns. Features of the other version may be absent (they read as
// missing); the measured model's own features must be present unless
// --allow-absent.
func readUnion(o *compareOptions, path string, union, required []string, seed uint64) (*frame.Frame, error) {
	f, err := o.tf.load(path, union, seed, true)
	if err != nil {
		return nil, err
	}
	if o.tf.allowAbsent {
		return f, nil
	}
	for i, n := range f.Names {
		if f.Absent[i] && slices.Contains(required, n) {
			// read again strictly for the reader's full error message
			if _, err := o.tf.load(path, required, seed, false); err != nil {
				return nil, err
			}
			return nil, fmt.Errorf("%s: model feature %q is absent from the traffic (use --allow-absent to treat it as missing)", path, n)
		}
	}
	return f, nil
}

func unionNames(a, b []string) []string {
	out := slices.Clone(a)
	for _, n := range b {
		if !slices.Contains(out, n) {
			out = append(out, n)
		}
	}
	return out
}

func modelInfo(role, path string, m *forest.Ensemble) audit.ModelInfo {
	s := forest.Summarize(m)
	return audit.ModelInfo{Role: role, Path: path, Format: m.Format, Objective: m.Objective, Trees: s.Trees, Features: s.FeaturesDeclared, Used: s.FeaturesUsed}
}

func trafficInfo(role, path string, f *frame.Frame) audit.TrafficInfo {
	return audit.TrafficInfo{Role: role, Path: path, Rows: f.Rows, TotalRows: f.TotalRows, SampleFraction: f.SampleFraction}
}

// recordHistory appends the run to the dataset and fills each flag's streak.
func recordHistory(e *env, o *compareOptions, rep *audit.Report) error {
	past, warnings, err := history.Load(o.historyDir)
	if err != nil {
		return fmt.Errorf("--history %s: %w", o.historyDir, err)
	}
	for _, w := range warnings {
		fmt.Fprintf(e.stderr, "splitledger compare: warning: %s\n", w)
	}
	run := historyRun(rep)
	all := append(slices.Clone(past), run)
	for i := range rep.Flags {
		rep.Flags[i].Streak = history.Streak(all, rep.Flags[i].Feature, rep.Flags[i].Kind)
	}
	if _, err := history.Append(o.historyDir, run); err != nil {
		return fmt.Errorf("--history %s: %w", o.historyDir, err)
	}
	return nil
}

// historyRun maps the report onto the history data model: per feature and
// version, the structure measures and every traffic measure.
func historyRun(rep *audit.Report) history.Run {
	run := history.Run{
		ID: history.NewRunID(rep.Run.Started), Time: rep.Run.Started,
		Metric: rep.Run.Metric, Seed: rep.Run.Seed, Replicates: rep.Run.Replicates, Verdict: rep.Verdict,
	}
	for _, m := range rep.Models {
		if m.Role == "baseline" {
			run.BaselineName, run.BaselineSHA256 = filepath.Base(m.Path), m.SHA256
		} else {
			run.CandidateName, run.CandidateSHA256 = filepath.Base(m.Path), m.SHA256
		}
	}
	for _, t := range rep.Traffic {
		if t.Role == "baseline traffic" {
			run.BaselineTrafficName, run.BaselineTrafficSHA256 = filepath.Base(t.Path), t.SHA256
		} else {
			run.TrafficName, run.TrafficSHA256 = filepath.Base(t.Path), t.SHA256
		}
	}
	flags := map[string][]string{}
	for _, f := range rep.Flags {
		if !slices.Contains(flags[f.Feature], f.Kind) {
			flags[f.Feature] = append(flags[f.Feature], f.Kind)
		}
	}
	add := func(t *importance.Table, version string) {
		if t == nil {
			return
		}
		for _, f := range t.Features {
			fl := flags[f.Feature]
			run.Rows = append(run.Rows,
				history.FeatureRow{Feature: f.Feature, Version: version, Measure: "split_count", Value: float64(f.SplitCount), Lo: math.NaN(), Hi: math.NaN(), Share: f.SplitShare, Flags: fl},
				history.FeatureRow{Feature: f.Feature, Version: version, Measure: "total_gain", Value: f.TotalGain, Lo: math.NaN(), Hi: math.NaN(), Share: f.GainShare, Flags: fl},
				history.FeatureRow{Feature: f.Feature, Version: version, Measure: "total_cover", Value: f.TotalCover, Lo: math.NaN(), Hi: math.NaN(), Share: f.CoverShare, Flags: fl},
			)
			for m, est := range f.Traffic {
				run.Rows = append(run.Rows, history.FeatureRow{Feature: f.Feature, Version: version,
					Measure: importance.TrafficMeasure(m).String(), Value: est.Value, Lo: est.Lo, Hi: est.Hi, Share: est.Share, Flags: fl})
			}
		}
	}
	add(rep.CandidateTable, history.VersionCandidate)
	if rep.BaselineOwnTable != nil {
		add(rep.BaselineOwnTable, history.VersionBaseline)
	} else {
		add(rep.BaselineTable, history.VersionBaseline)
	}
	return run
}
