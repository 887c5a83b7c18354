package history

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/parquet-go/parquet-go"
)

// Load reads every run of the dataset in dir, sorted by Time and then ID,
// each with its rows in the order they were appended.
//
// A missing dir is an empty history: no runs, no warnings, no error, so the
// first weekly run needs no setup. Files that cannot be trusted are skipped
// and named in warnings, never silently: a damaged or truncated Parquet file,
// a file whose schema or rows break the data model, a run ID recorded twice
// (the later one is skipped), and visible entries that are neither partition
// folders nor run files. A run stored in the wrong date folder is kept with a
// warning. Hidden names ("." or "_" first: the lock, writes in progress) are
// ignored. err is only for a dataset folder that cannot be listed.
//
// NULL values come back as NaN; empty Flags come back nil; Time is UTC.
//
// Every size a file declares is checked before the reader trusts it, so a
// damaged file costs a warning, not gigabytes of memory. Only files in the
// form Append writes pass: the documented columns, Snappy or no
// compression, version-1 data pages, PLAIN or dictionary encoding, at most
// 4,194,304 rows; a file rewritten by another tool in another form is
// skipped with a warning.
func Load(dir string) (runs []Run, warnings []string, err error) {
	info, err := os.Stat(dir)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil, nil
	}
	if err != nil {
		return nil, nil, fmt.Errorf("history: open dataset: %w", err)
	}
	if !info.IsDir() {
		return nil, nil, fmt.Errorf("history: dataset %s is not a folder", dir)
	}
	parts, strays, err := scanDataset(dir)
	if err != nil {
		return nil, nil, err
	}
	for _, s := range strays {
		warnings = append(warnings, fmt.Sprintf("ignored %s: not a %sYYYY-MM-DD folder", s, partitionPrefix))
	}
	seen := make(map[string]string)
	for _, p := range parts {
		folder := filepath.Join(dir, p.name)
		entries, err := os.ReadDir(folder)
		if errors.Is(err, fs.ErrNotExist) {
			continue // pruned while we were reading
		}
		if err != nil {
			warnings = append(warnings, fmt.Sprintf("skipped %s: %v", folder, err))
			continue
		}
		for _, e := range entries {
			name := e.Name()
			if isHidden(name) {
				continue
			}
			path := filepath.Join(folder, name)
			id, ok := runFileID(name)
			if !ok || !e.Type().IsRegular() {
				warnings = append(warnings, fmt.Sprintf("ignored %s: not a %s<ID>%s file", path, runFilePrefix, runFileSuffix))
				continue
			}
			run, err := readRunFile(path)
			if errors.Is(err, fs.ErrNotExist) {
				continue // pruned while we were reading
			}
			if err != nil {
				warnings = append(warnings, fmt.Sprintf("skipped %s: %v", path, err))
				continue
			}
			if run.ID != id {
				warnings = append(warnings, fmt.Sprintf("skipped %s: it records run %q, not %q", path, run.ID, id))
				continue
			}
			if prior, dup := seen[id]; dup {
				warnings = append(warnings, fmt.Sprintf("skipped %s: run %q already read from %s", path, id, prior))
				continue
			}
			seen[id] = path
			if d := run.Time.Format(partitionLayout); d != p.date.Format(partitionLayout) {
				warnings = append(warnings, fmt.Sprintf("kept %s: run time %s belongs in %s%s", path, run.Time.Format(time.RFC3339), partitionPrefix, d))
			}
			runs = append(runs, run)
		}
	}
	sort.SliceStable(runs, func(i, j int) bool {
		if !runs[i].Time.Equal(runs[j].Time) {
			return runs[i].Time.Before(runs[j].Time)
		}
		return runs[i].ID < runs[j].ID
	})
	return runs, warnings, nil
}

// readRunFile decodes one run file.
func readRunFile(path string) (Run, error) {
	f, err := os.Open(path)
	if err != nil {
		return Run{}, err
	}
	defer f.Close()
	info, err := f.Stat()
	if err != nil {
		return Run{}, err
	}
	return decodeRun(f, info.Size())
}

// column describes one expected column of a run file.
type column struct {
	name     string
	kind     parquet.Kind
	optional bool
}

