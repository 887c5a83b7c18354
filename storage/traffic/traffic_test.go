package traffic

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/parquet/compress"

	"splitledger/importance/frame"
)

// sample is an invented traffic sample with every column type the reader
// accepts, and the values the frame must hold for it.
type sample struct {
	cols []column
	// want holds the expected frame column per model feature.
	want   map[string][]float64
	label  []float64
	weight []float64
	group  []int64
	rows   int
}

var policyCodes = map[string]int{"flexible": 0, "moderate": 1, "strict": 2}

// modelFeatures are the feature names of the invented sample, in model order.
var modelFeatures = []string{"nightly_price", "photo_count", "review_stars", "host_tier", "distance_band", "instant_book", "response_hours", "cancellation_policy"}

// makeSample invents rows rows (seeded); queries hold 1 to 12 rows each.
func makeSample(rows int, seed uint64) sample {
	rng := rand.New(rand.NewPCG(seed, 1))
	price := make([]float64, rows)
	priceOK := make([]bool, rows)
	photos := make([]int64, rows)
	stars := make([]int32, rows)
	tier := make([]int8, rows)
	band := make([]int16, rows)
	instant := make([]bool, rows)
	instantOK := make([]bool, rows)
	hours := make([]float32, rows)
	policy := make([]string, rows)
	policyOK := make([]bool, rows)
	query := make([]int64, rows)
	booked := make([]int32, rows)
	weight := make([]float64, rows)

	s := sample{rows: rows, want: map[string][]float64{}}
	q, left := int64(1000), 0
	policies := []string{"flexible", "moderate", "strict", "non_refundable"} // the last is unseen by the model
	for i := 0; i < rows; i++ {
		if left == 0 {
			q += 1 + int64(rng.IntN(5))
			left = 1 + rng.IntN(12)
		}
		left--
		query[i] = q
		price[i] = math.Round(rng.NormFloat64()*4000)/100 + 120
		priceOK[i] = rng.IntN(10) != 0
		if i%97 == 5 {
			price[i] = math.NaN() // a stored NaN, not a null
		}
		photos[i] = int64(i) // doubles as a row id in the sampling tests
		stars[i] = int32(rng.IntN(5) + 1)
		tier[i] = int8(rng.IntN(256) - 128)
		band[i] = int16(rng.IntN(60000) - 30000)
		instant[i] = rng.IntN(2) == 1
		instantOK[i] = rng.IntN(7) != 0
		hours[i] = float32(rng.ExpFloat64() * 5)
		policy[i] = policies[rng.IntN(len(policies))]
		policyOK[i] = rng.IntN(9) != 0
		booked[i] = int32(rng.IntN(2))
		weight[i] = 0.5 + rng.Float64()
	}
	s.cols = []column{
		{name: "nightly_price", values: price, valid: priceOK},
		{name: "photo_count", values: photos},
		{name: "review_stars", values: stars},
		{name: "host_tier", values: tier},
		{name: "distance_band", values: band},
		{name: "instant_book", values: instant, valid: instantOK},
		{name: "response_hours", values: hours},
		{name: "cancellation_policy", values: policy, valid: policyOK},
		{name: "query_id", values: query},
		{name: "booked", values: booked},
		{name: "sample_weight", values: weight, required: true},
	}
	s.want["nightly_price"] = nullsToNaN(price, priceOK)
	s.want["photo_count"] = convert(photos)
	s.want["review_stars"] = convert(stars)
	s.want["host_tier"] = convert(tier)
	s.want["distance_band"] = convert(band)
	inst := make([]float64, rows)
	pol := make([]float64, rows)
	for i := range inst {
		switch {
		case !instantOK[i]:
			inst[i] = math.NaN()
		case instant[i]:
			inst[i] = 1
		}
		code, seen := policyCodes[policy[i]]
		if policyOK[i] && seen {
			pol[i] = float64(code)
		} else {
			pol[i] = math.NaN()
		}
	}
	s.want["instant_book"] = inst
	s.want["response_hours"] = convert(hours)
	s.want["cancellation_policy"] = pol
	s.label = convert(booked)
	s.weight = weight
	s.group = query
	return s
}

func convert[T int8 | int16 | int32 | int64 | float32](v []T) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

func sampleOptions() Options {
	return Options{
		Features:   modelFeatures,
		Categories: map[string]map[string]int{"cancellation_policy": policyCodes},
		Label:      "booked",
		Group:      "query_id",
		Weight:     "sample_weight",
	}
}

