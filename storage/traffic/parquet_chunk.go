package traffic

import (
	"fmt"
	"io"
	"sync"

	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
)

// A column chunk is read into memory with one read, and its page headers
// are checked there before parquet-go decodes a single page. Two reasons:
// the page headers must add up to the row count of the footer (a short or
// padded chunk fails before any work), and parquet-go sizes its buffers from
// header fields (value counts, uncompressed sizes, thrift string lengths), so
// a damaged header must be refused before it can ask for gigabytes.

// chunkBytes is the raw bytes of one column chunk.
type chunkBytes struct {
	base int64 // file offset of data[0]
	data []byte
}

// ReadAt serves reads at file offsets inside the chunk.
func (c *chunkBytes) ReadAt(p []byte, off int64) (int, error) {
	i := off - c.base
	if i < 0 || i > int64(len(c.data)) {
		return 0, fmt.Errorf("%w: read at offset %d outside the column chunk [%d, %d)", ErrDamaged, off, c.base, c.base+int64(len(c.data)))
	}
	n := copy(p, c.data[i:])
	if n < len(p) {
		return n, io.EOF
	}
	return n, nil
}

var chunkPool sync.Pool

// readChunk reads the bytes of a column chunk (from its dictionary page if
// it has one), reusing pooled buffers. Release with putChunk.
func readChunk(f *openFile, md *format.ColumnMetaData) (*chunkBytes, error) {
	start := md.DataPageOffset
	if md.DictionaryPageOffset != 0 {
		start = md.DictionaryPageOffset
	}
	size := md.TotalCompressedSize
	if start < int64(len(magic)) || size < 0 || start > f.size || size > f.size-start {
		return nil, damaged("column chunk [%d, +%d) lies outside the file of %d bytes", start, size, f.size)
	}
	c, _ := chunkPool.Get().(*chunkBytes)
	if c == nil {
		c = &chunkBytes{}
	}
	if int64(cap(c.data)) < size {
		c.data = make([]byte, size)
	}
	c.base, c.data = start, c.data[:size]
	if _, err := f.os.ReadAt(c.data, start); err != nil {
		putChunk(c)
		return nil, damaged("reading column chunk: %w", err)
	}
	return c, nil
}

func putChunk(c *chunkBytes) { chunkPool.Put(c) }

// pageSizeSlack bounds the bytes a page may hold beyond 32 per value of a
// fixed-width column: level and encoding headers (common practice: loose
// enough for any writer, tight enough to stop a damaged size field).
const pageSizeSlack = 64 << 10

// maxVariablePage bounds the uncompressed size of a string page.
const maxVariablePage = 1 << 30

// checkPageHeaders walks the thrift page headers of a chunk (Parquet format
// spec: a chunk is a sequence of PageHeader + body) and checks them against
// rows, the row count of the footer.
func checkPageHeaders(c *chunkBytes, k kind, codec format.CompressionCodec, rows int64) error {
	var proto thrift.CompactProtocol
	var values int64
	dictionary := false
	for off, page := 0, 0; off < len(c.data); page++ {
		r := proto.NewReaderFromBytes(c.data[off:])
		var h format.PageHeader
		if err := thrift.NewDecoder(r).Decode(&h); err != nil {
			return damaged("page %d header at offset %d: %w", page, c.base+int64(off), err)
		}
		body := off + r.BytesRead()
		if h.CompressedPageSize < 0 || int64(body)+int64(h.CompressedPageSize) > int64(len(c.data)) {
			return damaged("page %d: body of %d bytes runs past the column chunk", page, h.CompressedPageSize)
		}
		if h.UncompressedPageSize < 0 {
			return damaged("page %d: uncompressed size %d", page, h.UncompressedPageSize)
		}
		var n int64
		switch h.Type {
		case format.DictionaryPage:
			if !h.DictionaryPageHeader.Valid || dictionary || values > 0 {
				return damaged("page %d: unexpected dictionary page", page)
			}
			dictionary = true
			d := h.DictionaryPageHeader.V
			if d.NumValues < 0 || int64(d.NumValues)*minValueBytes(k) > int64(h.UncompressedPageSize) {
				return damaged("page %d: dictionary of %d values in %d bytes", page, d.NumValues, h.UncompressedPageSize)
			}
			if err := checkUncompressed(page, k, int64(d.NumValues), h.UncompressedPageSize); err != nil {
				return err
			}
		case format.DataPage:
			if !h.DataPageHeader.Valid {
				return damaged("page %d: data page without its header", page)
			}
			n = int64(h.DataPageHeader.V.NumValues)
		case format.DataPageV2:
			if !h.DataPageHeaderV2.Valid {
				return damaged("page %d: data page v2 without its header", page)
			}
			v := h.DataPageHeaderV2.V
			n = int64(v.NumValues)
			if v.NumRows != v.NumValues || v.NumNulls < 0 || v.NumNulls > v.NumValues ||
				v.DefinitionLevelsByteLength < 0 || v.RepetitionLevelsByteLength < 0 ||
				int64(v.DefinitionLevelsByteLength)+int64(v.RepetitionLevelsByteLength) > int64(h.CompressedPageSize) {
				return damaged("page %d: inconsistent v2 header (%d values, %d rows, %d nulls, levels %d+%d bytes of %d)",
					page, v.NumValues, v.NumRows, v.NumNulls, v.DefinitionLevelsByteLength, v.RepetitionLevelsByteLength, h.CompressedPageSize)
			}
		default:
			return damaged("page %d: unsupported page type %s", page, h.Type)
		}
		if h.Type != format.DictionaryPage {
			if n < 0 || values+n > rows {
				return damaged("page %d claims %d values, the footer declares %d rows and %d came before", page, n, rows, values)
			}
			if err := checkUncompressed(page, k, n, h.UncompressedPageSize); err != nil {
				return err
			}
			values += n
		}
		if err := checkCompressedSize(page, codec, &h, c.data[body:body+int(h.CompressedPageSize)]); err != nil {
			return err
		}
		off = body + int(h.CompressedPageSize)
	}
	if values != rows {
		return damaged("pages hold %d values, the footer declares %d rows", values, rows)
	}
	return nil
}

