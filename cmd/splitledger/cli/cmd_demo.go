package cli

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/pflag"

	"splitledger/storage/demo"
)

// demoRowsPerDay is the invented booking site's daily scored rows (searches
// times listings shown), used to turn the demo's savings into per-day
// figures.
const demoRowsPerDay = 5_000_000

func demoCommand() command {
	return command{
		name:    "demo",
		summary: "run compare on the embedded demo (an invented holiday-rental search ranking)",
		usage:   "demo [--format F] [--out FILE] [--extract DIR]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			var o compareOptions
			o.add(fs, false)
			extract := fs.String("extract", "", "write the demo files to this folder (it must not hold them already) and print the compare command that uses them")
			return func(e *env, args []string) error {
				if len(args) > 0 {
					return usagef("unexpected arguments %q", args)
				}
				if *extract != "" {
					files, err := demo.Extract(*extract)
					if err != nil {
						return err
					}
					for _, f := range files {
						fmt.Fprintln(e.stdout, f)
					}
					fmt.Fprintf(e.stdout, "\nrerun by hand:\n  %s\n", demoCommandLine(*extract))
					return nil
				}
				dir, err := os.MkdirTemp("", "splitledger-demo-")
				if err != nil {
					return internalError{err}
				}
				defer os.RemoveAll(dir)
				if _, err := demo.Extract(dir); err != nil {
					return internalError{err}
				}
				setDemoInputs(&o, dir)
				o.label = func(p string) string {
					if rel, err := filepath.Rel(dir, p); err == nil && !strings.HasPrefix(rel, "..") {
						return filepath.ToSlash(filepath.Join("demo", rel))
					}
					return p
				}
				return runCompare(e, &o)
			}
		},
	}
}

func setDemoInputs(o *compareOptions, dir string) {
	o.baseline = filepath.Join(dir, "baseline.json.gz")
	o.candidate = filepath.Join(dir, "candidate.json.gz")
	o.tf.path = filepath.Join(dir, "traffic_candidate.parquet")
	o.baselineTraffic = filepath.Join(dir, "traffic_baseline.parquet")
	o.tf.label = "booked"
	o.tf.group = "search_id"
	o.costs = filepath.Join(dir, "costs.csv")
	o.rowsPerDay = demoRowsPerDay
}

func demoCommandLine(dir string) string {
	var o compareOptions
	setDemoInputs(&o, dir)
	return fmt.Sprintf("splitledger compare --baseline %s --candidate %s --traffic %s --baseline-traffic %s --label %s --group %s --costs %s --rows-per-day %d",
		o.baseline, o.candidate, o.tf.path, o.baselineTraffic, o.tf.label, o.tf.group, o.costs, demoRowsPerDay)
}