// sameValue is exact equality where a NaN matches only a NaN.
func sameValue(a, b float64) bool {
	return a == b || (a != a && b != b)
}

// checkColumn compares got with want value for value.
func checkColumn(t *testing.T, name string, got, want []float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d rows, want %d", name, len(got), len(want))
	}
	for i := range want {
		if !sameValue(got[i], want[i]) {
			t.Fatalf("%s row %d: got %v, want %v", name, i, got[i], want[i])
		}
	}
}

// checkFrame compares a frame with the sample rows listed in rows (nil:
// all rows in order).
func checkFrame(t *testing.T, f *frame.Frame, s sample, rows []int) {
	t.Helper()
	if err := f.Validate(); err != nil {
		t.Fatal(err)
	}
	pick := func(v []float64) []float64 {
		if rows == nil {
			return v
		}
		out := make([]float64, len(rows))
		for k, r := range rows {
			out[k] = v[r]
		}
		return out
	}
	for j, name := range f.Names {
		want := pick(s.want[name])
		checkColumn(t, name, f.Columns[j], want)
		if f.Missing[j] != countNaN(want) {
			t.Errorf("%s: Missing = %d, want %d", name, f.Missing[j], countNaN(want))
		}
	}
	if f.Label != nil {
		checkColumn(t, "label", f.Label, pick(s.label))
	}
	if f.Weight != nil {
		checkColumn(t, "weight", f.Weight, pick(s.weight))
	}
	if f.Group != nil {
		for k := range f.Group {
			r := k
			if rows != nil {
				r = rows[k]
			}
			if f.Group[k] != s.group[r] {
				t.Fatalf("group row %d: got %d, want %d", k, f.Group[k], s.group[r])
			}
		}
	}
}

// TestReadRoundTrip: files written by Apache arrow-go v18.8.0 (an
// independent Parquet writer) must read back value for value, nulls as NaN,
// for every codec, both data page versions, dictionary and plain encoding,
// one or several row groups and pages.
func TestReadRoundTrip(t *testing.T) {
	s := makeSample(500, 7)
	layouts := []struct {
		name string
		lay  layout
	}{
		{"snappy-v1-dictionary", layout{codec: compress.Codecs.Snappy}},
		{"snappy-v2-plain-rowgroups", layout{codec: compress.Codecs.Snappy, pageV2: true, noDictionary: true, rowGroupRows: 128}},
		{"zstd-v2-dictionary-pages", layout{codec: compress.Codecs.Zstd, pageV2: true, rowGroupRows: 97, pageBytes: 256}},
		{"gzip-v1-plain-pages", layout{codec: compress.Codecs.Gzip, noDictionary: true, pageBytes: 200, rowGroupRows: 300}},
		{"none-v1-plain", layout{codec: compress.Codecs.Uncompressed, noDictionary: true}},
		{"none-v2-dictionary-rowgroups", layout{codec: compress.Codecs.Uncompressed, pageV2: true, rowGroupRows: 50}},
		{"brotli-v1-dictionary", layout{codec: compress.Codecs.Brotli, rowGroupRows: 250}},
	}
	for _, tc := range layouts {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "traffic.parquet")
			writeParquet(t, path, s.cols, tc.lay)
			got := inspectLayout(t, path)
			wantGroups := 1
			if tc.lay.rowGroupRows > 0 {
				wantGroups = (s.rows + int(tc.lay.rowGroupRows) - 1) / int(tc.lay.rowGroupRows)
			}
			if got.rowGroups != wantGroups || got.dictionary == tc.lay.noDictionary || got.pageV2 != tc.lay.pageV2 || got.pageV1 == tc.lay.pageV2 || (tc.lay.pageBytes > 0) != (got.maxPages > 1) {
				t.Fatalf("the writer laid out %+v, not what the case names", got)
			}
			f, err := Read(path, sampleOptions())
			if err != nil {
				t.Fatal(err)
			}
			checkFrame(t, f, s, nil)
			if f.Rows != s.rows || f.TotalRows != int64(s.rows) || f.SampleFraction != 1 {
				t.Errorf("Rows %d TotalRows %d SampleFraction %v, want %d %d 1", f.Rows, f.TotalRows, f.SampleFraction, s.rows, s.rows)
			}
			for j, a := range f.Absent {
				if a {
					t.Errorf("feature %s marked absent", f.Names[j])
				}
			}
			if f.Source != path {
				t.Errorf("Source = %q, want %q", f.Source, path)
			}
		})
	}
}