// Column positions in columns; the order is the file order documented on
// the package, but files are matched by name.
const (
	colRunID = iota
	colRunTime
	colBaselineName
	colBaselineSHA256
	colCandidateName
	colCandidateSHA256
	colTrafficName
	colTrafficSHA256
	colBaselineTrafficName
	colBaselineTrafficSHA256
	colMetric
	colSeed
	colReplicates
	colVerdict
	colFeature
	colVersion
	colMeasure
	colValue
	colLo
	colHi
	colShare
	colFlags
	columnCount
)

var columns = [columnCount]column{
	colRunID:                 {"run_id", parquet.ByteArray, false},
	colRunTime:               {"run_time", parquet.Int64, false},
	colBaselineName:          {"baseline_name", parquet.ByteArray, false},
	colBaselineSHA256:        {"baseline_sha256", parquet.ByteArray, false},
	colCandidateName:         {"candidate_name", parquet.ByteArray, false},
	colCandidateSHA256:       {"candidate_sha256", parquet.ByteArray, false},
	colTrafficName:           {"traffic_name", parquet.ByteArray, false},
	colTrafficSHA256:         {"traffic_sha256", parquet.ByteArray, false},
	colBaselineTrafficName:   {"baseline_traffic_name", parquet.ByteArray, false},
	colBaselineTrafficSHA256: {"baseline_traffic_sha256", parquet.ByteArray, false},
	colMetric:                {"metric", parquet.ByteArray, false},
	colSeed:                  {"seed", parquet.Int64, false},
	colReplicates:            {"replicates", parquet.Int32, false},
	colVerdict:               {"verdict", parquet.ByteArray, false},
	colFeature:               {"feature", parquet.ByteArray, false},
	colVersion:               {"version", parquet.ByteArray, false},
	colMeasure:               {"measure", parquet.ByteArray, false},
	colValue:                 {"value", parquet.Double, true},
	colLo:                    {"lo", parquet.Double, true},
	colHi:                    {"hi", parquet.Double, true},
	colShare:                 {"share", parquet.Double, true},
	colFlags:                 {"flags", parquet.ByteArray, false},
}

