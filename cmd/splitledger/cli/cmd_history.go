package cli

import (
	"fmt"
	"io"
	"time"

	"github.com/spf13/pflag"

	"splitledger/reports"
	"splitledger/storage/history"
)

func historyCommand() command {
	return command{
		name:    "history",
		summary: "list recorded runs, follow one feature's share across runs, prune old runs",
		usage:   "history DIR [--feature NAME [--measure M] [--version candidate|baseline]] [--prune-before YYYY-MM-DD] [--format text|json|csv]",
		flags: func(fs *pflag.FlagSet) func(*env, []string) error {
			feature := fs.String("feature", "", "show this feature's share per run")
			measure := fs.String("measure", "permutation_drop", "measure to follow with --feature")
			version := fs.String("version", "candidate", "model version to follow: candidate or baseline")
			prune := fs.String("prune-before", "", "delete runs recorded before this date (YYYY-MM-DD, UTC)")
			format := fs.String("format", "text", "output format: text, json or csv")
			ascii := fs.Bool("ascii", false, "ASCII-only sparklines")
			return func(e *env, args []string) error {
				dir, err := oneArg(args, "history folder")
				if err != nil {
					return err
				}
				if err := oneOf("format", *format, "text", "json", "csv"); err != nil {
					return err
				}
				if err := oneOf("version", *version, "candidate", "baseline"); err != nil {
					return err
				}
				if *prune != "" {
					before, err := time.Parse("2006-01-02", *prune)
					if err != nil {
						return usagef("--prune-before %q: want a date YYYY-MM-DD", *prune)
					}
					removed, err := history.Prune(dir, before)
					if err != nil {
						return err
					}
					fmt.Fprintf(e.stdout, "removed %d run files recorded before %s\n", len(removed), *prune)
					return nil
				}
				runs, warnings, err := history.Load(dir)
				if err != nil {
					return err
				}
				for _, w := range warnings {
					fmt.Fprintf(e.stderr, "splitledger history: warning: %s\n", w)
				}
				return writeOutput(e, "", func(w io.Writer) error {
					if *feature == "" {
						return reports.HistoryRuns(w, runs, *format)
					}
					pts := history.FeatureTrend(runs, *feature, *measure, *version)
					return reports.HistoryTrend(w, *feature, *measure, *version, pts, *format, *ascii)
				})
			}
		},
	}
}