// TestReadWorkers: the decoded frame does not depend on the worker count.
func TestReadWorkers(t *testing.T) {
	s := makeSample(400, 8)
	path := filepath.Join(t.TempDir(), "traffic.parquet")
	writeParquet(t, path, s.cols, layout{codec: compress.Codecs.Snappy, rowGroupRows: 64})
	for _, w := range []int{1, 2, 5} {
		t.Run(fmt.Sprint("workers-", w), func(t *testing.T) {
			f, err := read(path, sampleOptions(), w)
			if err != nil {
				t.Fatal(err)
			}
			checkFrame(t, f, s, nil)
		})
	}
}

// TestReadRequiredColumns: non-nullable columns have no definition levels.
func TestReadRequiredColumns(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	x := make([]float64, 300)
	k := make([]int64, 300)
	for i := range x {
		x[i] = rng.NormFloat64()
		k[i] = int64(rng.IntN(40))
	}
	for _, lay := range []layout{{codec: compress.Codecs.Snappy}, {codec: compress.Codecs.Zstd, pageV2: true, noDictionary: true, pageBytes: 128}} {
		t.Run(fmt.Sprintf("v2=%v", lay.pageV2), func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "r.parquet")
			writeParquet(t, path, []column{{name: "x", values: x, required: true}, {name: "k", values: k, required: true}}, lay)
			f, err := Read(path, Options{Features: []string{"k", "x"}})
			if err != nil {
				t.Fatal(err)
			}
			checkColumn(t, "x", f.Columns[1], x)
			checkColumn(t, "k", f.Columns[0], convert(k))
		})
	}
}

// TestReadPartFiles: a directory of Hive-style partition folders reads
// every *.parquet file in lexical order, whatever the column order of each
// file; hidden and underscore entries are skipped; a glob gives the same.
func TestReadPartFiles(t *testing.T) {
	dir := t.TempDir()
	parts := []struct {
		path string
		rows int
		seed uint64
		lay  layout
	}{
		// Written out of order on purpose: the reader sorts the paths.
		{"dt=2026-11-02/part-0.parquet", 120, 12, layout{codec: compress.Codecs.Zstd, pageV2: true}},
		{"dt=2026-11-01/part-1.parquet", 80, 11, layout{codec: compress.Codecs.Gzip, rowGroupRows: 30}},
		{"dt=2026-11-01/part-0.parquet", 150, 10, layout{codec: compress.Codecs.Snappy}},
	}
	samples := map[string]sample{}
	for i, p := range parts {
		s := makeSample(p.rows, p.seed)
		cols := s.cols
		if i == 1 { // another column order
			cols = append([]column(nil), s.cols...)
			for a, b := 0, len(cols)-1; a < b; a, b = a+1, b-1 {
				cols[a], cols[b] = cols[b], cols[a]
			}
		}
		writeParquet(t, filepath.Join(dir, p.path), cols, p.lay)
		samples[p.path] = s
	}
	// Entries the reader must skip.
	os.WriteFile(filepath.Join(dir, "dt=2026-11-01", "_SUCCESS"), nil, 0o644)
	os.WriteFile(filepath.Join(dir, "dt=2026-11-01", ".part-0.parquet.crc"), []byte("x"), 0o644)
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("not data"), 0o644)
	os.MkdirAll(filepath.Join(dir, "_temporary"), 0o755)
	os.WriteFile(filepath.Join(dir, "_temporary", "part-9.parquet"), []byte("partial"), 0o644)

	order := []string{"dt=2026-11-01/part-0.parquet", "dt=2026-11-01/part-1.parquet", "dt=2026-11-02/part-0.parquet"}
	var want sample
	want.want = map[string][]float64{}
	for _, p := range order {
		s := samples[p]
		for _, name := range modelFeatures {
			want.want[name] = append(want.want[name], s.want[name]...)
		}
		want.label = append(want.label, s.label...)
		want.weight = append(want.weight, s.weight...)
		want.group = append(want.group, s.group...)
		want.rows += s.rows
	}
	for _, tc := range []struct {
		name, path string
		files      int
	}{
		{"directory", dir, 3},
		{"glob", filepath.Join(dir, "dt=*", "part-*.parquet"), 3},
		{"glob-of-folders", filepath.Join(dir, "dt=2026-11-0[12]"), 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := Read(tc.path, sampleOptions())
			if err != nil {
				t.Fatal(err)
			}
			checkFrame(t, f, want, nil)
			if f.TotalRows != int64(want.rows) {
				t.Errorf("TotalRows = %d, want %d", f.TotalRows, want.rows)
			}
			if !strings.Contains(f.Source, fmt.Sprintf("(%d files)", tc.files)) {
				t.Errorf("Source = %q", f.Source)
			}
		})
	}
}

