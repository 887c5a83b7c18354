package history

import (
	"encoding/binary"
	"fmt"
	"io"
	"math/bits"

	"github.com/klauspost/compress/snappy"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
)

// The Parquet reader trusts the sizes and counts a file declares: a list
// length in the footer, a byte length in a page header, a run length in
// RLE-encoded levels or dictionary indexes. In a damaged file a few bytes
// can then ask for gigabytes (found by FuzzDecodeRun). checkFooter and
// checkPages walk those declarations first and bound each one by the bytes
// that back it, or by maxRunRows, so a damaged run file costs an error and
// a few times its own size in memory, never a crash.

// maxRunRows caps the rows of one run file, far above any real ledger
// (1,000 features x 2 versions x 20 measures is 40,000 rows); Append
// refuses larger runs so that every file it writes can be read back.
const maxRunRows = 1 << 22

// maxExpansion bounds a page's uncompressed size against its compressed
// size. Snappy expands at most about 21 times (a 3-byte copy of 64 bytes,
// per the Snappy format description); the slack admits any honest page.
const maxExpansion = 64

// checkFooter checks the magic numbers, that the footer length fits in the
// file, and that every list in the footer holds the elements it declares.
func checkFooter(r io.ReaderAt, size int64) error {
	const magic = "PAR1"
	if size < 12 {
		return fmt.Errorf("%d bytes: too short for a Parquet file", size)
	}
	var head [4]byte
	var tail [8]byte
	if _, err := r.ReadAt(head[:], 0); err != nil {
		return fmt.Errorf("read header: %w", err)
	}
	if _, err := r.ReadAt(tail[:], size-8); err != nil {
		return fmt.Errorf("read footer: %w", err)
	}
	if string(head[:]) != magic || string(tail[4:]) != magic {
		return fmt.Errorf("magic numbers %q and %q, want %q", head[:], tail[4:], magic)
	}
	n := int64(binary.LittleEndian.Uint32(tail[:4]))
	if n > size-12 {
		return fmt.Errorf("footer length %d exceeds the %d-byte file", n, size)
	}
	footer := make([]byte, n)
	if _, err := r.ReadAt(footer, size-8-n); err != nil {
		return fmt.Errorf("read footer: %w", err)
	}
	if _, err := skimCompactStruct(footer); err != nil {
		return fmt.Errorf("damaged footer: %w", err)
	}
	return nil
}

// checkPages walks every page of every column chunk of f: each header must
// be well-formed, each page must lie inside its chunk and each chunk inside
// the file, sizes and value counts must be plausible, and the run lengths of
// definition levels and dictionary indexes must add up to no more than the
// page's value count. Only what this package writes passes: flat columns,
// Snappy or no compression, version 1 data pages, PLAIN or dictionary
// encoding.
func checkPages(r io.ReaderAt, size int64, f *parquet.File) error {
	md := f.Metadata()
	if md.NumRows < 0 || md.NumRows > maxRunRows {
		return fmt.Errorf("%d rows: outside 0..%d", md.NumRows, maxRunRows)
	}
	leaves := f.Schema().Columns()
	maxDef := make([]int, len(leaves))
	for i, path := range leaves {
		leaf, _ := f.Schema().Lookup(path...)
		if leaf.MaxRepetitionLevel != 0 {
			return fmt.Errorf("column %v is repeated; run files are flat", path)
		}
		maxDef[i] = leaf.MaxDefinitionLevel
	}
	for g, rg := range md.RowGroups {
		if rg.NumRows < 0 || rg.NumRows > md.NumRows {
			return fmt.Errorf("row group %d: %d rows of %d in the file", g, rg.NumRows, md.NumRows)
		}
		if len(rg.Columns) != len(leaves) {
			return fmt.Errorf("row group %d: %d column chunks for %d columns", g, len(rg.Columns), len(leaves))
		}
		for c := range rg.Columns {
			where := fmt.Sprintf("row group %d, column %v", g, leaves[c])
			if err := checkChunk(r, size, &rg.Columns[c].MetaData, maxDef[c], rg.NumRows); err != nil {
				return fmt.Errorf("%s: %w", where, err)
			}
		}
	}
	return nil
}

