package traffic

import (
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/parquet/compress"
	pqformat "github.com/parquet-go/parquet-go/format"
)

// checkError asserts a one-line error that wraps want and names every
// string in names (file, column, ...).
func checkError(t *testing.T, err error, want error, names ...string) {
	t.Helper()
	if err == nil {
		t.Fatalf("no error, want %v", want)
	}
	if !errors.Is(err, want) {
		t.Fatalf("error %q does not wrap %q", err, want)
	}
	msg := err.Error()
	t.Logf("error: %s", msg)
	if strings.Contains(msg, "\n") {
		t.Errorf("error is not one line: %q", msg)
	}
	for _, n := range names {
		if !strings.Contains(msg, n) {
			t.Errorf("error %q does not name %q", msg, n)
		}
	}
}

func smallColumns() []column {
	x := make([]float64, 100)
	k := make([]int64, 100)
	rng := rand.New(rand.NewPCG(5, 5))
	for i := range x {
		x[i] = rng.NormFloat64()
		k[i] = int64(i / 10)
	}
	return []column{{name: "x", values: x}, {name: "k", values: k}}
}

func TestReadFileErrors(t *testing.T) {
	dir := t.TempDir()
	good := encodeParquet(t, smallColumns(), layout{codec: compress.Codecs.Snappy})
	write := func(name string, data []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	opts := Options{Features: []string{"x"}}
	for _, tc := range []struct {
		name string
		path string
		want error
	}{
		{"not-parquet", write("notes.parquet", []byte("nightly_price,photo_count\n1,2\n")), ErrNotParquet},
		{"empty-file", write("empty.parquet", nil), ErrNotParquet},
		{"truncated-footer", write("cut.parquet", good[:len(good)-20]), ErrTruncated},
		{"only-header", write("head.parquet", good[:4]), ErrTruncated},
		{"footer-garbage", write("garbage.parquet", append(append([]byte{}, good[:len(good)-8]...), 0xff, 0xff, 0xff, 0x7f, 'P', 'A', 'R', '1')), ErrDamaged},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(tc.path, opts)
			checkError(t, err, tc.want, tc.path)
		})
	}
}

// corrupt returns a copy of data with bytes [at, at+len(with)) replaced.
func corrupt(data []byte, at int64, with ...byte) []byte {
	out := append([]byte(nil), data...)
	copy(out[at:], with)
	return out
}

func repeatByte(b byte, n int) []byte {
	out := make([]byte, n)
	for i := range out {
		out[i] = b
	}
	return out
}

// firstDataPage returns the first data page of column c in row group 0.
func firstDataPage(t *testing.T, path string, c int) pageSpan {
	t.Helper()
	for _, p := range walkPages(t, path) {
		if p.rowGroup == 0 && p.column == c && p.header.Type != pqformat.DictionaryPage {
			return p
		}
	}
	t.Fatalf("%s: no data page for column %d", path, c)
	return pageSpan{}
}

// zigzagVarint is the thrift compact encoding of an i32.
func zigzagVarint(v int32) []byte {
	u := uint32((v << 1) ^ (v >> 31))
	var out []byte
	for u >= 0x80 {
		out = append(out, byte(u)|0x80)
		u >>= 7
	}
	return append(out, byte(u))
}

