package history

import (
	"errors"
	"fmt"
)

// The Parquet footer is a Thrift struct in the compact protocol. The reader
// allocates every list at its declared length before reading the elements,
// so one damaged length byte can ask for gigabytes. skimCompactStruct walks
// the footer without decoding it and fails unless every declared element is
// really there; the number of elements of all lists is then bounded by the
// footer's byte length, and so is the decoder's allocation.
//
// Encoding facts from the Thrift compact protocol specification
// (thrift/doc/specs/thrift-compact-protocol.md): field header = delta<<4 |
// type, or type alone followed by a zigzag varint field id; list header =
// size<<4 | element type, or 0xF<<4 | type followed by a varint size; map
// header = varint size, then key type<<4 | value type when size > 0; booleans
// are carried in the field type (fields) or in one byte (elements).

// Compact protocol type codes.
const (
	compactBooleanTrue  = 1
	compactBooleanFalse = 2
	compactByte         = 3
	compactI16          = 4
	compactI32          = 5
	compactI64          = 6
	compactDouble       = 7
	compactBinary       = 8
	compactList         = 9
	compactSet          = 10
	compactMap          = 11
	compactStruct       = 12
	compactUUID         = 13
)

// maxCompactDepth bounds nesting; Parquet's footer nests about six deep.
const maxCompactDepth = 64

var errCompactShort = errors.New("footer ends inside a value")

type compactSkimmer struct {
	b   []byte
	pos int
}

// skimCompactStruct checks that b starts with one well-formed compact
// struct and returns its length in bytes.
func skimCompactStruct(b []byte) (int, error) {
	s := compactSkimmer{b: b}
	if err := s.value(compactStruct, 0, false); err != nil {
		return s.pos, fmt.Errorf("footer byte %d: %w", s.pos, err)
	}
	return s.pos, nil
}

func (s *compactSkimmer) byte() (byte, error) {
	if s.pos >= len(s.b) {
		return 0, errCompactShort
	}
	c := s.b[s.pos]
	s.pos++
	return c, nil
}

func (s *compactSkimmer) skip(n uint64) error {
	if n > uint64(len(s.b)-s.pos) {
		return errCompactShort
	}
	s.pos += int(n)
	return nil
}

func (s *compactSkimmer) varint() (uint64, error) {
	var v uint64
	for shift := uint(0); shift < 64; shift += 7 {
		c, err := s.byte()
		if err != nil {
			return 0, err
		}
		v |= uint64(c&0x7f) << shift
		if c < 0x80 {
			return v, nil
		}
	}
	return 0, errors.New("varint longer than 10 bytes")
}

// value skims one value of type t; element tells that it sits in a list,
// set or map, where a boolean takes one byte of its own.
func (s *compactSkimmer) value(t byte, depth int, element bool) error {
	if depth > maxCompactDepth {
		return fmt.Errorf("nesting deeper than %d", maxCompactDepth)
	}
	switch t {
	case compactBooleanTrue, compactBooleanFalse:
		if element {
			return s.skip(1)
		}
		return nil
	case compactByte:
		return s.skip(1)
	case compactI16, compactI32, compactI64:
		_, err := s.varint()
		return err
	case compactDouble:
		return s.skip(8)
	case compactUUID:
		return s.skip(16)
	case compactBinary:
		n, err := s.varint()
		if err != nil {
			return err
		}
		return s.skip(n)
	case compactList, compactSet:
		h, err := s.byte()
		if err != nil {
			return err
		}
		n := uint64(h >> 4)
		if n == 0xF {
			if n, err = s.varint(); err != nil {
				return err
			}
		}
		return s.elements(n, []byte{h & 0xF}, depth)
	case compactMap:
		n, err := s.varint()
		if err != nil || n == 0 {
			return err
		}
		kv, err := s.byte()
		if err != nil {
			return err
		}
		return s.elements(n, []byte{kv >> 4, kv & 0xF}, depth)
	case compactStruct:
		for {
			h, err := s.byte()
			if err != nil {
				return err
			}
			if h == 0 {
				return nil // stop field
			}
			if h>>4 == 0 { // long form: the field id follows
				if _, err := s.varint(); err != nil {
					return err
				}
			}
			if err := s.value(h&0xF, depth+1, false); err != nil {
				return err
			}
		}
	}
	return fmt.Errorf("unknown compact type %d", t)
}

// elements skims n list, set or map entries made of the given types. Each
// entry takes at least one byte, so a count beyond the bytes left is damage.
func (s *compactSkimmer) elements(n uint64, types []byte, depth int) error {
	if n > uint64(len(s.b)-s.pos) {
		return fmt.Errorf("%d elements declared, %d bytes left", n, len(s.b)-s.pos)
	}
	for i := uint64(0); i < n; i++ {
		for _, t := range types {
			if err := s.value(t, depth+1, true); err != nil {
				return err
			}
		}
	}
	return nil
}