// decodeRun reads a run file of the given size. The Parquet reader is fed
// untrusted bytes; a panic inside it is turned into an error so that one
// damaged file cannot take the whole Load down.
func decodeRun(r io.ReaderAt, size int64) (run Run, err error) {
	defer func() {
		if p := recover(); p != nil {
			run, err = Run{}, fmt.Errorf("damaged Parquet data: %v", p)
		}
	}()
	if err := checkFooter(r, size); err != nil {
		return Run{}, err
	}
	f, err := parquet.OpenFile(r, size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
	if err != nil {
		return Run{}, fmt.Errorf("open Parquet: %w", err)
	}
	if err := checkPages(r, size, f); err != nil {
		return Run{}, err
	}
	if v, ok := f.Lookup(schemaKey); !ok || v != schemaVersion {
		return Run{}, fmt.Errorf("metadata %s = %q, want %q", schemaKey, v, schemaVersion)
	}
	schema := f.Schema()
	var index [columnCount]int
	for i, c := range columns {
		leaf, ok := schema.Lookup(c.name)
		if !ok {
			return Run{}, fmt.Errorf("column %s missing", c.name)
		}
		if leaf.Node.Type().Kind() != c.kind || leaf.Node.Optional() != c.optional || leaf.MaxRepetitionLevel != 0 {
			return Run{}, fmt.Errorf("column %s has type %v (optional %t), want %v (optional %t)",
				c.name, leaf.Node.Type(), leaf.Node.Optional(), c.kind, c.optional)
		}
		index[i] = leaf.ColumnIndex
	}
	ncols := len(schema.Columns())

	var rowCount int64
	onlyRow := false
	buf := make([]parquet.Row, 64)
	byColumn := make([]parquet.Value, ncols)
	var vals [columnCount]parquet.Value
	var texts [columnCount]string
	// A run file repeats its metadata on every row and each feature, version
	// and measure on many: keep one copy of each string, copied out of the
	// reader's buffer.
	strs := make(map[string]string)
	intern := func(b []byte) string {
		if s, ok := strs[string(b)]; ok {
			return s
		}
		s := string(b)
		strs[s] = s
		return s
	}
	for g, rg := range f.RowGroups() {
		rows := rg.Rows()
		for {
			n, rerr := rows.ReadRows(buf)
			for _, row := range buf[:n] {
				clear(byColumn)
				for _, v := range row {
					if c := v.Column(); c >= 0 && c < ncols {
						byColumn[c] = v
					}
				}
				for i := range columns {
					vals[i] = byColumn[index[i]]
					if columns[i].kind == parquet.ByteArray {
						texts[i] = intern(vals[i].ByteArray())
					}
				}
				meta := Run{
					ID:                    texts[colRunID],
					Time:                  time.UnixMicro(vals[colRunTime].Int64()).UTC(),
					BaselineName:          texts[colBaselineName],
					BaselineSHA256:        texts[colBaselineSHA256],
					CandidateName:         texts[colCandidateName],
					CandidateSHA256:       texts[colCandidateSHA256],
					TrafficName:           texts[colTrafficName],
					TrafficSHA256:         texts[colTrafficSHA256],
					BaselineTrafficName:   texts[colBaselineTrafficName],
					BaselineTrafficSHA256: texts[colBaselineTrafficSHA256],
					Metric:                texts[colMetric],
					Seed:                  uint64(vals[colSeed].Int64()),
					Replicates:            int(vals[colReplicates].Int32()),
					Verdict:               texts[colVerdict],
				}
				if rowCount == 0 {
					run = meta
				} else if !sameMetadata(&run, &meta) {
					return Run{}, fmt.Errorf("row group %d, row %d: run metadata differs from row 0", g, rowCount)
				}
				if texts[colFeature] == "" && texts[colVersion] == "" && texts[colMeasure] == "" {
					onlyRow = true // the run-only row of a run without feature rows
				} else {
					run.Rows = append(run.Rows, FeatureRow{
						Feature: texts[colFeature],
						Version: texts[colVersion],
						Measure: texts[colMeasure],
						Value:   nullToNaN(vals[colValue]),
						Lo:      nullToNaN(vals[colLo]),
						Hi:      nullToNaN(vals[colHi]),
						Share:   nullToNaN(vals[colShare]),
						Flags:   splitFlags(texts[colFlags]),
					})
				}
				rowCount++
			}
			if rerr == io.EOF {
				break
			}
			if rerr != nil {
				rows.Close()
				return Run{}, fmt.Errorf("row group %d, row %d: %w", g, rowCount, rerr)
			}
		}
		if err := rows.Close(); err != nil {
			return Run{}, fmt.Errorf("row group %d: %w", g, err)
		}
	}
	if rowCount != f.NumRows() {
		return Run{}, fmt.Errorf("read %d rows, footer says %d", rowCount, f.NumRows())
	}
	if rowCount == 0 {
		return Run{}, errors.New("no rows")
	}
	if onlyRow && rowCount != 1 {
		return Run{}, fmt.Errorf("a row with empty feature, version and measure among %d rows", rowCount)
	}
	if err := validate(&run); err != nil {
		return Run{}, err
	}
	return run, nil
}

// sameMetadata compares everything but Rows.
func sameMetadata(a, b *Run) bool {
	x, y := a, b
	return x.Time.Equal(y.Time) && x.ID == y.ID &&
		x.BaselineName == y.BaselineName && x.BaselineSHA256 == y.BaselineSHA256 &&
		x.CandidateName == y.CandidateName && x.CandidateSHA256 == y.CandidateSHA256 &&
		x.TrafficName == y.TrafficName && x.TrafficSHA256 == y.TrafficSHA256 &&
		x.BaselineTrafficName == y.BaselineTrafficName && x.BaselineTrafficSHA256 == y.BaselineTrafficSHA256 &&
		x.Metric == y.Metric && x.Seed == y.Seed && x.Replicates == y.Replicates && x.Verdict == y.Verdict
}

func nullToNaN(v parquet.Value) float64 {
	if v.IsNull() {
		return math.NaN()
	}
	return v.Double()
}

func splitFlags(s string) []string {
	if s == "" {
		return nil
	}
	return strings.Split(s, ",")
}