// TestReadDamagedPages: bytes overwritten inside a data page must give an
// error, never fewer rows or a silent gap. Each case names the byte range
// and the check that catches it.
func TestReadDamagedPages(t *testing.T) {
	dir := t.TempDir()
	opts := Options{Features: []string{"x", "k"}}
	for _, tc := range []struct {
		name   string
		lay    layout
		cols   func() []column
		damage func(t *testing.T, path string, data []byte) []byte
	}{
		{
			// Inside a snappy block, past its length varint: 0xff is a
			// copy element with a 4-byte offset (snappy
			// format_description.txt, 2.2.3) reaching before the start of
			// the output, which the decompressor refuses.
			name: "snappy-body",
			lay:  layout{codec: compress.Codecs.Snappy, noDictionary: true},
			cols: smallColumns,
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				return corrupt(data, p.bodyStart+4, repeatByte(0xff, 16)...)
			},
		},
		{
			// A v1 page body starts with the 4-byte length of the RLE
			// definition levels (Parquet format spec, Data Pages); a length
			// past the page end fails the level decoder.
			name: "uncompressed-v1-level-length",
			lay:  layout{codec: compress.Codecs.Uncompressed, noDictionary: true},
			cols: smallColumns,
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				return corrupt(data, p.bodyStart, 0xff, 0xff, 0xff, 0x7f)
			},
		},
		{
			// zstd frames start with a magic number (RFC 8878, 3.1.1); the
			// compressed values of a v2 page follow the levels.
			name: "zstd-v2-values",
			lay:  layout{codec: compress.Codecs.Zstd, pageV2: true, noDictionary: true},
			cols: smallColumns,
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				h := p.header.DataPageHeaderV2.V
				at := p.bodyStart + int64(h.DefinitionLevelsByteLength+h.RepetitionLevelsByteLength)
				return corrupt(data, at, repeatByte(0xee, 6)...)
			},
		},
		{
			// The page header claims 90 values where the footer declares
			// 100 rows: the page itself would decode cleanly to 90 values;
			// the check of the page headers against the footer's row count
			// catches it before decoding.
			name: "short-page-count",
			lay:  layout{codec: compress.Codecs.Uncompressed, noDictionary: true},
			cols: func() []column {
				c := smallColumns()
				c[0].required = true
				return c
			},
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				if p.header.DataPageHeader.V.NumValues != 100 {
					t.Fatalf("first page holds %d values, the case needs 100", p.header.DataPageHeader.V.NumValues)
				}
				// Field 1 (i32, compact type 5) of the data page header.
				from := append([]byte{0x15}, zigzagVarint(100)...)
				to := append([]byte{0x15}, zigzagVarint(90)...)
				head := data[p.headerStart:p.bodyStart]
				i := strings.Index(string(head), string(from))
				if i < 0 {
					t.Fatal("num_values field not found in the page header")
				}
				return corrupt(data, p.headerStart+int64(i), to...)
			},
		},
		{
			// A snappy block announcing 4 GiB (a valid varint) where the
			// page header says far less: refused before the decoder sizes a
			// buffer from it.
			name: "snappy-length-claim",
			lay:  layout{codec: compress.Codecs.Snappy, noDictionary: true},
			cols: smallColumns,
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				return corrupt(data, p.bodyStart, 0xff, 0xff, 0xff, 0xff, 0x0f)
			},
		},
		{
			// A zstd frame whose Frame_Content_Size (RFC 8878, 3.1.1.1.4)
			// claims more than the page header's uncompressed size.
			name: "zstd-content-size-claim",
			lay:  layout{codec: compress.Codecs.Zstd, pageV2: true, noDictionary: true},
			cols: smallColumns,
			damage: func(t *testing.T, path string, data []byte) []byte {
				p := firstDataPage(t, path, 0)
				h := p.header.DataPageHeaderV2.V
				at := p.bodyStart + int64(h.DefinitionLevelsByteLength+h.RepetitionLevelsByteLength)
				body := data[at : p.bodyStart+int64(p.header.CompressedPageSize)]
				size, ok := zstdContentSize(body)
				if !ok || size != uint64(p.header.UncompressedPageSize-h.DefinitionLevelsByteLength-h.RepetitionLevelsByteLength) {
					t.Fatalf("frame content size %d (present %v), the case needs the page's", size, ok)
				}
				// Single_Segment with a 1-byte or 2-byte size: set the
				// descriptor to an 8-byte size and shift nothing; the 8
				// bytes then read as a huge size.
				return corrupt(data, at+4, 0xe0, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x7f)
			},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.name+".parquet")
			writeParquet(t, path, tc.cols(), tc.lay)
			data, _ := os.ReadFile(path)
			if err := os.WriteFile(path, tc.damage(t, path, data), 0o644); err != nil {
				t.Fatal(err)
			}
			f, err := Read(path, opts)
			if err == nil {
				t.Fatalf("damaged file read without error: %d rows", f.Rows)
			}
			checkError(t, err, ErrDamaged, path, `"x"`, "row group 0")
		})
	}
}

func TestReadRejectsLZ4Raw(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lz4.parquet")
	writeParquet(t, path, smallColumns(), layout{codec: compress.Codecs.Lz4Raw})
	_, err := Read(path, Options{Features: []string{"k"}})
	checkError(t, err, ErrUnsupportedCodec, path, `"k"`, "LZ4_RAW")
}

func TestReadUnsupportedTypes(t *testing.T) {
	dir := t.TempDir()
	lists := make([][]float64, 4)
	for i := range lists {
		lists[i] = []float64{float64(i), 1}
	}
	four := func(name string, values any) []column {
		return []column{{name: "x", values: []float64{1, 2, 3, 4}}, {name: name, values: values}}
	}
	for _, tc := range []struct {
		name string
		cols []column
		opts Options
		col  string
	}{
		{"list-feature", four("history", lists), Options{Features: []string{"x", "history"}}, `"history"`},
		{"strings-for-numeric-feature", four("policy", []string{"a", "b", "a", "c"}), Options{Features: []string{"x", "policy"}}, `"policy"`},
		{"double-group", four("query", []float64{1, 1, 2, 2}), Options{Features: []string{"x"}, Group: "query"}, `"query"`},
		{"string-label", four("booked", []string{"y", "n", "y", "y"}), Options{Features: []string{"x"}, Label: "booked"}, `"booked"`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.name+".parquet")
			writeParquet(t, path, tc.cols, layout{codec: compress.Codecs.Snappy})
			_, err := Read(path, tc.opts)
			checkError(t, err, ErrUnsupportedType, path, tc.col)
		})
	}
}

