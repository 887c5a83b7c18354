package cli

import (
	"slices"
	"strings"

	"github.com/spf13/pflag"

	"splitledger/importance"
	"splitledger/importance/forest"
	"splitledger/importance/frame"
	"splitledger/importance/metrics"
	"splitledger/storage/traffic"
	"splitledger/storage/treefile"
)

// modelFlags are the flags that say how to read a model file.
type modelFlags struct {
	format    string
	names     string
	objective string
	baseScore float64
	numClass  int
	fs        *pflag.FlagSet
}

func (m *modelFlags) add(fs *pflag.FlagSet) {
	m.fs = fs
	fs.StringVar(&m.format, "model-format", "", "model file format: xgboost-json, xgboost-dump-json, xgboost-dump-text, lightgbm-text (default: sniffed)")
	fs.StringVar(&m.names, "names", "", "feature-names file (one per line) for dumps that use f0, f1, ...")
	fs.StringVar(&m.objective, "objective", "", "objective of an XGBoost dump (dumps do not record it; default reg:squarederror)")
	fs.Float64Var(&m.baseScore, "base-score", 0.5, "base_score of an XGBoost dump, on the prediction scale")
	fs.IntVar(&m.numClass, "num-class", 0, "number of classes of a multi-class XGBoost dump")
}

func (m *modelFlags) load(path string) (*forest.Ensemble, error) {
	opts := treefile.Options{Format: treefile.Format(m.format), Objective: m.objective, NumClass: m.numClass}
	if m.fs != nil && m.fs.Changed("base-score") {
		b := m.baseScore
		opts.BaseScore = &b
	}
	if m.names != "" {
		names, err := treefile.ReadNames(m.names)
		if err != nil {
			return nil, err
		}
		opts.FeatureNames = names
	}
	return treefile.ReadFile(path, opts)
}

// trafficFlags say how to read a traffic sample.
type trafficFlags struct {
	path        string
	label       string
	group       string
	weight      string
	rename      string
	allowAbsent bool
	head        int
	maxRows     int
}

func (t *trafficFlags) add(fs *pflag.FlagSet, name, help string) {
	fs.StringVar(&t.path, name, "", help)
	fs.StringVar(&t.label, "label", "", "label column (relevance for ranking, 0/1 for binary)")
	fs.StringVar(&t.group, "group", "", "query id column (ranking): rows of one query form a group")
	fs.StringVar(&t.weight, "weight", "", "row weight column")
	fs.StringVar(&t.rename, "rename", "", "CSV of model_name,column_name when traffic columns are named differently")
	fs.BoolVar(&t.allowAbsent, "allow-absent", false, "treat model features missing from the traffic as missing in every row")
	fs.IntVar(&t.head, "head", 0, "read only the first N rows in file order")
	fs.IntVar(&t.maxRows, "max-rows", 0, "sample at most N rows, keeping whole query groups (deterministic with --seed)")
}

// load reads the sample at path with the given feature columns.
// allowAbsent overrides --allow-absent (compare reads the other version's
// features leniently).
func (t *trafficFlags) load(path string, features []string, seed uint64, allowAbsent bool) (*frame.Frame, error) {
	opts := traffic.Options{
		Features: features, Label: t.label, Group: t.group, Weight: t.weight,
		AllowAbsent: allowAbsent, Head: t.head, MaxRows: t.maxRows, Seed: seed,
	}
	if t.rename != "" {
		m, err := traffic.ReadRenameFile(t.rename)
		if err != nil {
			return nil, err
		}
		opts.Rename = m
	}
	return traffic.Read(path, opts)
}

// measureFlags set how the traffic measures are computed.
type measureFlags struct {
	metric     string
	ndcgGain   string
	noRelevant string
	repeats    int
	replicates int
	confidence float64
	seed       uint64
	workers    int
	shap       bool
	shapRows   int
}

func (m *measureFlags) add(fs *pflag.FlagSet) {
	fs.StringVar(&m.metric, "metric", "", "quality metric: ndcg@K, logloss, auc, rmse, mean_abs_delta (default from the objective)")
	fs.StringVar(&m.ndcgGain, "ndcg-gain", "exponential", "NDCG gain: exponential (2^rel-1) or linear (rel, as scikit-learn)")
	fs.StringVar(&m.noRelevant, "no-relevant", "skip", "queries without a relevant item: skip (left out) or zero (count as 0, as scikit-learn)")
	fs.IntVar(&m.repeats, "repeats", 10, "shuffles per feature for NDCG and AUC")
	fs.IntVar(&m.replicates, "replicates", 200, "bootstrap replicates")
	fs.Float64Var(&m.confidence, "confidence", 0.95, "interval level")
	fs.Uint64Var(&m.seed, "seed", 1, "random seed (shuffles, bootstrap, sampling)")
	fs.IntVar(&m.workers, "workers", 0, "worker goroutines (default: all cores)")
	fs.BoolVar(&m.shap, "shap", true, "compute mean |SHAP| (TreeSHAP)")
	fs.IntVar(&m.shapRows, "shap-rows", 20000, "compute SHAP on at most this many rows")
}

func (m *measureFlags) config() (importance.Config, error) {
	c := importance.Config{
		Metric: m.metric, Repeats: m.repeats, Replicates: m.replicates,
		Confidence: m.confidence, Seed: m.seed, Workers: m.workers,
		SHAP: m.shap, SHAPRows: m.shapRows,
	}
	switch m.ndcgGain {
	case "exponential":
		c.Gain = metrics.GainExponential
	case "linear":
		c.Gain = metrics.GainLinear
	default:
		return c, usagef("--ndcg-gain %q: want exponential or linear", m.ndcgGain)
	}
	switch m.noRelevant {
	case "skip":
		c.NoRelevant = metrics.NoRelevantSkip
	case "zero":
		c.NoRelevant = metrics.NoRelevantZero
	default:
		return c, usagef("--no-relevant %q: want skip or zero", m.noRelevant)
	}
	if m.metric != "" {
		if _, _, err := importance.ParseMetric(m.metric); err != nil {
			return c, usageError{err.Error()}
		}
	}
	if m.replicates < 1 {
		return c, usagef("--replicates must be at least 1")
	}
	if !(m.confidence > 0 && m.confidence < 1) {
		return c, usagef("--confidence must be between 0 and 1")
	}
	if m.repeats < 1 {
		return c, usagef("--repeats must be at least 1")
	}
	return c, nil
}

func oneArg(args []string, what string) (string, error) {
	if len(args) != 1 {
		return "", usagef("want exactly one %s, got %d arguments", what, len(args))
	}
	return args[0], nil
}

// oneOf checks that an option's value is one of the allowed words.
func oneOf(option, value string, allowed ...string) error {
	if slices.Contains(allowed, value) {
		return nil
	}
	last := allowed[len(allowed)-1]
	list := strings.Join(allowed[:len(allowed)-1], ", ")
	if list != "" {
		list += " or " + last
	} else {
		list = last
	}
	return usagef("--%s %q: want %s", option, value, list)
}
