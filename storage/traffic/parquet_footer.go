package traffic

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"os"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
)

// magic opens and closes every Parquet file (format spec: "PAR1").
var magic = []byte("PAR1")

// readBufferSize is the buffered read size of a page stream. Pages are read
// with one ReadAt each when they are larger; this only batches small pages.
const readBufferSize = 64 << 10

// openFile is an open Parquet file with its parsed footer.
type openFile struct {
	path string
	size int64
	os   *os.File
	pq   *parquet.File
	meta *format.FileMetaData
}

func (f *openFile) Close() error { return f.os.Close() }

// openParquet checks the magic bytes, then parses the footer. Page indexes
// and bloom filters are not read: the reader scans whole column chunks.
func openParquet(path string) (*openFile, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("traffic: %w", err)
	}
	info, err := fh.Stat()
	if err != nil {
		fh.Close()
		return nil, fmt.Errorf("traffic: %w", err)
	}
	if err := checkMagic(fh, info.Size()); err != nil {
		fh.Close()
		return nil, fmt.Errorf("traffic: %s: %w", path, err)
	}
	pq, err := openFooter(fh, info.Size())
	if err != nil {
		fh.Close()
		return nil, fmt.Errorf("traffic: %s: %w", path, err)
	}
	return &openFile{path: path, size: info.Size(), os: fh, pq: pq, meta: pq.Metadata()}, nil
}

func checkMagic(r io.ReaderAt, size int64) error {
	head := make([]byte, 4)
	if n, _ := r.ReadAt(head, 0); n < 4 || !bytes.Equal(head, magic) {
		if bytes.Equal(head[:n], magic[:n]) && n > 0 && n < 4 {
			return ErrTruncated
		}
		if n == 4 && bytes.Equal(head, []byte("PARE")) {
			return fmt.Errorf("%w: encrypted Parquet file", ErrUnsupportedType)
		}
		return ErrNotParquet
	}
	if size < 12 {
		return ErrTruncated
	}
	tail := make([]byte, 8)
	if n, _ := r.ReadAt(tail, size-8); n < 8 || !bytes.Equal(tail[4:], magic) {
		return ErrTruncated
	}
	// The footer length precedes the closing magic; it must fit between the
	// two magic strings (checked here so that no buffer is sized from it).
	if footer := int64(binary.LittleEndian.Uint32(tail)); footer > size-12 {
		return fmt.Errorf("%w: footer length %d in a file of %d bytes", ErrDamaged, footer, size)
	}
	return nil
}

// openFooter parses the footer, turning a panic inside the Parquet library
// (seen on malformed schemas) into ErrDamaged.
func openFooter(r io.ReaderAt, size int64) (pq *parquet.File, err error) {
	defer func() {
		if p := recover(); p != nil {
			pq, err = nil, fmt.Errorf("%w: footer: %v", ErrDamaged, p)
		}
	}()
	pq, err = parquet.OpenFile(r, size,
		parquet.SkipPageIndex(true),
		parquet.SkipBloomFilters(true),
		parquet.ReadBufferSize(readBufferSize),
	)
	if err != nil {
		return nil, fmt.Errorf("%w: footer: %w", ErrDamaged, err)
	}
	return pq, nil
}

// sources is what the footers say about every file.
type sources struct {
	files     []fileInfo
	absent    []bool // per target: feature absent from the traffic
	totalRows int64
}

// maxRowGroup returns the rows of the largest row group.
func (s *sources) maxRowGroup() int64 {
	var m int64
	for _, f := range s.files {
		for _, n := range f.rowGroups {
			m = max(m, n)
		}
	}
	return m
}

// fileInfo is one file's layout as its footer states it.
type fileInfo struct {
	path      string
	rowGroups []int64 // rows per row group
	columns   []schemaColumn
}

// scanSources reads every footer once, before any data: it resolves the
// targets against the first file's schema, checks that every other file
// agrees, and checks every needed column chunk (codec, value count) so that
// a bad part file fails before any work is spent.
func scanSources(paths []string, targets []target, allowAbsent bool) (*sources, error) {
	src := &sources{files: make([]fileInfo, len(paths)), absent: make([]bool, len(targets))}
	var firstKinds []kind
	for i, path := range paths {
		f, err := openParquet(path)
		if err != nil {
			return nil, err
		}
		info, err := scanFile(f, targets, src.absent, &firstKinds, i == 0, allowAbsent, paths[0])
		f.Close()
		if err != nil {
			return nil, err
		}
		src.files[i] = info
		for _, n := range info.rowGroups {
			src.totalRows += n
		}
	}
	return src, nil
}