func checkUncompressed(page int, k kind, n int64, size int32) error {
	limit := int64(maxVariablePage)
	if k != kindString {
		limit = 32*n + pageSizeSlack
	}
	if int64(size) > limit {
		return damaged("page %d: %d values claim %d uncompressed bytes", page, n, size)
	}
	return nil
}

// minValueBytes is the least plain-encoded size of one value: a dictionary
// page of n values needs at least n times this many bytes.
func minValueBytes(k kind) int64 {
	switch k {
	case kindDouble, kindInt64, kindUint64:
		return 8
	case kindFloat, kindInt32, kindUint32:
		return 4
	case kindString:
		return 4 // length prefix
	default:
		return 0 // booleans are bit-packed
	}
}

// checkCompressedSize reads the decoded size that a snappy block or a zstd
// frame announces at its start and refuses one larger than the page's
// uncompressed size: both decoders allocate that size before they find out
// that the data is damaged.
func checkCompressedSize(page int, codec format.CompressionCodec, h *format.PageHeader, body []byte) error {
	if h.Type == format.DataPageV2 {
		v := h.DataPageHeaderV2.V
		if v.IsCompressed.Valid && !v.IsCompressed.V {
			return nil
		}
		body = body[v.DefinitionLevelsByteLength+v.RepetitionLevelsByteLength:]
	}
	var size uint64
	var known bool
	switch codec {
	case format.Snappy:
		size, known = snappyDecodedLen(body)
	case format.Zstd:
		size, known = zstdContentSize(body)
	}
	if known && size > uint64(h.UncompressedPageSize) {
		return damaged("page %d: %s data announces %d bytes, the page header %d", page, codec, size, h.UncompressedPageSize)
	}
	return nil
}

// snappyDecodedLen is the uvarint that opens a snappy block (snappy
// format_description.txt: "the uncompressed length, stored as a varint").
func snappyDecodedLen(b []byte) (uint64, bool) {
	var v uint64
	for i := 0; i < len(b) && i < 10; i++ {
		v |= uint64(b[i]&0x7f) << (7 * i)
		if b[i] < 0x80 {
			return v, true
		}
	}
	return 0, false
}

// zstdContentSize is the Frame_Content_Size of a zstd frame header, when the
// header has one (RFC 8878, 3.1.1.1).
func zstdContentSize(b []byte) (uint64, bool) {
	if len(b) < 6 || b[0] != 0x28 || b[1] != 0xb5 || b[2] != 0x2f || b[3] != 0xfd {
		return 0, false
	}
	fhd := b[4]
	single := fhd>>5&1 == 1
	pos := 5
	if !single {
		pos++ // Window_Descriptor
	}
	pos += [4]int{0, 1, 2, 4}[fhd&3] // Dictionary_ID
	var n int
	switch fhd >> 6 {
	case 0:
		if single {
			n = 1
		}
	case 1:
		n = 2
	case 2:
		n = 4
	case 3:
		n = 8
	}
	if n == 0 || pos+n > len(b) {
		return 0, false
	}
	var v uint64
	for i := 0; i < n; i++ {
		v |= uint64(b[pos+i]) << (8 * i)
	}
	if n == 2 {
		v += 256
	}
	return v, true
}
