package history

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/xitongsys/parquet-go/parquet"
	"github.com/xitongsys/parquet-go/writer"
)

// Names of the dataset's files and folders.
const (
	partitionPrefix = "run_date="
	partitionLayout = "2006-01-02"
	runFilePrefix   = "run-"
	runFileSuffix   = ".parquet"
	tempFilePrefix  = ".run-"
	tempFileSuffix  = ".tmp"
	lockFileName    = ".lock"

	schemaKey     = "splitledger.history.schema"
	schemaVersion = "1"
)

// record is one row of a run file; the tags give the column list documented
// on the package.
type record struct {
	RunID                 string   `parquet:"name=run_id, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	RunTime               int64    `parquet:"name=run_time, type=INT64, convertedtype=TIMESTAMP_MICROS, logicaltype=TIMESTAMP, logicaltype.isadjustedtoutc=true, logicaltype.unit=MICROS"`
	BaselineName          string   `parquet:"name=baseline_name, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	BaselineSHA256        string   `parquet:"name=baseline_sha256, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	CandidateName         string   `parquet:"name=candidate_name, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	CandidateSHA256       string   `parquet:"name=candidate_sha256, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	TrafficName           string   `parquet:"name=traffic_name, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	TrafficSHA256         string   `parquet:"name=traffic_sha256, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	BaselineTrafficName   string   `parquet:"name=baseline_traffic_name, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	BaselineTrafficSHA256 string   `parquet:"name=baseline_traffic_sha256, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Metric                string   `parquet:"name=metric, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Seed                  int64    `parquet:"name=seed, type=INT64, convertedtype=UINT_64"`
	Replicates            int32    `parquet:"name=replicates, type=INT32"`
	Verdict               string   `parquet:"name=verdict, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Feature               string   `parquet:"name=feature, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Version               string   `parquet:"name=version, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Measure               string   `parquet:"name=measure, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
	Value                 *float64 `parquet:"name=value, type=DOUBLE, repetitiontype=OPTIONAL"`
	Lo                    *float64 `parquet:"name=lo, type=DOUBLE, repetitiontype=OPTIONAL"`
	Hi                    *float64 `parquet:"name=hi, type=DOUBLE, repetitiontype=OPTIONAL"`
	Share                 *float64 `parquet:"name=share, type=DOUBLE, repetitiontype=OPTIONAL"`
	Flags                 string   `parquet:"name=flags, type=BYTE_ARRAY, convertedtype=UTF8, encoding=PLAIN_DICTIONARY"`
}

// Append records run as DIR/run_date=YYYY-MM-DD/run-<ID>.parquet and returns
// that path. It creates dir when missing. The write is atomic: the file is
// written under a hidden temporary name in the same folder, synced, renamed,
// and the folder synced, all while holding DIR/.lock, so concurrent Appends
// from any number of processes never interleave and a crash leaves earlier
// runs intact and no visible partial file. Append waits up to two minutes
// for the lock.
//
// A run that breaks the data model returns an error wrapping ErrInvalidRun;
// an ID already present in any partition returns one wrapping ErrRunExists.
// When only the final folder sync fails, the run is recorded: Append
// returns its path together with the error. run is not modified. Run files
// are created with mode 0644.
func Append(dir string, run Run) (path string, err error) {
	return appendRun(dir, run, nil)
}

// appendRun is Append with an optional wrapper around the temporary file's
// writer, through which tests inject failures and crashes.
func appendRun(dir string, run Run, wrap func(io.Writer) io.Writer) (path string, err error) {
	if err := validate(&run); err != nil {
		return "", err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", fmt.Errorf("history: create dataset folder: %w", err)
	}
	unlock, err := lockDataset(filepath.Join(dir, lockFileName))
	if err != nil {
		return "", err
	}
	defer func() {
		if uerr := unlock(); uerr != nil && err == nil {
			err = uerr
		}
	}()

	name := runFilePrefix + run.ID + runFileSuffix
	if prior, err := findRunFile(dir, name); err != nil {
		return "", err
	} else if prior != "" {
		return "", fmt.Errorf("%w: run %q already in %s", ErrRunExists, run.ID, prior)
	}

	partition := filepath.Join(dir, partitionPrefix+run.Time.UTC().Format(partitionLayout))
	created, err := makeFolder(partition)
	if err != nil {
		return "", err
	}
	if created {
		if err := syncFolder(dir); err != nil {
			return "", err
		}
	}
	// Under the lock every temporary file belongs to a writer that died.
	if _, err := removeOrphans(partition); err != nil {
		return "", err
	}

	tmp, err := os.CreateTemp(partition, tempFilePrefix+run.ID+"-*"+tempFileSuffix)
	if err != nil {
		return "", fmt.Errorf("history: run %q: create temporary file: %w", run.ID, err)
	}
	tmpName := tmp.Name()
	committed := false
	defer func() {
		if !committed {
			tmp.Close()
			os.Remove(tmpName)
		}
	}()

	var w io.Writer = tmp
	if wrap != nil {
		w = wrap(tmp)
	}
	if err := writeRun(w, &run); err != nil {
		return "", fmt.Errorf("history: run %q: write %s: %w", run.ID, tmpName, err)
	}
	// CreateTemp makes the file private; a run file is as readable as any
	// file the user creates, for the query engines that share the dataset.
	if err := tmp.Chmod(0o644); err != nil {
		return "", fmt.Errorf("history: run %q: chmod %s: %w", run.ID, tmpName, err)
	}
	if err := tmp.Sync(); err != nil {
		return "", fmt.Errorf("history: run %q: sync %s: %w", run.ID, tmpName, err)
	}
	if err := tmp.Close(); err != nil {
		return "", fmt.Errorf("history: run %q: close %s: %w", run.ID, tmpName, err)
	}
	path = filepath.Join(partition, name)
	if err := os.Rename(tmpName, path); err != nil {
		return "", fmt.Errorf("history: run %q: rename into place: %w", run.ID, err)
	}
	committed = true
	if err := syncFolder(partition); err != nil {
		return path, err // recorded, maybe not yet durable
	}
	return path, nil
}

