package traffic

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"
	"sync"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding"
	"github.com/parquet-go/parquet-go/format"
)

// This file decodes column chunks page by page with parquet-go's page API:
// each page gives its definition levels (0 = null for a top-level optional
// column, none for a required one) and its non-null values, either typed or
// as indexes into the chunk's dictionary page. Every count is checked: the
// levels must cover the page, the values must match the non-null levels, and
// the pages must add up to the row group's rows.

func damaged(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrDamaged}, args...)...)
}

// recoverDamage turns a panic raised while decoding untrusted bytes inside
// the Parquet library into ErrDamaged. This package's own panics (programmer
// bugs, prefixed "traffic: ") go on.
func recoverDamage(err *error) {
	if p := recover(); p != nil {
		if s, ok := p.(string); ok && strings.HasPrefix(s, "traffic: ") {
			panic(p)
		}
		*err = damaged("decoder failed: %v", p)
	}
}

// chunkRef names one column chunk of an open file.
type chunkRef struct {
	file *openFile
	cc   parquet.ColumnChunk
	md   *format.ColumnMetaData
}

func (r *reader) chunk(ref *rowGroupRef, leaf int) chunkRef {
	return chunkRef{
		file: ref.file,
		cc:   ref.file.pq.RowGroups()[ref.index].ColumnChunks()[leaf],
		md:   &ref.file.meta.RowGroups[ref.index].Columns[leaf].MetaData,
	}
}

// pageLoop reads a column chunk into memory, checks its page headers, then
// hands every decoded page to fill with the positions [lo, hi) it covers.
// It checks that the pages cover exactly rows positions.
func pageLoop(ch chunkRef, k kind, rows int, fill func(p parquet.Page, lo, hi int) error) (err error) {
	defer recoverDamage(&err)
	c, err := readChunk(ch.file, ch.md)
	if err != nil {
		return err
	}
	defer putChunk(c)
	if err := checkPageHeaders(c, k, ch.md.Codec, int64(rows)); err != nil {
		return err
	}
	fc, ok := ch.cc.(*parquet.FileColumnChunk)
	if !ok {
		panic(fmt.Sprintf("traffic: column chunk of type %T, want *parquet.FileColumnChunk", ch.cc))
	}
	pages := fc.PagesFrom(c)
	defer pages.Close()
	pos := 0
	for index := 0; ; index++ {
		p, err := pages.ReadPage()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return fmt.Errorf("%w: page %d: %w", ErrDamaged, index, err)
		}
		n := p.NumValues()
		if n < 0 || n > int64(rows-pos) {
			parquet.Release(p)
			return damaged("page %d holds %d values, only %d of the row group's %d rows are left", index, n, rows-pos, rows)
		}
		err = fill(p, pos, pos+int(n))
		parquet.Release(p)
		if err != nil {
			return fmt.Errorf("page %d: %w", index, err)
		}
		pos += int(n)
	}
	if pos != rows {
		return damaged("column chunk holds %d values, the footer declares %d rows", pos, rows)
	}
	return nil
}

// decodeFloats reads one column chunk of rows rows into dst (len rows):
// numbers as float64, booleans as 0/1, strings through categories (unseen =
// NaN), nulls as NaN.
func decodeFloats(ch chunkRef, col schemaColumn, categories map[string]int, dst []float64) error {
	var cache floatDictionary
	defer cache.release()
	return pageLoop(ch, col.kind, len(dst), func(p parquet.Page, lo, hi int) error {
		out := dst[lo:hi]
		levels := p.DefinitionLevels()
		if levels != nil && len(levels) != len(out) {
			return damaged("%d definition levels for %d values", len(levels), len(out))
		}
		data := p.Data()
		if d := p.Dictionary(); d != nil {
			table, err := cache.table(d, col.kind, categories)
			if err != nil {
				return err
			}
			if data.Kind() != encoding.Int32 {
				return damaged("dictionary page indexes of kind %s", data.Kind())
			}
			return scatterIndexed(out, levels, data.Int32(), table)
		}
		if want := valueKind(col.kind); data.Kind() != want {
			return damaged("page values of kind %s in a %s column", data.Kind(), col.kind)
		}
		switch col.kind {
		case kindDouble:
			return scatterNumbers(out, levels, data.Double())
		case kindFloat:
			return scatterNumbers(out, levels, data.Float())
		case kindInt32:
			return scatterNumbers(out, levels, data.Int32())
		case kindUint32:
			return scatterNumbers(out, levels, data.Uint32())
		case kindInt64:
			return scatterNumbers(out, levels, data.Int64())
		case kindUint64:
			return scatterNumbers(out, levels, data.Uint64())
		case kindBoolean:
			return scatterBooleans(out, levels, data.Boolean())
		case kindString:
			bytes, offsets := data.ByteArray()
			return scatterStrings(out, levels, bytes, offsets, categories)
		default:
			panic(fmt.Sprintf("traffic: decodeFloats on column kind %d", col.kind))
		}
	})
}

