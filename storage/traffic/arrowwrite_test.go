package traffic

// Test files are written by an independent Parquet implementation, Apache
// arrow-go v18.8.0 (parquet/pqarrow). It is imported by _test.go files only:
// the reader itself never depends on it.

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet"
	"github.com/apache/arrow-go/v18/parquet/compress"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	pqformat "github.com/parquet-go/parquet-go/format"
)

// column is one column to write. values is a []float64, []float32,
// []int64, []int32, []int16, []int8, []bool, []string or [][]float64 (a
// list column); valid marks non-null rows (nil = no null).
type column struct {
	name   string
	values any
	valid  []bool
	// required writes a non-nullable column (no definition levels).
	required bool
}

// layout is how arrow-go lays the file out.
type layout struct {
	codec        compress.Compression
	pageV2       bool
	rowGroupRows int64 // 0: one row group
	pageBytes    int64 // 0: arrow-go's default data page size
	noDictionary bool
}

func (c column) rows() int {
	switch v := c.values.(type) {
	case []float64:
		return len(v)
	case []float32:
		return len(v)
	case []int64:
		return len(v)
	case []int32:
		return len(v)
	case []int16:
		return len(v)
	case []int8:
		return len(v)
	case []bool:
		return len(v)
	case []string:
		return len(v)
	case [][]float64:
		return len(v)
	}
	panic(fmt.Sprintf("column %q: values of type %T", c.name, c.values))
}

func (c column) arrowType() arrow.DataType {
	switch c.values.(type) {
	case []float64:
		return arrow.PrimitiveTypes.Float64
	case []float32:
		return arrow.PrimitiveTypes.Float32
	case []int64:
		return arrow.PrimitiveTypes.Int64
	case []int32:
		return arrow.PrimitiveTypes.Int32
	case []int16:
		return arrow.PrimitiveTypes.Int16
	case []int8:
		return arrow.PrimitiveTypes.Int8
	case []bool:
		return arrow.FixedWidthTypes.Boolean
	case []string:
		return arrow.BinaryTypes.String
	case [][]float64:
		return arrow.ListOf(arrow.PrimitiveTypes.Float64)
	}
	panic(fmt.Sprintf("column %q: values of type %T", c.name, c.values))
}

func (c column) build(mem memory.Allocator) arrow.Array {
	b := array.NewBuilder(mem, c.arrowType())
	defer b.Release()
	switch v := c.values.(type) {
	case []float64:
		b.(*array.Float64Builder).AppendValues(v, c.valid)
	case []float32:
		b.(*array.Float32Builder).AppendValues(v, c.valid)
	case []int64:
		b.(*array.Int64Builder).AppendValues(v, c.valid)
	case []int32:
		b.(*array.Int32Builder).AppendValues(v, c.valid)
	case []int16:
		b.(*array.Int16Builder).AppendValues(v, c.valid)
	case []int8:
		b.(*array.Int8Builder).AppendValues(v, c.valid)
	case []bool:
		b.(*array.BooleanBuilder).AppendValues(v, c.valid)
	case []string:
		b.(*array.StringBuilder).AppendValues(v, c.valid)
	case [][]float64:
		lb := b.(*array.ListBuilder)
		vb := lb.ValueBuilder().(*array.Float64Builder)
		for i, row := range v {
			if c.valid != nil && !c.valid[i] {
				lb.AppendNull()
				continue
			}
			lb.Append(true)
			vb.AppendValues(row, nil)
		}
	}
	return b.NewArray()
}

