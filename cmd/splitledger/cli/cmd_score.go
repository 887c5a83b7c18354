package cli

import (
	"bufio"
	"io"
	"strconv"

	"github.com/spf13/pflag"
)

func scoreCommand() command {
	return command{
		name:    "score",
		summary: "score a traffic sample: raw margins and predictions per row, as CSV",
		usage:   "score MODEL --traffic PATH [--out FILE] [--group COL] [--head N]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var mf modelFlags
			var tf trafficFlags
			mf.add(fs)
			tf.add(fs, "traffic", "traffic sample: Parquet file, directory or glob")
			out := fs.String("out", "", "write the CSV here (default stdout)")
			seed := fs.Uint64("seed", 1, "seed for --max-rows sampling")
			workers := fs.Int("workers", 0, "worker goroutines (default: all cores)")
			return func(e *env, args []string) error {
				path, err := oneArg(args, "model file")
				if err != nil {
					return err
				}
				if tf.path == "" {
					return usagef("--traffic is required")
				}
				m, err := mf.load(path)
				if err != nil {
					return err
				}
				f, err := tf.load(tf.path, m.FeatureNames, *seed, tf.allowAbsent)
				if err != nil {
					return err
				}
				k := m.NumClass
				margins := make([]float64, f.Rows*k)
				m.Margins(margins, f.Columns, f.Rows, *workers)
				preds := append([]float64(nil), margins...)
				m.Transform(preds)
				return writeOutput(e, *out, func(w io.Writer) error {
					bw := bufio.NewWriter(w)
					bw.WriteString("row")
					if f.Group != nil {
						bw.WriteString(",group")
					}
					for c := 0; c < k; c++ {
						suffix := ""
						if k > 1 {
							suffix = "_" + strconv.Itoa(c)
						}
						bw.WriteString(",margin" + suffix)
					}
					for c := 0; c < k; c++ {
						suffix := ""
						if k > 1 {
							suffix = "_" + strconv.Itoa(c)
						}
						bw.WriteString(",prediction" + suffix)
					}
					bw.WriteByte('\n')
					for r := 0; r < f.Rows; r++ {
						bw.WriteString(strconv.Itoa(r))
						if f.Group != nil {
							bw.WriteByte(',')
							bw.WriteString(strconv.FormatInt(f.Group[r], 10))
						}
						for c := 0; c < k; c++ {
							bw.WriteByte(',')
							bw.WriteString(strconv.FormatFloat(margins[r*k+c], 'g', -1, 64))
						}
						for c := 0; c < k; c++ {
							bw.WriteByte(',')
							bw.WriteString(strconv.FormatFloat(preds[r*k+c], 'g', -1, 64))
						}
						bw.WriteByte('\n')
					}
					return bw.Flush()
				})
			}
		},
	}
}
