package cli

import (
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/spf13/pflag"

	"splitledger/importance"
	"splitledger/importance/treeshap"
	"splitledger/reports"
)

func importanceCommand() command {
	return command{
		name:    "importance",
		summary: "one model's ledger: split count, gain, cover, and on traffic the drops, path usage and mean |SHAP| with intervals",
		usage:   "importance MODEL [--traffic PATH --label COL --group COL] [--format text|json|csv]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var mf modelFlags
			var tf trafficFlags
			var ms measureFlags
			mf.add(fs)
			tf.add(fs, "traffic", "traffic sample: Parquet file, directory or glob (without it: structure measures only)")
			ms.add(fs)
			format := fs.String("format", "text", "output format: text, json or csv")
			out := fs.String("out", "", "write the report here (default stdout)")
			ascii := fs.Bool("ascii", false, "ASCII-only text")
			return func(e *env, args []string) error {
				path, err := oneArg(args, "model file")
				if err != nil {
					return err
				}
				if err := oneOf("format", *format, "text", "json", "csv"); err != nil {
					return err
				}
				cfg, err := ms.config()
				if err != nil {
					return err
				}
				m, err := mf.load(path)
				if err != nil {
					return err
				}
				var t *importance.Table
				if tf.path == "" {
					t, err = importance.MeasureModel(m, path, nil, cfg)
				} else {
					f, ferr := tf.load(tf.path, m.FeatureNames, cfg.Seed, tf.allowAbsent)
					if ferr != nil {
						return ferr
					}
					t, err = importance.MeasureModel(m, path, f, cfg)
					if err != nil {
						err = fmt.Errorf("%s: %w", tf.path, err)
					}
				}
				if err != nil {
					return err
				}
				return writeOutput(e, *out, func(w io.Writer) error {
					switch *format {
					case "json":
						return reports.LedgerJSON(w, t)
					case "csv":
						return reports.LedgerCSV(w, t)
					}
					return reports.LedgerText(w, t, *ascii)
				})
			}
		},
	}
}

func explainCommand() command {
	return command{
		name:    "explain",
		summary: "why row I scored above or below row J: per-feature SHAP differences",
		usage:   "explain MODEL --traffic PATH --rows I,J [--class K] [--format text|json]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var mf modelFlags
			var tf trafficFlags
			mf.add(fs)
			tf.add(fs, "traffic", "traffic sample: Parquet file, directory or glob")
			rows := fs.String("rows", "", "two 0-based row indexes in file order, I,J")
			class := fs.Int("class", 0, "class to explain for multi-class models")
			format := fs.String("format", "text", "output format: text or json")
			return func(e *env, args []string) error {
				path, err := oneArg(args, "model file")
				if err != nil {
					return err
				}
				if tf.path == "" {
					return usagef("--traffic is required")
				}
				if err := oneOf("format", *format, "text", "json"); err != nil {
					return err
				}
				parts := strings.Split(*rows, ",")
				if len(parts) != 2 {
					return usagef("--rows %q: want two row indexes I,J", *rows)
				}
				var idx [2]int
				for i, p := range parts {
					v, err := strconv.Atoi(strings.TrimSpace(p))
					if err != nil || v < 0 {
						return usagef("--rows %q: %q is not a row index", *rows, p)
					}
					idx[i] = v
				}
				m, err := mf.load(path)
				if err != nil {
					return err
				}
				if *class < 0 || *class >= m.NumClass {
					return usagef("--class %d: the model has %d classes", *class, m.NumClass)
				}
				f, err := tf.load(tf.path, m.FeatureNames, 1, tf.allowAbsent)
				if err != nil {
					return err
				}
				for _, r := range idx {
					if r >= f.Rows {
						return fmt.Errorf("%s: --rows: row %d out of range (the sample has %d rows)", tf.path, r, f.Rows)
					}
				}
				x, err := treeshap.New(m)
				if err != nil {
					return fmt.Errorf("%s: %w", path, err)
				}
				res := reports.Explanation{Model: path, RowI: idx[0], RowJ: idx[1], Class: *class}
				nf := m.NumFeatures()
				stride := nf + 1
				var phi [2][]float64
				var margins [2][]float64
				row := make([]float64, nf)
				for i, r := range idx {
					phi[i] = make([]float64, x.RowLen())
					f.Row(row, r)
					x.Row(phi[i], row)
					margins[i] = make([]float64, m.NumClass)
					m.MarginRow(margins[i], row)
				}
				res.MarginI, res.MarginJ = margins[0][*class], margins[1][*class]
				off := *class * stride
				for j := 0; j < nf; j++ {
					res.Features = append(res.Features, reports.ExplainedFeature{
						Feature: m.FeatureNames[j], ValueI: f.Columns[j][idx[0]], ValueJ: f.Columns[j][idx[1]],
						SHAPI: phi[0][off+j], SHAPJ: phi[1][off+j], Difference: phi[0][off+j] - phi[1][off+j],
					})
				}
				res.Sort()
				if *format == "json" {
					return reports.ExplainJSON(e.stdout, &res)
				}
				return reports.ExplainText(e.stdout, &res)
			}
		},
	}
}