// valueKind is the encoding kind parquet-go gives the values of a kind.
func valueKind(k kind) encoding.Kind {
	switch k {
	case kindDouble:
		return encoding.Double
	case kindFloat:
		return encoding.Float
	case kindInt32, kindUint32:
		return encoding.Int32
	case kindInt64, kindUint64:
		return encoding.Int64
	case kindBoolean:
		return encoding.Boolean
	case kindString:
		return encoding.ByteArray
	default:
		return encoding.Undefined
	}
}

type number interface {
	~int32 | ~int64 | ~uint32 | ~uint64 | ~float32 | ~float64
}

// countSet counts the non-null definition levels.
func countSet(levels []byte) int {
	n := 0
	for _, l := range levels {
		if l != 0 {
			n++
		}
	}
	return n
}

// scatterNumbers writes vals to dst, NaN at the positions whose definition
// level is 0. levels == nil means no nulls.
func scatterNumbers[T number](dst []float64, levels []byte, vals []T) error {
	set := len(dst)
	if levels != nil {
		set = countSet(levels)
	}
	if set != len(vals) {
		return damaged("%d values for %d non-null positions", len(vals), set)
	}
	if set == len(dst) {
		vals = vals[:len(dst)]
		for i, v := range vals {
			dst[i] = float64(v)
		}
		return nil
	}
	nan := math.NaN()
	k := 0
	for i, l := range levels {
		if l != 0 {
			dst[i] = float64(vals[k])
			k++
		} else {
			dst[i] = nan
		}
	}
	return nil
}

// scatterIndexed writes table[idx] to dst, NaN at nulls. An index outside
// the dictionary is damage.
func scatterIndexed(dst []float64, levels []byte, idx []int32, table []float64) error {
	set := len(dst)
	if levels != nil {
		set = countSet(levels)
	}
	if set != len(idx) {
		return damaged("%d dictionary indexes for %d non-null positions", len(idx), set)
	}
	n := uint32(len(table))
	if set == len(dst) {
		idx = idx[:len(dst)]
		for i, ix := range idx {
			if uint32(ix) >= n {
				return damaged("dictionary index %d outside a dictionary of %d values", ix, n)
			}
			dst[i] = table[ix]
		}
		return nil
	}
	nan := math.NaN()
	k := 0
	for i, l := range levels {
		if l == 0 {
			dst[i] = nan
			continue
		}
		ix := idx[k]
		k++
		if uint32(ix) >= n {
			return damaged("dictionary index %d outside a dictionary of %d values", ix, n)
		}
		dst[i] = table[ix]
	}
	return nil
}

// scatterBooleans writes bit-packed booleans (least significant bit first)
// as 1 and 0.
func scatterBooleans(dst []float64, levels []byte, bits []byte) error {
	set := len(dst)
	if levels != nil {
		set = countSet(levels)
	}
	if len(bits)*8 < set {
		return damaged("%d boolean bytes for %d non-null positions", len(bits), set)
	}
	nan := math.NaN()
	k := 0
	for i := range dst {
		if levels != nil && levels[i] == 0 {
			dst[i] = nan
			continue
		}
		dst[i] = float64(bits[k>>3] >> (k & 7) & 1)
		k++
	}
	return nil
}

// byteArrayAt returns value k of a byte array page (offsets has one entry
// more than there are values).
func byteArrayAt(data []byte, offsets []uint32, k int) ([]byte, error) {
	lo, hi := offsets[k], offsets[k+1]
	if lo > hi || int(hi) > len(data) {
		return nil, damaged("byte array value %d spans [%d, %d) of %d bytes", k, lo, hi, len(data))
	}
	return data[lo:hi], nil
}