// TestReadStringGroups: string query ids get codes in order of first
// appearance across files and row groups.
func TestReadStringGroups(t *testing.T) {
	ids := []string{"q-b", "q-b", "q-a", "q-c", "q-a", "q-b", "q-d", "q-d", "q-c", "q-e"}
	want := []int64{0, 0, 1, 2, 1, 0, 3, 3, 2, 4}
	x := make([]float64, len(ids))
	for i := range x {
		x[i] = float64(i)
	}
	for _, lay := range []layout{{codec: compress.Codecs.Snappy, rowGroupRows: 3}, {codec: compress.Codecs.Uncompressed, noDictionary: true, pageV2: true, rowGroupRows: 4}} {
		t.Run(fmt.Sprintf("dictionary=%v", !lay.noDictionary), func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "g.parquet")
			writeParquet(t, path, []column{{name: "x", values: x}, {name: "query", values: ids}}, lay)
			f, err := Read(path, Options{Features: []string{"x"}, Group: "query"})
			if err != nil {
				t.Fatal(err)
			}
			for i := range want {
				if f.Group[i] != want[i] {
					t.Fatalf("group codes %v, want %v", f.Group, want)
				}
			}
		})
	}
}

// TestReadRenameAndAbsent: a renamed feature reads from its traffic column;
// an absent feature, when allowed, is all NaN and marked.
func TestReadRenameAndAbsent(t *testing.T) {
	s := makeSample(120, 21)
	path := filepath.Join(t.TempDir(), "t.parquet")
	writeParquet(t, path, s.cols, layout{codec: compress.Codecs.Snappy})
	opts := Options{
		Features:    []string{"price", "photo_count", "vision_quality"},
		Rename:      map[string]string{"price": "nightly_price", "unused": "x"},
		AllowAbsent: true,
	}
	f, err := Read(path, opts)
	if err != nil {
		t.Fatal(err)
	}
	checkColumn(t, "price", f.Columns[0], s.want["nightly_price"])
	checkColumn(t, "photo_count", f.Columns[1], s.want["photo_count"])
	if !f.Absent[2] || f.Absent[0] || f.Absent[1] {
		t.Errorf("Absent = %v, want [false false true]", f.Absent)
	}
	if f.Missing[2] != 120 || countNaN(f.Columns[2]) != 120 {
		t.Errorf("absent feature: Missing %d, NaN %d, want 120", f.Missing[2], countNaN(f.Columns[2]))
	}
	if f.Names[0] != "price" {
		t.Errorf("Names[0] = %q, want the model name", f.Names[0])
	}
}

// TestReadDoesNotMutateOptions: Read copies what it keeps.
func TestReadDoesNotMutateOptions(t *testing.T) {
	s := makeSample(50, 4)
	path := filepath.Join(t.TempDir(), "t.parquet")
	writeParquet(t, path, s.cols, layout{codec: compress.Codecs.Snappy})
	opts := sampleOptions()
	opts.Features = append([]string(nil), modelFeatures...)
	f, err := Read(path, opts)
	if err != nil {
		t.Fatal(err)
	}
	f.Names[0] = "changed"
	if opts.Features[0] != modelFeatures[0] {
		t.Error("frame names share memory with Options.Features")
	}
}

func TestReadOptionsErrors(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.parquet")
	writeParquet(t, path, makeSample(10, 1).cols, layout{codec: compress.Codecs.Snappy})
	for _, tc := range []struct {
		name string
		opts Options
	}{
		{"no-features", Options{}},
		{"twice", Options{Features: []string{"photo_count", "photo_count"}}},
		{"negative-head", Options{Features: []string{"photo_count"}, Head: -1}},
		{"negative-max-rows", Options{Features: []string{"photo_count"}, MaxRows: -2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Read(path, tc.opts); !errors.Is(err, ErrBadOptions) {
				t.Fatalf("err = %v, want ErrBadOptions", err)
			}
		})
	}
}
