package traffic

import (
	"bufio"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet"
	"github.com/apache/arrow-go/v18/parquet/compress"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"
)

const (
	benchRows     = 1_000_000
	benchCols     = 30
	benchRowGroup = 131_072
)

// writeBenchFile writes the benchmark sample with arrow-go v18.8.0: 1M rows
// x 30 nullable doubles (1% nulls), snappy, row groups of 128Ki rows, arrow-
// go's default dictionary encoding. A third of the columns are continuous
// (the dictionary falls back to plain), a third have two decimals, a third
// are small integers, as traffic features are.
func writeBenchFile(b *testing.B, path string) {
	b.Helper()
	rng := rand.New(rand.NewPCG(2026, 11))
	cols := make([]column, benchCols)
	for j := range cols {
		v := make([]float64, benchRows)
		ok := make([]bool, benchRows)
		for i := range v {
			x := rng.NormFloat64()
			switch j % 3 {
			case 1:
				x = math.Round(x*10000) / 100
			case 2:
				x = math.Floor(math.Abs(x) * 4)
			}
			v[i], ok[i] = x, rng.IntN(100) != 0
		}
		cols[j] = column{name: fmt.Sprintf("feature_%02d", j), values: v, valid: ok}
	}
	writeParquet(b, path, cols, layout{codec: compress.Codecs.Snappy, rowGroupRows: benchRowGroup})
}

func benchFeatures() []string {
	names := make([]string, benchCols)
	for j := range names {
		names[j] = fmt.Sprintf("feature_%02d", j)
	}
	return names
}

// BenchmarkRead1Mx30 reads the 1M x 30 sample into a frame, and reads the
// same file with arrow-go's own Parquet reader (pqarrow, into an arrow
// table) for comparison. Metrics: rows/s; alloc/frame = bytes allocated per
// read / frame size; peak-RSS-MB and peak-RSS/frame from a separate process
// that only reads the file (VmHWM of /proc/self/status, Linux).
func BenchmarkRead1Mx30(b *testing.B) {
	path := filepath.Join(b.TempDir(), "traffic-1m-30.parquet")
	writeBenchFile(b, path)
	frameBytes := float64(benchRows * benchCols * 8)
	opts := Options{Features: benchFeatures()}

	ours := func(workers int) func(b *testing.B) {
		return func(b *testing.B) {
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			for i := 0; i < b.N; i++ {
				f, err := read(path, opts, workers)
				if err != nil {
					b.Fatal(err)
				}
				if f.Rows != benchRows {
					b.Fatalf("%d rows", f.Rows)
				}
			}
			runtime.ReadMemStats(&after)
			b.ReportMetric(float64(benchRows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
			b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(b.N)/frameBytes, "alloc/frame")
		}
	}
	b.Run("frame/workers=all", ours(0))
	b.Run("frame/workers=1", ours(1))

	arrowRead := func(parallel bool) func(b *testing.B) {
		return func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				fh, err := os.Open(path)
				if err != nil {
					b.Fatal(err)
				}
				tbl, err := pqarrow.ReadTable(context.Background(), fh, parquet.NewReaderProperties(memory.DefaultAllocator),
					pqarrow.ArrowReadProperties{Parallel: parallel, BatchSize: benchRowGroup}, memory.DefaultAllocator)
				if err != nil {
					b.Fatal(err)
				}
				if tbl.NumRows() != benchRows {
					b.Fatalf("%d rows", tbl.NumRows())
				}
				tbl.Release()
				fh.Close()
			}
			b.ReportMetric(float64(benchRows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
		}
	}
	b.Run("arrow-pqarrow/parallel", arrowRead(true))
	b.Run("arrow-pqarrow/serial", arrowRead(false))

	b.Run("peak-rss", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			start, peak, err := peakRSSOfRead(path)
			if err != nil {
				b.Skip(err)
			}
			b.ReportMetric(float64(peak)/1024, "peak-RSS-MB")
			b.ReportMetric(float64(peak)*1024/frameBytes, "peak-RSS/frame")
			b.ReportMetric(float64(start)/1024, "start-RSS-MB")
		}
	})
}

// peakRSSOfRead runs this test binary as a child that reads path and
// reports its resident set size before the read and its peak, in KiB.
func peakRSSOfRead(path string) (start, peak int64, err error) {
	exe, err := os.Executable()
	if err != nil {
		return 0, 0, err
	}
	cmd := exec.Command(exe, "-test.run=^TestPeakRSSDriver$", "-test.v")
	cmd.Env = append(os.Environ(), "TRAFFIC_RSS_FILE="+path)
	out, err := cmd.CombinedOutput()
	if err != nil {
		return 0, 0, fmt.Errorf("driver: %w: %s", err, out)
	}
	for _, line := range strings.Split(string(out), "\n") {
		if _, v, ok := strings.Cut(line, "rss-kib="); ok {
			if _, err := fmt.Sscanf(v, "%d peak-rss-kib=%d", &start, &peak); err != nil {
				return 0, 0, fmt.Errorf("driver output %q: %w", line, err)
			}
			return start, peak, nil
		}
	}
	return 0, 0, fmt.Errorf("driver printed no peak RSS: %s", out)
}

// TestPeakRSSDriver is the child of the peak-rss benchmark: it reads the
// file named by TRAFFIC_RSS_FILE and prints VmHWM. Skipped otherwise.
func TestPeakRSSDriver(t *testing.T) {
	path := os.Getenv("TRAFFIC_RSS_FILE")
	if path == "" {
		t.Skip("only run as the peak-rss benchmark's child process")
	}
	start, err := procStatus("VmRSS:")
	if err != nil {
		t.Skip(err)
	}
	f, err := Read(path, Options{Features: benchFeatures()})
	if err != nil {
		t.Fatal(err)
	}
	peak, err := procStatus("VmHWM:")
	if err != nil {
		t.Skip(err)
	}
	fmt.Printf("rss-kib=%d peak-rss-kib=%d\n", start, peak)
	runtime.KeepAlive(f)
}

// procStatus reads a size field in KiB of the process status (Linux
// proc(5): VmRSS resident set size, VmHWM its peak).
func procStatus(field string) (int64, error) {
	fh, err := os.Open("/proc/self/status")
	if err != nil {
		return 0, err
	}
	defer fh.Close()
	sc := bufio.NewScanner(fh)
	for sc.Scan() {
		if v, ok := strings.CutPrefix(sc.Text(), field); ok {
			return strconv.ParseInt(strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(v), "kB")), 10, 64)
		}
	}
	return 0, fmt.Errorf("no %s in /proc/self/status", field)
}