// scatterStrings maps plain strings to category codes, NaN for nulls and for
// strings outside categories.
func scatterStrings(dst []float64, levels []byte, data []byte, offsets []uint32, categories map[string]int) error {
	set := len(dst)
	if levels != nil {
		set = countSet(levels)
	}
	if len(offsets) != set+1 {
		return damaged("%d byte array offsets for %d non-null positions", len(offsets), set)
	}
	nan := math.NaN()
	k := 0
	for i := range dst {
		if levels != nil && levels[i] == 0 {
			dst[i] = nan
			continue
		}
		b, err := byteArrayAt(data, offsets, k)
		if err != nil {
			return err
		}
		k++
		if code, ok := categories[string(b)]; ok {
			dst[i] = float64(code)
		} else {
			dst[i] = nan
		}
	}
	return nil
}

// floatDictionary converts a chunk's dictionary once into float64 values,
// in a buffer reused across chunks.
type floatDictionary struct {
	dict   parquet.Dictionary
	values []float64
	buf    *[]float64
}

var tablePool = sync.Pool{New: func() any { return new([]float64) }}

func (c *floatDictionary) release() {
	if c.buf != nil {
		tablePool.Put(c.buf)
		c.buf = nil
	}
}

func (c *floatDictionary) table(d parquet.Dictionary, k kind, categories map[string]int) ([]float64, error) {
	if c.dict == d && c.values != nil {
		return c.values, nil
	}
	n := d.Len()
	if c.buf == nil {
		c.buf = tablePool.Get().(*[]float64)
	}
	if cap(*c.buf) < n {
		*c.buf = make([]float64, n)
	}
	table := (*c.buf)[:n]
	data := d.Page().Data()
	if want := valueKind(k); data.Kind() != want {
		return nil, damaged("dictionary of kind %s in a %s column", data.Kind(), k)
	}
	var err error
	switch k {
	case kindDouble:
		err = convertAll(table, data.Double())
	case kindFloat:
		err = convertAll(table, data.Float())
	case kindInt32:
		err = convertAll(table, data.Int32())
	case kindUint32:
		err = convertAll(table, data.Uint32())
	case kindInt64:
		err = convertAll(table, data.Int64())
	case kindUint64:
		err = convertAll(table, data.Uint64())
	case kindBoolean:
		err = scatterBooleans(table, nil, data.Boolean())
	case kindString:
		bytes, offsets := data.ByteArray()
		if len(offsets) < n+1 {
			return nil, damaged("dictionary of %d strings has %d offsets", n, len(offsets))
		}
		err = scatterStrings(table, nil, bytes, offsets[:n+1], categories)
	default:
		panic(fmt.Sprintf("traffic: dictionary for column kind %d", k))
	}
	if err != nil {
		return nil, fmt.Errorf("dictionary page: %w", err)
	}
	c.dict, c.values = d, table
	return table, nil
}

func convertAll[T number](dst []float64, vals []T) error {
	if len(vals) < len(dst) {
		return damaged("%d dictionary values, %d declared", len(vals), len(dst))
	}
	for i := range dst {
		dst[i] = float64(vals[i])
	}
	return nil
}

// groupCoder gives string query ids int64 codes 0, 1, 2, ... in order of
// first appearance.
type groupCoder struct {
	codes map[string]int64
}

func newGroupCoder() *groupCoder { return &groupCoder{codes: map[string]int64{}} }

func (c *groupCoder) code(b []byte) int64 {
	if v, ok := c.codes[string(b)]; ok {
		return v
	}
	v := int64(len(c.codes))
	c.codes[string(b)] = v
	return v
}

// nullGroupError carries the chunk position of the first null group id.
type nullGroupError struct{ pos int }

func (e *nullGroupError) Error() string { return fmt.Sprintf("null at chunk position %d", e.pos) }
func (e *nullGroupError) Unwrap() error { return ErrNullGroup }