func TestReadNoFiles(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "readme.txt"), []byte("no data here"), 0o644)
	os.MkdirAll(filepath.Join(dir, "dt=2026-11-01"), 0o755)
	opts := Options{Features: []string{"x"}}
	for _, tc := range []struct {
		name, path string
	}{
		{"directory", dir},
		{"glob", filepath.Join(dir, "*.parquet")},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(tc.path, opts)
			checkError(t, err, ErrNoFiles, tc.path)
		})
	}
	t.Run("missing-path", func(t *testing.T) {
		p := filepath.Join(dir, "absent.parquet")
		_, err := Read(p, opts)
		if !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), p) {
			t.Fatalf("err = %v, want a not-exist error naming the path", err)
		}
	})
}

func TestReadZeroRows(t *testing.T) {
	dir := t.TempDir()
	cols := []column{{name: "x", values: []float64{}}, {name: "k", values: []int64{}}}
	writeParquet(t, filepath.Join(dir, "part-0.parquet"), cols, layout{codec: compress.Codecs.Snappy})
	writeParquet(t, filepath.Join(dir, "part-1.parquet"), cols, layout{codec: compress.Codecs.Zstd})
	_, err := Read(dir, Options{Features: []string{"x"}})
	checkError(t, err, ErrNoRows, dir)
}

func TestReadNullGroup(t *testing.T) {
	dir := t.TempDir()
	x := []float64{1, 2, 3, 4, 5, 6}
	for _, tc := range []struct {
		name  string
		group column
	}{
		{"int64", column{name: "query", values: []int64{7, 7, 8, 8, 9, 9}, valid: []bool{true, true, true, true, false, true}}},
		{"strings", column{name: "query", values: []string{"a", "a", "b", "b", "c", "c"}, valid: []bool{true, true, true, true, false, true}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.name+".parquet")
			writeParquet(t, path, []column{{name: "x", values: x}, tc.group}, layout{codec: compress.Codecs.Snappy, rowGroupRows: 3})
			for _, opts := range []Options{{Features: []string{"x"}, Group: "query"}, {Features: []string{"x"}, Group: "query", MaxRows: 2}} {
				_, err := Read(path, opts)
				checkError(t, err, ErrNullGroup, path, `"query"`, "row 4")
			}
		})
	}
}

func TestReadSchemaMismatch(t *testing.T) {
	base := smallColumns()
	for _, tc := range []struct {
		name   string
		second []column
		col    string
	}{
		{"missing-column", []column{base[0]}, `"k"`},
		{"other-type", []column{base[0], {name: "k", values: make([]int32, 100)}}, `"k"`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			writeParquet(t, filepath.Join(dir, "part-0.parquet"), base, layout{codec: compress.Codecs.Snappy})
			second := filepath.Join(dir, "part-1.parquet")
			writeParquet(t, second, tc.second, layout{codec: compress.Codecs.Snappy})
			_, err := Read(dir, Options{Features: []string{"x", "k"}})
			checkError(t, err, ErrSchemaMismatch, second, tc.col)
		})
	}
}

// TestReadMissingFeatures: the error lists every missing name with the
// closest traffic columns by edit distance (Levenshtein).
func TestReadMissingFeatures(t *testing.T) {
	s := makeSample(20, 2)
	path := filepath.Join(t.TempDir(), "t.parquet")
	writeParquet(t, path, s.cols, layout{codec: compress.Codecs.Snappy})
	_, err := Read(path, Options{
		Features: []string{"nightly_price", "photo_cuont", "review_star", "vision_quality"},
		Group:    "query",
	})
	checkError(t, err, ErrMissingColumn, path,
		`"photo_cuont" (closest: "photo_count"`,
		`"review_star" (closest: "review_stars"`,
		`"vision_quality"`,
		`group "query" (closest: "query_id"`,
		"(3 model feature(s))")
}

func TestCheckMemory(t *testing.T) {
	if physicalMemory() == 0 {
		t.Skip("memory size unknown on this system: no check")
	}
	if err := checkMemory("t.parquet", 1_000_000, 30, 131072, 2); err != nil {
		t.Errorf("240 MB frame refused: %v", err)
	}
	// A damaged footer can claim any row count: 2^40 rows must be refused
	// before anything is allocated.
	checkError(t, checkMemory("t.parquet", 1<<40, 30, 0, 2), ErrTooLarge, "t.parquet")
	checkError(t, checkMemory("t.parquet", 0, 0, 1<<40, 2), ErrTooLarge, "t.parquet")
}

func TestEditDistance(t *testing.T) {
	for _, tc := range []struct {
		a, b string
		want int
	}{
		{"kitten", "sitting", 3}, // Levenshtein's classic example
		{"", "abc", 3},
		{"abc", "abc", 0},
		{"flaw", "lawn", 2},
		{"prix_nuité", "prix_nuite", 1}, // runes, not bytes
	} {
		t.Run(tc.a+"-"+tc.b, func(t *testing.T) {
			if got := editDistance(tc.a, tc.b); got != tc.want {
				t.Errorf("editDistance(%q, %q) = %d, want %d", tc.a, tc.b, got, tc.want)
			}
		})
	}
}