// writeRun encodes run as one Parquet file on w.
func writeRun(w io.Writer, run *Run) error {
	pw, err := writer.NewParquetWriterFromWriter(w, new(record), 1)
	if err != nil {
		return fmt.Errorf("parquet schema: %w", err)
	}
	pw.CompressionType = parquet.CompressionCodec_SNAPPY
	base := record{
		RunID:                 run.ID,
		RunTime:               run.Time.UnixMicro(),
		BaselineName:          run.BaselineName,
		BaselineSHA256:        run.BaselineSHA256,
		CandidateName:         run.CandidateName,
		CandidateSHA256:       run.CandidateSHA256,
		TrafficName:           run.TrafficName,
		TrafficSHA256:         run.TrafficSHA256,
		BaselineTrafficName:   run.BaselineTrafficName,
		BaselineTrafficSHA256: run.BaselineTrafficSHA256,
		Metric:                run.Metric,
		Seed:                  int64(run.Seed), // bit pattern kept; the UINT_64 annotation says how to read it
		Replicates:            int32(run.Replicates),
		Verdict:               run.Verdict,
	}
	if len(run.Rows) == 0 {
		// The run-only row: empty feature, version and measure.
		if err := pw.Write(base); err != nil {
			return fmt.Errorf("run-only row: %w", err)
		}
	}
	for i, row := range run.Rows {
		rec := base
		rec.Feature = row.Feature
		rec.Version = row.Version
		rec.Measure = row.Measure
		rec.Value = nullableDouble(row.Value)
		rec.Lo = nullableDouble(row.Lo)
		rec.Hi = nullableDouble(row.Hi)
		rec.Share = nullableDouble(row.Share)
		rec.Flags = strings.Join(row.Flags, ",")
		if err := pw.Write(rec); err != nil {
			return fmt.Errorf("row %d (feature %q): %w", i, row.Feature, err)
		}
	}
	version := schemaVersion
	pw.Footer.KeyValueMetadata = append(pw.Footer.KeyValueMetadata, &parquet.KeyValue{Key: schemaKey, Value: &version})
	if err := pw.WriteStop(); err != nil {
		return fmt.Errorf("finish: %w", err)
	}
	return nil
}

// nullableDouble maps NaN to NULL.
func nullableDouble(v float64) *float64 {
	if math.IsNaN(v) {
		return nil
	}
	return &v
}

// findRunFile returns the path of file name in any partition of dir, or "".
func findRunFile(dir, name string) (string, error) {
	partitions, err := listPartitions(dir)
	if err != nil {
		return "", err
	}
	for _, p := range partitions {
		path := filepath.Join(dir, p.name, name)
		if _, err := os.Lstat(path); err == nil {
			return path, nil
		} else if !errors.Is(err, fs.ErrNotExist) {
			return "", fmt.Errorf("history: check %s: %w", path, err)
		}
	}
	return "", nil
}

// makeFolder creates path if missing and tells whether it did.
func makeFolder(path string) (created bool, err error) {
	err = os.Mkdir(path, 0o755)
	if err == nil {
		return true, nil
	}
	if errors.Is(err, fs.ErrExist) {
		if info, serr := os.Stat(path); serr == nil && info.IsDir() {
			return false, nil
		}
	}
	return false, fmt.Errorf("history: create partition folder: %w", err)
}

// removeOrphans deletes the temporary files left in a partition folder by
// writers that died; only call it while holding the lock.
func removeOrphans(partition string) (removed []string, err error) {
	entries, err := os.ReadDir(partition)
	if err != nil {
		return nil, fmt.Errorf("history: list %s: %w", partition, err)
	}
	for _, e := range entries {
		if isTempName(e.Name()) && e.Type().IsRegular() {
			path := filepath.Join(partition, e.Name())
			if err := os.Remove(path); err != nil && !errors.Is(err, fs.ErrNotExist) {
				return removed, fmt.Errorf("history: remove orphaned temporary file: %w", err)
			}
			removed = append(removed, path)
		}
	}
	return removed, nil
}

func isTempName(name string) bool {
	return strings.HasPrefix(name, tempFilePrefix) && strings.HasSuffix(name, tempFileSuffix)
}