// decodeGroups reads one group column chunk into dst (len rows). Integer ids
// are kept (unsigned ones bit for bit); strings get codes from coder, which
// must only be used by one goroutine in row order. A null returns a
// *nullGroupError.
func decodeGroups(ch chunkRef, col schemaColumn, coder *groupCoder, dst []int64) error {
	var dict parquet.Dictionary
	var table []int64
	return pageLoop(ch, col.kind, len(dst), func(p parquet.Page, lo, hi int) error {
		out := dst[lo:hi]
		levels := p.DefinitionLevels()
		if levels != nil {
			if len(levels) != len(out) {
				return damaged("%d definition levels for %d values", len(levels), len(out))
			}
			for i, l := range levels {
				if l == 0 {
					return &nullGroupError{pos: lo + i}
				}
			}
		}
		data := p.Data()
		if d := p.Dictionary(); d != nil {
			if d != dict {
				t, err := groupTable(d, col.kind)
				if err != nil {
					return err
				}
				dict, table = d, t
			}
			if data.Kind() != encoding.Int32 {
				return damaged("dictionary page indexes of kind %s", data.Kind())
			}
			idx := data.Int32()
			if len(idx) != len(out) {
				return damaged("%d dictionary indexes for %d values", len(idx), len(out))
			}
			for i, ix := range idx {
				if uint32(ix) >= uint32(len(table)) {
					return damaged("dictionary index %d outside a dictionary of %d values", ix, len(table))
				}
				code := table[ix]
				if code < 0 && col.kind == kindString {
					b, err := dictString(d, ix)
					if err != nil {
						return err
					}
					code = coder.code(b)
					table[ix] = code
				}
				out[i] = code
			}
			return nil
		}
		if want := valueKind(col.kind); data.Kind() != want {
			return damaged("page values of kind %s in a %s column", data.Kind(), col.kind)
		}
		switch col.kind {
		case kindInt32:
			return copyInts(out, data.Int32())
		case kindUint32:
			return copyInts(out, data.Uint32())
		case kindInt64:
			return copyInts(out, data.Int64())
		case kindUint64:
			return copyInts(out, data.Uint64())
		case kindString:
			bytes, offsets := data.ByteArray()
			if len(offsets) != len(out)+1 {
				return damaged("%d byte array offsets for %d values", len(offsets), len(out))
			}
			for i := range out {
				b, err := byteArrayAt(bytes, offsets, i)
				if err != nil {
					return err
				}
				out[i] = coder.code(b)
			}
			return nil
		default:
			panic(fmt.Sprintf("traffic: decodeGroups on column kind %d", col.kind))
		}
	})
}

func copyInts[T ~int32 | ~int64 | ~uint32 | ~uint64](dst []int64, vals []T) error {
	if len(vals) != len(dst) {
		return damaged("%d values for %d positions", len(vals), len(dst))
	}
	for i, v := range vals {
		dst[i] = int64(v)
	}
	return nil
}

// groupTable converts an integer dictionary to ids; a string dictionary
// gets -1 (no code yet) everywhere, codes being handed out in row order.
func groupTable(d parquet.Dictionary, k kind) ([]int64, error) {
	n := d.Len()
	table := make([]int64, n)
	if k == kindString {
		for i := range table {
			table[i] = -1
		}
		return table, nil
	}
	data := d.Page().Data()
	if want := valueKind(k); data.Kind() != want {
		return nil, damaged("dictionary of kind %s in a %s column", data.Kind(), k)
	}
	var err error
	switch k {
	case kindInt32:
		err = copyInts(table, data.Int32()[:min(n, len(data.Int32()))])
	case kindUint32:
		err = copyInts(table, data.Uint32()[:min(n, len(data.Uint32()))])
	case kindInt64:
		err = copyInts(table, data.Int64()[:min(n, len(data.Int64()))])
	case kindUint64:
		err = copyInts(table, data.Uint64()[:min(n, len(data.Uint64()))])
	default:
		panic(fmt.Sprintf("traffic: group dictionary for column kind %d", k))
	}
	if err != nil {
		return nil, fmt.Errorf("dictionary page: %w", err)
	}
	return table, nil
}

func dictString(d parquet.Dictionary, ix int32) ([]byte, error) {
	data := d.Page().Data()
	if data.Kind() != encoding.ByteArray {
		return nil, damaged("dictionary of kind %s in a string column", data.Kind())
	}
	bytes, offsets := data.ByteArray()
	if int(ix)+1 >= len(offsets) {
		return nil, damaged("dictionary string %d of %d", ix, len(offsets)-1)
	}
	return byteArrayAt(bytes, offsets, int(ix))
}
