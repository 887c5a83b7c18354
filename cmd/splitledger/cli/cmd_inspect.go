package cli

import (
	"io"

	"github.com/spf13/pflag"

	"splitledger/importance/forest"
	"splitledger/reports"
)

func inspectCommand() command {
	return command{
		name:    "inspect",
		summary: "describe model files: format, objective, trees, depth, features used",
		usage:   "inspect MODEL... [--format text|json] [--top N]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var mf modelFlags
			mf.add(fs)
			format := fs.String("format", "text", "output format: text or json")
			top := fs.Int("top", 10, "list this many features by split count")
			return func(e *env, args []string) error {
				if len(args) == 0 {
					return usagef("want at least one model file")
				}
				if err := oneOf("format", *format, "text", "json"); err != nil {
					return err
				}
				var out []reports.ModelSummary
				for _, path := range args {
					m, err := mf.load(path)
					if err != nil {
						return err
					}
					sum, _, err := fileDigest(path)
					if err != nil {
						return err
					}
					out = append(out, reports.ModelSummary{Path: path, SHA256: sum, Summary: forest.Summarize(m)})
				}
				return writeOutput(e, "", func(w io.Writer) error {
					if *format == "json" {
						return reports.InspectJSON(w, out)
					}
					return reports.InspectText(w, out, *top)
				})
			}
		},
	}
}