// encodeParquet returns the bytes of a Parquet file holding cols.
func encodeParquet(t testing.TB, cols []column, lay layout) []byte {
	t.Helper()
	mem := memory.NewGoAllocator()
	fields := make([]arrow.Field, len(cols))
	arrays := make([]arrow.Array, len(cols))
	rows := -1
	for i, c := range cols {
		fields[i] = arrow.Field{Name: c.name, Type: c.arrowType(), Nullable: !c.required}
		arrays[i] = c.build(mem)
		defer arrays[i].Release()
		if rows >= 0 && c.rows() != rows {
			t.Fatalf("column %q has %d rows, others %d", c.name, c.rows(), rows)
		}
		rows = c.rows()
	}
	schema := arrow.NewSchema(fields, nil)
	rec := array.NewRecordBatch(schema, arrays, int64(max(rows, 0)))
	defer rec.Release()

	props := []parquet.WriterProperty{parquet.WithCompression(lay.codec)}
	if lay.pageV2 {
		props = append(props, parquet.WithDataPageVersion(parquet.DataPageV2))
	}
	if lay.rowGroupRows > 0 {
		props = append(props, parquet.WithMaxRowGroupLength(lay.rowGroupRows))
	}
	if lay.pageBytes > 0 {
		props = append(props, parquet.WithDataPageSize(lay.pageBytes), parquet.WithBatchSize(8))
	}
	if lay.noDictionary {
		props = append(props, parquet.WithDictionaryDefault(false))
	}
	var buf bytes.Buffer
	w, err := pqarrow.NewFileWriter(schema, &buf, parquet.NewWriterProperties(props...), pqarrow.DefaultWriterProps())
	if err != nil {
		t.Fatal(err)
	}
	if rows > 0 {
		if err := w.Write(rec); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// writeParquet writes cols to path (parent folders made as needed).
func writeParquet(t testing.TB, path string, cols []column, lay layout) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, encodeParquet(t, cols, lay), 0o644); err != nil {
		t.Fatal(err)
	}
}

// nullsToNaN returns vals with NaN where valid is false: what the frame must
// hold for a nullable column.
func nullsToNaN(vals []float64, valid []bool) []float64 {
	out := make([]float64, len(vals))
	for i, v := range vals {
		if valid != nil && !valid[i] {
			out[i] = math.NaN()
		} else {
			out[i] = v
		}
	}
	return out
}

// fileLayout is what a written file's footer says about its layout.
type fileLayout struct {
	rowGroups  int
	maxPages   int  // most data pages in one column chunk
	dictionary bool // some data page is dictionary encoded
	pageV2     bool // some data page is v2
	pageV1     bool // some data page is v1
}

// inspectLayout walks the page headers of a written file, so that a test
// can prove it covered the layout it names. (arrow-go's footer page
// statistics call every data page DATA_PAGE, so they cannot tell v1 from v2.)
func inspectLayout(t testing.TB, path string) fileLayout {
	t.Helper()
	var l fileLayout
	pages := map[[2]int]int{}
	for _, p := range walkPages(t, path) {
		l.rowGroups = max(l.rowGroups, p.rowGroup+1)
		var enc pqformat.Encoding
		switch p.header.Type {
		case pqformat.DataPage:
			l.pageV1 = true
			enc = p.header.DataPageHeader.V.Encoding
		case pqformat.DataPageV2:
			l.pageV2 = true
			enc = p.header.DataPageHeaderV2.V.Encoding
		default:
			continue
		}
		if enc == pqformat.RLEDictionary || enc == pqformat.PlainDictionary {
			l.dictionary = true
		}
		key := [2]int{p.rowGroup, p.column}
		pages[key]++
		l.maxPages = max(l.maxPages, pages[key])
	}
	return l
}

// pageSpan locates one page of a written file.
type pageSpan struct {
	rowGroup, column int
	header           pqformat.PageHeader
	headerStart      int64 // offset of the thrift page header
	bodyStart        int64 // offset of the page body (levels and values)
}

// walkPages lists every page of every column chunk by decoding the thrift
// page headers one after the other (Parquet format spec: a column chunk is
// a sequence of PageHeader + body).
func walkPages(t testing.TB, path string) []pageSpan {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	f, err := openParquet(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var spans []pageSpan
	var proto thrift.CompactProtocol
	for g, rg := range f.meta.RowGroups {
		for c, cc := range rg.Columns {
			md := cc.MetaData
			start := md.DataPageOffset
			if md.DictionaryPageOffset > 0 && md.DictionaryPageOffset < start {
				start = md.DictionaryPageOffset
			}
			end := start + md.TotalCompressedSize
			for off := start; off < end; {
				r := proto.NewReaderFromBytes(data[off:end])
				var h pqformat.PageHeader
				if err := thrift.NewDecoder(r).Decode(&h); err != nil {
					t.Fatalf("row group %d column %d offset %d: %v", g, c, off, err)
				}
				body := off + int64(r.BytesRead())
				spans = append(spans, pageSpan{rowGroup: g, column: c, header: h, headerStart: off, bodyStart: body})
				off = body + int64(h.CompressedPageSize)
			}
		}
	}
	return spans
}
