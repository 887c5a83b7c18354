// Package history keeps every audit run (a baseline and a candidate model
// compared on a traffic sample) as a Parquet dataset in a directory, so that
// weekly users can tell a new flag from one that has fired for five weeks and
// follow a feature's share over a quarter.
//
// # Layout
//
// One Parquet file per run, in Hive-style partition folders keyed by the UTC
// date of the run:
//
//	DIR/run_date=YYYY-MM-DD/run-<ID>.parquet
//
// Query engines that understand Hive partitioning read DIR as one table with
// an extra run_date column taken from the folder name; run_date is therefore
// not repeated inside the files. Names starting with "." or "_" are hidden by
// the same convention: the lock file DIR/.lock and the temporary files of a
// write in progress (".run-<ID>-*.tmp") use them, so neither Load nor a query
// engine ever sees a partial file.
//
// # Columns
//
// The schema is flat: one row per (feature, version, measure), with the run's
// metadata repeated on every row, so one SELECT with no join answers any
// question. Columns, in file order:
//
//	run_id                   string (UTF8), required
//	run_time                 int64 TIMESTAMP(MICROS, UTC), required
//	baseline_name            string, required ("" when absent, same below)
//	baseline_sha256          string, required
//	candidate_name           string, required
//	candidate_sha256         string, required
//	traffic_name             string, required
//	traffic_sha256           string, required
//	baseline_traffic_name    string, required
//	baseline_traffic_sha256  string, required
//	metric                   string, required
//	seed                     int64 with UINT_64 annotation (read it as unsigned)
//	replicates               int32, required
//	verdict                  string: pass, warn or fail
//	feature                  string, required
//	version                  string: baseline or candidate
//	measure                  string, e.g. permutation_drop, total_gain
//	value, lo, hi, share     double, optional: NULL where the Go value is NaN
//	flags                    string: flag kinds joined with "," ("" for none)
//
// NaN is stored as NULL rather than as a NaN bit pattern because SQL engines
// skip NULL in aggregates and in min/max statistics, while a stored NaN would
// poison both; Load turns NULL back into NaN. Flags are one comma-joined
// string rather than a list so that every engine can filter them with a plain
// LIKE or string split; flag kinds never contain commas (Append checks).
// A run with no feature rows is stored as a single row whose feature, version
// and measure are empty, so the run itself stays visible; Load drops that row.
//
// The file's key-value metadata carries "splitledger.history.schema" = "1".
//
// # Concurrency and crashes
//
// Append and Prune hold an exclusive lock on DIR/.lock (flock on Unix,
// LockFileEx on Windows). The operating system releases such a lock when the
// holder dies, so a crashed writer never leaves a stale lock behind. A run is
// written to a hidden temporary file in its partition folder, synced, and
// renamed into place; a crash before the rename leaves only a hidden orphan,
// which Prune and later Appends remove (under the lock every temporary file
// belongs to a dead writer). Load takes no lock: renames are atomic, so it
// sees each run either whole or not at all. Where the package has no such
// lock (AIX, Plan 9, WebAssembly) Append and Prune return an error; Load
// works everywhere.
package history

import (
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
	"unicode/utf8"
)

// Version labels of a FeatureRow.
const (
	VersionBaseline  = "baseline"
	VersionCandidate = "candidate"
)

// Verdicts of a Run.
const (
	VerdictPass = "pass"
	VerdictWarn = "warn"
	VerdictFail = "fail"
)

// ErrInvalidRun is wrapped by every error Append returns for a Run that
// breaks the data model (empty ID, bad verdict, comma in a flag, ...).
var ErrInvalidRun = errors.New("history: invalid run")

// ErrRunExists is wrapped by the error Append returns when a run file with
// the same ID is already in the dataset.
var ErrRunExists = errors.New("history: run already recorded")

// Run is one audit of a baseline against a candidate model on traffic.
type Run struct {
	// ID is unique within a dataset and names the file: letters, digits,
	// '-', '_' and '.', at most 128 bytes, not starting with '.' or '_'.
	// NewRunID makes one.
	ID string
	// Time is when the run happened; it is stored in UTC with microsecond
	// precision (finer digits are dropped) and picks the partition folder.
	Time time.Time

	BaselineName, BaselineSHA256, CandidateName, CandidateSHA256 string
	// Traffic names and digests; "" when absent (BaselineTraffic* is only
	// set when the baseline was scored on a sample of its own).
	TrafficName, TrafficSHA256, BaselineTrafficName, BaselineTrafficSHA256 string

	// Metric is the quality metric of the drops, e.g. "ndcg@10".
	Metric string
	// Seed of the bootstrap and permutations.
	Seed uint64
	// Replicates is the bootstrap replicate count, 0 to MaxInt32.
	Replicates int
	// Verdict is VerdictPass, VerdictWarn or VerdictFail.
	Verdict string
	// Rows are the ledger values, at most one per (Feature, Version, Measure)
	// and at most 4,194,304 in all.
	Rows []FeatureRow
}