func checkChunk(r io.ReaderAt, size int64, m *format.ColumnMetaData, maxDef int, rows int64) error {
	if m.Codec != format.Uncompressed && m.Codec != format.Snappy {
		return fmt.Errorf("codec %v, not one this package writes", m.Codec)
	}
	if m.NumValues != rows {
		return fmt.Errorf("%d values for %d rows", m.NumValues, rows)
	}
	start := m.DataPageOffset
	if m.DictionaryPageOffset > 0 && m.DictionaryPageOffset < start {
		start = m.DictionaryPageOffset
	}
	if start < 4 || m.TotalCompressedSize <= 0 || m.TotalCompressedSize > size-8-start {
		return fmt.Errorf("chunk at byte %d of %d bytes lies outside the %d-byte file", start, m.TotalCompressedSize, size)
	}
	chunk := make([]byte, m.TotalCompressedSize)
	if _, err := r.ReadAt(chunk, start); err != nil {
		return fmt.Errorf("read chunk: %w", err)
	}
	for pos := 0; pos < len(chunk); {
		n, err := skimCompactStruct(chunk[pos:])
		if err != nil {
			return fmt.Errorf("page header at chunk byte %d: %w", pos, err)
		}
		var h format.PageHeader
		if err := thrift.Unmarshal(new(thrift.CompactProtocol), chunk[pos:pos+n], &h); err != nil {
			return fmt.Errorf("page header at chunk byte %d: %w", pos, err)
		}
		pos += n
		if h.CompressedPageSize < 0 || int(h.CompressedPageSize) > len(chunk)-pos {
			return fmt.Errorf("page of %d bytes at chunk byte %d overruns the chunk", h.CompressedPageSize, pos)
		}
		limit := int64(h.CompressedPageSize)*maxExpansion + 1024
		if h.UncompressedPageSize < 0 || int64(h.UncompressedPageSize) > limit {
			return fmt.Errorf("page at chunk byte %d claims %d bytes uncompressed from %d", pos, h.UncompressedPageSize, h.CompressedPageSize)
		}
		data := chunk[pos : pos+int(h.CompressedPageSize)]
		if m.Codec == format.Snappy {
			if n, err := snappy.DecodedLen(data); err != nil || n != int(h.UncompressedPageSize) {
				return fmt.Errorf("page at chunk byte %d: Snappy block of %d bytes (%v), page says %d", pos, n, err, h.UncompressedPageSize)
			}
			if data, err = snappy.Decode(nil, data); err != nil {
				return fmt.Errorf("page at chunk byte %d: %w", pos, err)
			}
		} else if len(data) != int(h.UncompressedPageSize) {
			return fmt.Errorf("page at chunk byte %d: %d bytes, page says %d", pos, len(data), h.UncompressedPageSize)
		}
		if err := checkPage(&h, data, maxDef, rows); err != nil {
			return fmt.Errorf("page at chunk byte %d: %w", pos, err)
		}
		pos += int(h.CompressedPageSize)
	}
	return nil
}

// checkPage checks one uncompressed page.
func checkPage(h *format.PageHeader, data []byte, maxDef int, rows int64) error {
	switch h.Type {
	case format.DictionaryPage:
		d, ok := h.DictionaryPageHeader.Get()
		if !ok {
			return fmt.Errorf("dictionary page without its header")
		}
		if d.Encoding != format.Plain && d.Encoding != format.PlainDictionary {
			return fmt.Errorf("dictionary encoding %v, not one this package writes", d.Encoding)
		}
		// Every dictionary value takes at least four bytes (a length or a number).
		if d.NumValues < 0 || int64(d.NumValues)*4 > int64(len(data)) {
			return fmt.Errorf("dictionary of %d values in %d bytes", d.NumValues, len(data))
		}
		return nil
	case format.DataPage:
	default:
		return fmt.Errorf("page type %v, not one this package writes", h.Type)
	}
	d, ok := h.DataPageHeader.Get()
	if !ok {
		return fmt.Errorf("data page without its header")
	}
	if d.NumValues < 0 || int64(d.NumValues) > rows {
		return fmt.Errorf("%d values in a row group of %d rows", d.NumValues, rows)
	}
	if maxDef > 0 {
		if len(data) < 4 {
			return fmt.Errorf("definition levels cut short")
		}
		n := binary.LittleEndian.Uint32(data)
		if uint64(n) > uint64(len(data)-4) {
			return fmt.Errorf("definition levels of %d bytes in a %d-byte page", n, len(data))
		}
		if err := checkRunLengths(data[4:4+n], bits.Len(uint(maxDef)), d.NumValues); err != nil {
			return fmt.Errorf("definition levels: %w", err)
		}
		data = data[4+n:]
	}
	switch d.Encoding {
	case format.Plain:
		return nil
	case format.PlainDictionary, format.RLEDictionary:
		if len(data) == 0 {
			return nil // every value of the page is null
		}
		width := int(data[0])
		if width > 32 {
			return fmt.Errorf("dictionary index width %d", width)
		}
		if err := checkRunLengths(data[1:], width, d.NumValues); err != nil {
			return fmt.Errorf("dictionary indexes: %w", err)
		}
		return nil
	}
	return fmt.Errorf("value encoding %v, not one this package writes", d.Encoding)
}

// checkRunLengths walks the runs of the RLE / bit-packing hybrid encoding
// (Parquet format specification, Encodings.md) and checks that they fit in
// b and hold at most count values, plus the padding of one bit-packed group.
func checkRunLengths(b []byte, width int, count int32) error {
	var total uint64
	limit := uint64(count) + 8
	for len(b) > 0 {
		header, k := binary.Uvarint(b)
		if k <= 0 {
			return fmt.Errorf("damaged run header")
		}
		b = b[k:]
		n := header >> 1
		if n > limit {
			return fmt.Errorf("a run of %d exceeds the page's %d values", n, count)
		}
		var values, size uint64
		if header&1 == 0 { // repeated run: one value of ceil(width/8) bytes
			values, size = n, uint64(width+7)/8
		} else { // bit-packed run: n groups of 8 values, width bytes each
			values, size = n*8, n*uint64(width)
		}
		if size > uint64(len(b)) {
			return fmt.Errorf("run of %d bytes overruns the %d left", size, len(b))
		}
		b = b[size:]
		total += values
		if total > limit {
			return fmt.Errorf("runs hold more than the page's %d values", count)
		}
	}
	return nil
}
