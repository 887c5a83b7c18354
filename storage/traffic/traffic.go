// Package traffic reads a traffic sample from Parquet into a column-major
// frame.Frame: one float64 column per model feature, in model order, with NaN
// for every missing value (Parquet null, NaN, or a category the model never
// saw).
//
// Only the columns the model needs are read (projection), one row group at a
// time, page by page, so memory stays near the size of the frame plus one row
// group. Every column chunk must decode to exactly the number of rows its
// row group declares in the footer: a damaged or short read is an error,
// never a silent gap.
package traffic

import (
	"errors"
	"fmt"
	"math"

	"splitledger/importance/frame"
	"splitledger/importance/parallel"
)

// Errors returned by Read, wrapped with the file, column, row group or row
// they concern. Test them with errors.Is.
var (
	// ErrNotParquet: the file does not start with the Parquet magic bytes.
	ErrNotParquet = errors.New("not a Parquet file")
	// ErrTruncated: the file starts like Parquet but its footer is missing
	// or cut short.
	ErrTruncated = errors.New("truncated Parquet file (footer missing)")
	// ErrDamaged: the footer or a page does not decode, or a column does not
	// hold the number of values the footer declares.
	ErrDamaged = errors.New("damaged Parquet data")
	// ErrUnsupportedCodec: a needed column chunk uses a compression codec the
	// reader does not accept (LZ4_RAW among them).
	ErrUnsupportedCodec = errors.New("unsupported compression codec")
	// ErrUnsupportedType: a needed column has a type the reader cannot turn
	// into the role it plays (nested, repeated, decimal, timestamp, strings
	// for a feature without a category dictionary, ...).
	ErrUnsupportedType = errors.New("unsupported column type")
	// ErrNoFiles: the path names no Parquet file.
	ErrNoFiles = errors.New("no Parquet files")
	// ErrNoRows: the files hold no row at all.
	ErrNoRows = errors.New("no rows")
	// ErrMissingColumn: a model feature or a named label, group or weight
	// column is not in the traffic.
	ErrMissingColumn = errors.New("missing column")
	// ErrSchemaMismatch: a part file lacks a needed column, or holds it with
	// another type than the first file.
	ErrSchemaMismatch = errors.New("part files disagree on the schema")
	// ErrNullGroup: the group (query id) column has a null.
	ErrNullGroup = errors.New("null group id")
	// ErrBadOptions: the options contradict themselves (no feature, a
	// feature named twice, a negative Head or MaxRows).
	ErrBadOptions = errors.New("bad options")
)

// Options says which columns to read and how many rows to keep.
type Options struct {
	// Features are the model feature names, in model order: the frame's
	// columns. At least one; no name twice.
	Features []string
	// Rename maps a model feature name to the traffic column that holds it
	// (see ReadRenameFile). Features without an entry are read from the
	// column of the same name. Entries for names that are not features are
	// ignored.
	Rename map[string]string
	// Categories gives, per model feature, the category code the model uses
	// for each string value. A string column can only feed a feature listed
	// here; a value missing from the map reads as missing (NaN). A numeric
	// column for a listed feature is read as codes unchanged.
	Categories map[string]map[string]int
	// Label, Group and Weight name optional traffic columns ("" = none).
	// Label and Weight are numeric (nulls read as NaN). Group holds query ids:
	// int32/int64 values are kept as they are; strings get int64 codes
	// 0, 1, 2, ... in order of first appearance in the source. A null group
	// id is an error.
	Label, Group, Weight string
	// AllowAbsent lets a model feature be absent from the traffic: its
	// column is all NaN and frame.Absent marks it. Without it an absent
	// feature is an error that lists every missing name.
	AllowAbsent bool
	// Head > 0 keeps only the first Head rows in file order.
	Head int
	// MaxRows > 0 keeps a random sample of at most MaxRows rows: whole query
	// groups when Group is set, single rows otherwise (see Read). With Head
	// the sample is drawn from the first Head rows.
	MaxRows int
	// Seed makes the MaxRows sample reproducible: the same seed and source
	// give the same rows.
	Seed uint64
}