// FeatureRow is one measure of one feature in one model version.
type FeatureRow struct {
	// Feature name; any non-empty UTF-8 text.
	Feature string
	// Version is VersionBaseline or VersionCandidate.
	Version string
	// Measure names the quantity, e.g. "permutation_drop", "missing_break_drop",
	// "freeze_drop", "mean_abs_shap", "split_count", "total_gain".
	Measure string
	// Value is the point estimate; Lo and Hi bound its interval and are NaN
	// when there is none; Share is Value over the sum across features. Any of
	// the four may be NaN (stored as NULL) or ±Inf.
	Value, Lo, Hi, Share float64
	// Flags are the flag kinds fired for this feature in this run, e.g.
	// "collapsed", "went-constant". Each is non-empty without commas; order is
	// kept. Load returns nil for none.
	Flags []string
}

// NewRunID returns an ID of the form 20240506T070809Z-1a2b3c4d: the UTC time
// to the second, then 32 random bits, so IDs sort by time and two runs in the
// same second do not collide (odds 2^-32).
func NewRunID(t time.Time) string {
	var b [4]byte
	rand.Read(b[:]) // never fails since Go 1.24
	return t.UTC().Format("20060102T150405Z") + "-" + hex.EncodeToString(b[:])
}

const maxIDLength = 128

// validate checks run against the data model; errors wrap ErrInvalidRun.
func validate(run *Run) error {
	if err := validateID(run.ID); err != nil {
		return err
	}
	if run.Time.IsZero() {
		return fmt.Errorf("%w: run %q: zero time", ErrInvalidRun, run.ID)
	}
	if y := run.Time.UTC().Year(); y < 1 || y > 9999 {
		return fmt.Errorf("%w: run %q: time %v outside years 1..9999", ErrInvalidRun, run.ID, run.Time)
	}
	switch run.Verdict {
	case VerdictPass, VerdictWarn, VerdictFail:
	default:
		return fmt.Errorf("%w: run %q: verdict %q is not pass, warn or fail", ErrInvalidRun, run.ID, run.Verdict)
	}
	if run.Replicates < 0 || run.Replicates > math.MaxInt32 {
		return fmt.Errorf("%w: run %q: replicates %d outside 0..%d", ErrInvalidRun, run.ID, run.Replicates, math.MaxInt32)
	}
	texts := []struct{ name, value string }{
		{"baseline name", run.BaselineName}, {"baseline sha256", run.BaselineSHA256},
		{"candidate name", run.CandidateName}, {"candidate sha256", run.CandidateSHA256},
		{"traffic name", run.TrafficName}, {"traffic sha256", run.TrafficSHA256},
		{"baseline traffic name", run.BaselineTrafficName}, {"baseline traffic sha256", run.BaselineTrafficSHA256},
		{"metric", run.Metric},
	}
	for _, s := range texts {
		if !utf8.ValidString(s.value) {
			return fmt.Errorf("%w: run %q: %s %q is not valid UTF-8", ErrInvalidRun, run.ID, s.name, s.value)
		}
	}
	if len(run.Rows) > maxRunRows {
		return fmt.Errorf("%w: run %q: %d rows, at most %d", ErrInvalidRun, run.ID, len(run.Rows), maxRunRows)
	}
	type key struct{ feature, version, measure string }
	seen := make(map[key]int, len(run.Rows))
	for i, row := range run.Rows {
		if err := validateRow(row); err != nil {
			return fmt.Errorf("run %q: row %d: %w", run.ID, i, err)
		}
		k := key{row.Feature, row.Version, row.Measure}
		if j, dup := seen[k]; dup {
			return fmt.Errorf("%w: run %q: row %d repeats row %d (feature %q, version %q, measure %q)",
				ErrInvalidRun, run.ID, i, j, row.Feature, row.Version, row.Measure)
		}
		seen[k] = i
	}
	return nil
}

func validateID(id string) error {
	if id == "" {
		return fmt.Errorf("%w: empty run ID (NewRunID makes one)", ErrInvalidRun)
	}
	if len(id) > maxIDLength {
		return fmt.Errorf("%w: run ID %q longer than %d bytes", ErrInvalidRun, id, maxIDLength)
	}
	if id[0] == '.' || id[0] == '_' {
		return fmt.Errorf("%w: run ID %q starts with %q (hidden file names are reserved)", ErrInvalidRun, id, id[0])
	}
	for i := 0; i < len(id); i++ {
		c := id[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_' || c == '.'
		if !ok {
			return fmt.Errorf("%w: run ID %q: byte %d (%q) is not a letter, digit, '-', '_' or '.'", ErrInvalidRun, id, i, c)
		}
	}
	return nil
}

func validateRow(row FeatureRow) error {
	if row.Feature == "" {
		return fmt.Errorf("%w: empty feature name", ErrInvalidRun)
	}
	if row.Measure == "" {
		return fmt.Errorf("%w: feature %q: empty measure", ErrInvalidRun, row.Feature)
	}
	if !utf8.ValidString(row.Feature) || !utf8.ValidString(row.Measure) {
		return fmt.Errorf("%w: feature %q measure %q: not valid UTF-8", ErrInvalidRun, row.Feature, row.Measure)
	}
	switch row.Version {
	case VersionBaseline, VersionCandidate:
	default:
		return fmt.Errorf("%w: feature %q: version %q is not baseline or candidate", ErrInvalidRun, row.Feature, row.Version)
	}
	for _, flag := range row.Flags {
		if flag == "" || strings.Contains(flag, ",") || !utf8.ValidString(flag) {
			return fmt.Errorf("%w: feature %q: flag %q must be non-empty UTF-8 without commas", ErrInvalidRun, row.Feature, flag)
		}
	}
	return nil
}
