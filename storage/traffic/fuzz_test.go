package traffic

import (
	"flag"
	"os"
	"path/filepath"
	"testing"

	"github.com/apache/arrow-go/v18/parquet/compress"
)

var update = flag.Bool("update", false, "rewrite the fuzz seed files in testdata/traffic")

// seedDir holds small Parquet files written once by arrow-go v18.8.0 and
// committed, so that the fuzz seed corpus needs no writer at test time.
var seedDir = filepath.Join("..", "..", "testdata", "traffic")

// seedFiles are the fuzz seeds: small, varied layouts of the invented
// sample.
var seedFiles = []struct {
	name string
	rows int
	lay  layout
}{
	{"seed-snappy-v1-dictionary.parquet", 24, layout{codec: compress.Codecs.Snappy, rowGroupRows: 10}},
	{"seed-zstd-v2-plain.parquet", 20, layout{codec: compress.Codecs.Zstd, pageV2: true, noDictionary: true}},
	{"seed-gzip-v1-pages.parquet", 16, layout{codec: compress.Codecs.Gzip, pageBytes: 64, noDictionary: true}},
	{"seed-none-v2-dictionary.parquet", 12, layout{codec: compress.Codecs.Uncompressed, pageV2: true}},
}

// TestWriteFuzzSeeds rewrites the seed files with -update; otherwise it
// checks that they are there and read back to the invented sample.
func TestWriteFuzzSeeds(t *testing.T) {
	for i, sf := range seedFiles {
		path := filepath.Join(seedDir, sf.name)
		s := makeSample(sf.rows, uint64(100+i))
		if *update {
			writeParquet(t, path, s.cols, sf.lay)
		}
		f, err := Read(path, sampleOptions())
		if err != nil {
			t.Fatalf("seed %s: %v (regenerate with go test -run TestWriteFuzzSeeds -update)", sf.name, err)
		}
		checkFrame(t, f, s, nil)
	}
}

// FuzzRead: any bytes must give a frame or an error, never a panic; a
// frame must be consistent.
func FuzzRead(f *testing.F) {
	for _, sf := range seedFiles {
		data, err := os.ReadFile(filepath.Join(seedDir, sf.name))
		if err != nil {
			f.Fatalf("fuzz seed missing: %v", err)
		}
		f.Add(data, uint8(0))
		f.Add(data, uint8(1))
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		path := filepath.Join(dir, "fuzz.parquet")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		opts := sampleOptions()
		switch mode % 4 {
		case 1:
			opts.MaxRows, opts.Seed = 7, uint64(mode)
		case 2:
			opts.Head, opts.Group = 5, ""
		case 3:
			opts.AllowAbsent, opts.Features = true, []string{"nightly_price", "not_there"}
		}
		fr, err := read(path, opts, 1)
		if err != nil {
			return
		}
		if err := fr.Validate(); err != nil {
			t.Fatalf("inconsistent frame: %v", err)
		}
		if fr.Rows == 0 || int64(fr.Rows) > fr.TotalRows {
			t.Fatalf("Rows %d, TotalRows %d", fr.Rows, fr.TotalRows)
		}
	})
}
