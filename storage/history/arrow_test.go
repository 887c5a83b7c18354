package history

import (
	"context"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet/file"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"
)

// The files written with one Parquet implementation are read by an
// independent one, Apache arrow-go v18.8.0, with the logical types the
// package documents and the same values Load gives (parquet-go v0.32.0).
func TestReadWithArrow(t *testing.T) {
	dir := t.TempDir()
	for i := 0; i < 4; i++ {
		run := sampleRun(i)
		if i == 3 {
			run.Rows = nil // the run-only row
		}
		mustAppend(t, dir, run)
	}
	runs := mustLoad(t, dir)
	for _, run := range runs {
		t.Run(run.ID, func(t *testing.T) {
			path := filepath.Join(dir, "run_date="+run.Time.Format("2006-01-02"), "run-"+run.ID+".parquet")
			tbl := readArrowTable(t, path)
			defer tbl.Release()

			wantRows := len(run.Rows)
			if wantRows == 0 {
				wantRows = 1
			}
			if tbl.NumRows() != int64(wantRows) {
				t.Fatalf("arrow read %d rows, want %d", tbl.NumRows(), wantRows)
			}
			if got := tbl.NumCols(); got != int64(columnCount) {
				t.Errorf("arrow sees %d columns, want %d", got, columnCount)
			}
			for i, c := range columns {
				if f := tbl.Schema().Field(i); f.Name != c.name {
					t.Errorf("column %d is %s, want %s", i, f.Name, c.name)
				}
			}

			// Logical types as documented on the package.
			ts, ok := arrowField(t, tbl, "run_time").Type.(*arrow.TimestampType)
			if !ok || ts.Unit != arrow.Microsecond || ts.TimeZone != "UTC" {
				t.Errorf("run_time type %v, want timestamp[us, tz=UTC]", arrowField(t, tbl, "run_time").Type)
			}
			if typ := arrowField(t, tbl, "seed").Type; typ.ID() != arrow.UINT64 {
				t.Errorf("seed type %v, want uint64", typ)
			}
			for _, name := range []string{"run_id", "feature", "flags", "verdict"} {
				if typ := arrowField(t, tbl, name).Type; typ.ID() != arrow.STRING {
					t.Errorf("%s type %v, want utf8", name, typ)
				}
			}

			for r := 0; r < wantRows; r++ {
				if got := arrowString(t, tbl, "run_id", r); got != run.ID {
					t.Errorf("row %d run_id %q, want %q", r, got, run.ID)
				}
				if got := arrowTime(t, tbl, "run_time", r); !got.Equal(run.Time) {
					t.Errorf("row %d run_time %v, want %v", r, got, run.Time)
				}
				if got := arrowUint64(t, tbl, "seed", r); got != run.Seed {
					t.Errorf("row %d seed %d, want %d", r, got, run.Seed)
				}
				if got := arrowInt32(t, tbl, "replicates", r); int(got) != run.Replicates {
					t.Errorf("row %d replicates %d, want %d", r, got, run.Replicates)
				}
				for name, want := range map[string]string{
					"baseline_name": run.BaselineName, "baseline_sha256": run.BaselineSHA256,
					"candidate_name": run.CandidateName, "candidate_sha256": run.CandidateSHA256,
					"traffic_name": run.TrafficName, "traffic_sha256": run.TrafficSHA256,
					"baseline_traffic_name": run.BaselineTrafficName, "baseline_traffic_sha256": run.BaselineTrafficSHA256,
					"metric": run.Metric, "verdict": run.Verdict,
				} {
					if got := arrowString(t, tbl, name, r); got != want {
						t.Errorf("row %d %s %q, want %q", r, name, got, want)
					}
				}
				if len(run.Rows) == 0 {
					for _, name := range []string{"feature", "version", "measure", "flags"} {
						if got := arrowString(t, tbl, name, r); got != "" {
							t.Errorf("run-only row: %s %q, want empty", name, got)
						}
					}
					continue
				}
				row := run.Rows[r]
				for name, want := range map[string]string{
					"feature": row.Feature, "version": row.Version, "measure": row.Measure,
					"flags": strings.Join(row.Flags, ","),
				} {
					if got := arrowString(t, tbl, name, r); got != want {
						t.Errorf("row %d %s %q, want %q", r, name, got, want)
					}
				}
				for name, want := range map[string]float64{"value": row.Value, "lo": row.Lo, "hi": row.Hi, "share": row.Share} {
					got, valid := arrowFloat64(t, tbl, name, r)
					if math.IsNaN(want) {
						if valid {
							t.Errorf("row %d %s = %v, want NULL for NaN", r, name, got)
						}
					} else if !valid || got != want {
						t.Errorf("row %d %s = %v (valid %t), want %v", r, name, got, valid, want)
					}
				}
			}
		})
	}
}