// Read reads the traffic sample at path into a frame.
//
// path is one Parquet file, a directory (every *.parquet file below it,
// recursively; Hive-style key=value folders are fine; entries whose name
// starts with "." or "_" are skipped), or a glob pattern. Files are read in
// lexical path order. Every file must hold the needed columns (in any column
// order) with the same types as the first file.
//
// Columns may be DOUBLE, FLOAT, INT32 (plain or INT(8|16|32) logical types,
// signed or unsigned), INT64 (signed or unsigned), BOOLEAN (1 for true), or
// strings (BYTE_ARRAY, plain or dictionary encoded) for categorical features
// and group ids. Nulls and NaN read as NaN; frame.Missing counts the NaN of
// each column. Pages may be v1 or v2, compressed with snappy, gzip, zstd or
// brotli, or not compressed.
//
// Sampling: the rows kept are the first Head rows when Head > 0 (a query
// group cut by that limit keeps its rows before the cut). When MaxRows > 0
// and more rows than that remain, a sample is drawn. Without a group column
// it is a uniform sample of exactly MaxRows rows (Floyd's algorithm, Bentley
// & Floyd 1987). With a group column every query group gets a pseudo-random
// key from Seed and its id, and whole groups are taken in key order until
// the next group would pass MaxRows: a uniform random set of groups, at
// least one even when it alone has more than MaxRows rows. Kept rows stay
// in file order. frame.TotalRows is the number of rows in all files, and
// frame.SampleFraction = frame.Rows / frame.TotalRows.
//
// A source with no rows, and every malformed input, returns an error naming
// the file and, where it applies, the column, row group and row. A frame
// that would take more than 3/4 of the machine's memory is refused before it
// is allocated (ErrTooLarge).
func Read(path string, opts Options) (*frame.Frame, error) {
	return read(path, opts, 0)
}

// read is Read with an explicit worker count for the column decoders
// (<= 0: all cores); the benchmark compares worker counts.
func read(path string, opts Options, workers int) (*frame.Frame, error) {
	if err := checkOptions(opts); err != nil {
		return nil, err
	}
	paths, err := resolvePaths(path)
	if err != nil {
		return nil, err
	}
	targets := makeTargets(opts)
	src, err := scanSources(paths, targets, opts.AllowAbsent)
	if err != nil {
		return nil, err
	}
	source := describe(path, len(paths))
	if src.totalRows == 0 {
		return nil, fmt.Errorf("traffic: %s: %w", source, ErrNoRows)
	}
	workers = parallel.Workers(workers)
	maxGroup := src.maxRowGroup()
	if err := checkMemory(source, 0, 0, maxGroup, workers); err != nil {
		return nil, err
	}
	r := &reader{
		src:     src,
		targets: targets,
		workers: workers,
		coder:   newGroupCoder(),
	}
	plan, err := r.plan(opts)
	if err != nil {
		return nil, err
	}
	if err := checkMemory(source, int64(plan.rows), len(targets), maxGroup, workers); err != nil {
		return nil, err
	}
	f := newFrame(opts, targets, src, plan.rows)
	f.Source = source
	if err := r.fill(f, plan); err != nil {
		return nil, err
	}
	finishFrame(f)
	return f, nil
}

func checkOptions(opts Options) error {
	if len(opts.Features) == 0 {
		return fmt.Errorf("traffic: %w: no model feature", ErrBadOptions)
	}
	seen := make(map[string]bool, len(opts.Features))
	for _, name := range opts.Features {
		if seen[name] {
			return fmt.Errorf("traffic: %w: model feature %q named twice", ErrBadOptions, name)
		}
		seen[name] = true
	}
	if opts.Head < 0 || opts.MaxRows < 0 {
		return fmt.Errorf("traffic: %w: head %d and max rows %d must not be negative", ErrBadOptions, opts.Head, opts.MaxRows)
	}
	return nil
}

func describe(path string, files int) string {
	if files == 1 {
		return path
	}
	return fmt.Sprintf("%s (%d files)", path, files)
}

// newFrame preallocates every column for rows rows.
func newFrame(opts Options, targets []target, src *sources, rows int) *frame.Frame {
	f := &frame.Frame{
		Names:     append([]string(nil), opts.Features...),
		Columns:   make([][]float64, len(opts.Features)),
		Rows:      rows,
		Missing:   make([]int, len(opts.Features)),
		Absent:    make([]bool, len(opts.Features)),
		TotalRows: src.totalRows,
	}
	for i := range targets {
		t := &targets[i]
		switch t.role {
		case roleFeature:
			f.Columns[t.feature] = make([]float64, rows)
			if src.absent[i] {
				f.Absent[t.feature] = true
				f.Missing[t.feature] = rows
				fillNaN(f.Columns[t.feature])
			}
		case roleLabel:
			f.Label = make([]float64, rows)
		case roleWeight:
			f.Weight = make([]float64, rows)
		case roleGroup:
			f.Group = make([]int64, rows)
		}
	}
	return f
}

// finishFrame sets the sample fraction (the columns' missing counts are
// summed while they are decoded).
func finishFrame(f *frame.Frame) {
	f.SampleFraction = float64(f.Rows) / float64(f.TotalRows)
}

func fillNaN(dst []float64) {
	nan := math.NaN()
	for i := range dst {
		dst[i] = nan
	}
}