func scanFile(f *openFile, targets []target, absent []bool, firstKinds *[]kind, first, allowAbsent bool, firstPath string) (fileInfo, error) {
	cols, order, leaves, err := readSchema(f.meta.Schema)
	if err != nil {
		return fileInfo{}, fmt.Errorf("traffic: %s: %w", f.path, err)
	}
	info := fileInfo{path: f.path, columns: make([]schemaColumn, len(targets))}
	if first {
		var missing []*target
		for i := range targets {
			t := &targets[i]
			if _, ok := cols[t.column]; ok {
				continue
			}
			if t.role == roleFeature && allowAbsent {
				absent[i] = true
				continue
			}
			missing = append(missing, t)
		}
		if len(missing) > 0 {
			return fileInfo{}, missingColumnsError(f.path, missing, order)
		}
		*firstKinds = make([]kind, len(targets))
	}
	for i := range targets {
		if absent[i] {
			continue
		}
		t := &targets[i]
		c, ok := cols[t.column]
		if !ok {
			return fileInfo{}, fmt.Errorf("traffic: %s: %s is missing but %s has it: %w", f.path, t.describe(), firstPath, ErrSchemaMismatch)
		}
		if c.problem != "" {
			return fileInfo{}, fmt.Errorf("traffic: %s: %s: %s: %w", f.path, t.describe(), c.problem, ErrUnsupportedType)
		}
		if why := t.accepts(c.kind); why != "" {
			return fileInfo{}, fmt.Errorf("traffic: %s: %s: %s: %w", f.path, t.describe(), why, ErrUnsupportedType)
		}
		if first {
			(*firstKinds)[i] = c.kind
		} else if k := (*firstKinds)[i]; k != c.kind {
			return fileInfo{}, fmt.Errorf("traffic: %s: %s is %s but %s has %s: %w", f.path, t.describe(), c.kind, firstPath, k, ErrSchemaMismatch)
		}
		info.columns[i] = c
	}
	if got := len(f.pq.RowGroups()); got != len(f.meta.RowGroups) {
		return fileInfo{}, fmt.Errorf("traffic: %s: %w: %d row groups opened, footer lists %d", f.path, ErrDamaged, got, len(f.meta.RowGroups))
	}
	var total int64
	info.rowGroups = make([]int64, len(f.meta.RowGroups))
	for g := range f.meta.RowGroups {
		rg := &f.meta.RowGroups[g]
		if rg.NumRows < 0 {
			return fileInfo{}, fmt.Errorf("traffic: %s: row group %d: %w: %d rows", f.path, g, ErrDamaged, rg.NumRows)
		}
		if len(rg.Columns) != leaves {
			return fileInfo{}, fmt.Errorf("traffic: %s: row group %d: %w: %d column chunks for %d schema leaves", f.path, g, ErrDamaged, len(rg.Columns), leaves)
		}
		info.rowGroups[g] = rg.NumRows
		total += rg.NumRows
		for i := range targets {
			if absent[i] {
				continue
			}
			if err := checkChunk(&rg.Columns[info.columns[i].leaf], info.columns[i], rg.NumRows); err != nil {
				return fileInfo{}, fmt.Errorf("traffic: %s: %s: row group %d: %w", f.path, targets[i].describe(), g, err)
			}
		}
	}
	if total != f.meta.NumRows {
		return fileInfo{}, fmt.Errorf("traffic: %s: %w: row groups hold %d rows, footer says %d", f.path, ErrDamaged, total, f.meta.NumRows)
	}
	return info, nil
}

// checkChunk validates one needed column chunk from the footer alone.
// LZ4_RAW is refused: parquet-go v0.32 decodes some such chunks to zeros
// without an error.
func checkChunk(cc *format.ColumnChunk, col schemaColumn, rows int64) error {
	md := &cc.MetaData
	if cc.FilePath != "" {
		return fmt.Errorf("%w: column data in another file (%q)", ErrUnsupportedType, cc.FilePath)
	}
	switch md.Codec {
	case format.Uncompressed, format.Snappy, format.Gzip, format.Zstd, format.Brotli:
	case format.Lz4Raw:
		return fmt.Errorf("%w: codec LZ4_RAW (not accepted: the decoder may return zeros for it; rewrite the file with snappy or zstd)", ErrUnsupportedCodec)
	default:
		return fmt.Errorf("%w: codec %s", ErrUnsupportedCodec, md.Codec)
	}
	if md.Type != col.physical {
		return fmt.Errorf("%w: chunk type %s, schema type %s", ErrDamaged, md.Type, col.physical)
	}
	if md.NumValues != rows {
		return fmt.Errorf("%w: footer lists %d values for %d rows", ErrDamaged, md.NumValues, rows)
	}
	return nil
}