func readArrowTable(t *testing.T, path string) arrow.Table {
	t.Helper()
	rdr, err := file.OpenParquetFile(path, false)
	if err != nil {
		t.Fatalf("arrow-go open %s: %v", path, err)
	}
	defer rdr.Close()
	if v := rdr.MetaData().KeyValueMetadata().FindValue(schemaKey); v == nil || *v != schemaVersion {
		t.Errorf("arrow-go sees %s = %v, want %q", schemaKey, v, schemaVersion)
	}
	fr, err := pqarrow.NewFileReader(rdr, pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	if err != nil {
		t.Fatalf("arrow-go reader %s: %v", path, err)
	}
	tbl, err := fr.ReadTable(context.Background())
	if err != nil {
		t.Fatalf("arrow-go read %s: %v", path, err)
	}
	return tbl
}

func arrowField(t *testing.T, tbl arrow.Table, name string) arrow.Field {
	t.Helper()
	idx := tbl.Schema().FieldIndices(name)
	if len(idx) != 1 {
		t.Fatalf("arrow table has %d columns named %s", len(idx), name)
	}
	return tbl.Schema().Field(idx[0])
}

// arrowCell finds row r of column name: the chunk and the index in it.
func arrowCell(t *testing.T, tbl arrow.Table, name string, r int) (arrow.Array, int) {
	t.Helper()
	idx := tbl.Schema().FieldIndices(name)
	if len(idx) != 1 {
		t.Fatalf("arrow table has %d columns named %s", len(idx), name)
	}
	for _, chunk := range tbl.Column(idx[0]).Data().Chunks() {
		if r < chunk.Len() {
			return chunk, r
		}
		r -= chunk.Len()
	}
	t.Fatalf("column %s has no row %d", name, r)
	return nil, 0
}

func arrowString(t *testing.T, tbl arrow.Table, name string, r int) string {
	t.Helper()
	a, i := arrowCell(t, tbl, name, r)
	switch s := a.(type) {
	case *array.String:
		return s.Value(i)
	case *array.Dictionary:
		return s.Dictionary().(*array.String).Value(s.GetValueIndex(i))
	}
	t.Fatalf("column %s is %T, not a string array", name, a)
	return ""
}

func arrowTime(t *testing.T, tbl arrow.Table, name string, r int) time.Time {
	t.Helper()
	a, i := arrowCell(t, tbl, name, r)
	ts, ok := a.(*array.Timestamp)
	if !ok {
		t.Fatalf("column %s is %T", name, a)
	}
	return time.UnixMicro(int64(ts.Value(i))).UTC()
}

func arrowUint64(t *testing.T, tbl arrow.Table, name string, r int) uint64 {
	t.Helper()
	a, i := arrowCell(t, tbl, name, r)
	u, ok := a.(*array.Uint64)
	if !ok {
		t.Fatalf("column %s is %T", name, a)
	}
	return u.Value(i)
}

func arrowInt32(t *testing.T, tbl arrow.Table, name string, r int) int32 {
	t.Helper()
	a, i := arrowCell(t, tbl, name, r)
	v, ok := a.(*array.Int32)
	if !ok {
		t.Fatalf("column %s is %T", name, a)
	}
	return v.Value(i)
}

func arrowFloat64(t *testing.T, tbl arrow.Table, name string, r int) (float64, bool) {
	t.Helper()
	a, i := arrowCell(t, tbl, name, r)
	v, ok := a.(*array.Float64)
	if !ok {
		t.Fatalf("column %s is %T", name, a)
	}
	if v.IsNull(i) {
		return 0, false
	}
	return v.Value(i), true
}
