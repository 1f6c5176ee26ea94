package dimse

import (
	"encoding/binary"
	"fmt"
)

// Synthetic UIDs used throughout the tests. The SOP class is the real MR
// Image Storage class (PS3.4 Table B.5-1, from memory); the instance UID
// is invented under the 2.25 (UUID-derived) root, so it names no real
// image.
const (
	mrImageStorage = "1.2.840.10008.5.1.4.1.1.4"           // 25 chars: odd, needs a NUL pad
	testInstance   = "2.25.123456789012345678901234567890" // 35 chars: odd, needs a NUL pad
)

// el builds one Implicit VR Little Endian element by hand (PS3.5 7.1.3:
// group, element, 32-bit length, value). The length is given explicitly
// rather than computed, so an expected encoding in a test spells out
// every byte the standard fixes.
func el(group, element uint16, length uint32, value []byte) []byte {
	if int(length) != len(value) {
		panic(fmt.Sprintf("test bug: (%04X,%04X) length %d but %d value bytes", group, element, length, len(value)))
	}
	b := binary.LittleEndian.AppendUint16(nil, group)
	b = binary.LittleEndian.AppendUint16(b, element)
	b = binary.LittleEndian.AppendUint32(b, length)
	return append(b, value...)
}

func us(v uint16) []byte  { return binary.LittleEndian.AppendUint16(nil, v) }
func ul(v uint32) []byte  { return binary.LittleEndian.AppendUint32(nil, v) }
func str(s string) []byte { return []byte(s) }

func cat(parts ...[]byte) []byte {
	var b []byte
	for _, p := range parts {
		b = append(b, p...)
	}
	return b
}

// rawElement is an element as an independent, minimal walker sees it;
// the structural checks use it instead of Decode so they do not trust
// the code under test.
type rawElement struct {
	tag   uint32 // group<<16 | element
	value []byte
}

func walk(b []byte) ([]rawElement, error) {
	var out []rawElement
	for len(b) > 0 {
		if len(b) < 8 {
			return nil, fmt.Errorf("%d stray bytes", len(b))
		}
		tag := uint32(binary.LittleEndian.Uint16(b))<<16 | uint32(binary.LittleEndian.Uint16(b[2:]))
		n := binary.LittleEndian.Uint32(b[4:])
		if uint64(n) > uint64(len(b)-8) {
			return nil, fmt.Errorf("(%04X,%04X) overruns", tag>>16, tag&0xFFFF)
		}
		out = append(out, rawElement{tag: tag, value: b[8 : 8+n]})
		b = b[8+n:]
	}
	return out, nil
}

// mustEncode encodes c or panics; for seeds and benchmarks, where the
// command is a fixed valid one.
func mustEncode(c *Command) []byte {
	b, err := c.Encode()
	if err != nil {
		panic(err)
	}
	return b
}
