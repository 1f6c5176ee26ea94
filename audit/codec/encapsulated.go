package codec

import (
	"bytes"
	"encoding/binary"
)

// Item tags of encapsulated pixel data (PS3.5 A.4, 7.5), as
// group<<16|element.
const (
	tagItem          = 0xFFFEE000
	tagSequenceDelim = 0xFFFEE0DD
	itemHeaderBytes  = 8 // tag and 32-bit length
)

// fragment is one item of encapsulated pixel data.
type fragment struct {
	at   int // offset of its item tag from the first fragment's item tag
	data []byte
}

// Frames splits an encapsulated Pixel Data value into the compressed
// bytes of each of its n frames (PS3.5 A.4). value starts at the first
// item (the Basic Offset Table) and runs to the sequence delimiter
// (included or not). The returned slices alias value when a frame is one
// fragment.
//
// Frame boundaries come from the Basic Offset Table when it is not empty
// (PS3.5 A.4 a: offsets from the first fragment's item tag); with an empty
// table, one frame is every fragment, n frames in n fragments are one
// each, and otherwise, for JPEG family syntaxes, a frame starts at each
// fragment that starts with an SOI marker (T.81 B.2.1; T.87 has the same
// marker). The Extended Offset Table (7FE0,0001) is not read: the Basic
// Offset Table or the markers suffice for the frames DICOM allows.
func Frames(value []byte, n int, ts string) ([][]byte, error) {
	if n < 1 {
		return nil, corruptf("%d frames", n)
	}
	bot, frags, err := items(value)
	if err != nil {
		return nil, err
	}
	if len(frags) == 0 {
		return nil, corruptf("encapsulated pixel data has no fragment")
	}
	if int64(n) > int64(len(frags)) {
		return nil, corruptf("%d frames in %d fragments", n, len(frags))
	}
	groups := make([][]fragment, 0, n)
	switch {
	case len(bot) > 0:
		if len(bot)%4 != 0 || len(bot)/4 != n {
			return nil, corruptf("Basic Offset Table of %d bytes for %d frames", len(bot), n)
		}
		fi := 0
		for i := range n {
			off := int(binary.LittleEndian.Uint32(bot[4*i:]))
			if fi >= len(frags) || frags[fi].at != off {
				return nil, corruptf("Basic Offset Table entry %d (%d) is not the start of a fragment after the previous frame", i+1, off)
			}
			end := len(frags)
			if i+1 < n {
				next := int(binary.LittleEndian.Uint32(bot[4*(i+1):]))
				end = fi + 1
				for end < len(frags) && frags[end].at < next {
					end++
				}
			}
			groups = append(groups, frags[fi:end])
			fi = end
		}
	case n == 1:
		groups = append(groups, frags)
	case len(frags) == n:
		for i := range frags {
			groups = append(groups, frags[i:i+1])
		}
	default:
		if ts == RLELossless {
			return nil, corruptf("%d frames in %d fragments with an empty Basic Offset Table", n, len(frags))
		}
		start := -1
		for i, f := range frags {
			if bytes.HasPrefix(f.data, []byte{0xFF, 0xD8}) {
				if start >= 0 {
					groups = append(groups, frags[start:i])
				}
				start = i
			} else if start < 0 {
				return nil, corruptf("first fragment does not start with a JPEG SOI marker")
			}
		}
		groups = append(groups, frags[start:])
		if len(groups) != n {
			return nil, corruptf("%d frames declared, %d found by their SOI markers", n, len(groups))
		}
	}
	out := make([][]byte, len(groups))
	for i, g := range groups {
		if len(g) == 1 {
			out[i] = g[0].data
			continue
		}
		size := 0
		for _, f := range g {
			size += len(f.data)
		}
		buf := make([]byte, 0, size)
		for _, f := range g {
			buf = append(buf, f.data...)
		}
		out[i] = buf
	}
	return out, nil
}

// items parses the item sequence of an encapsulated value: the Basic
// Offset Table and the fragments, every length checked against value.
func items(value []byte) (bot []byte, frags []fragment, err error) {
	pos, first := 0, true
	base := 0
	for {
		if pos == len(value) {
			return bot, frags, nil // no delimiter: the caller's value ended it
		}
		if len(value)-pos < itemHeaderBytes {
			return nil, nil, corruptf("%d bytes left at byte %d, an item header needs %d", len(value)-pos, pos, itemHeaderBytes)
		}
		tag := uint32(binary.LittleEndian.Uint16(value[pos:]))<<16 | uint32(binary.LittleEndian.Uint16(value[pos+2:]))
		length := binary.LittleEndian.Uint32(value[pos+4:])
		switch tag {
		case tagSequenceDelim:
			return bot, frags, nil
		case tagItem:
		default:
			return nil, nil, corruptf("tag (%04X,%04X) at byte %d where an item was expected", tag>>16, tag&0xFFFF, pos)
		}
		if uint64(length) > uint64(len(value)-pos-itemHeaderBytes) {
			return nil, nil, corruptf("item at byte %d declares %d bytes, %d remain", pos, length, len(value)-pos-itemHeaderBytes)
		}
		data := value[pos+itemHeaderBytes : pos+itemHeaderBytes+int(length)]
		if first {
			bot, first = data, false
			base = pos + itemHeaderBytes + int(length)
		} else {
			frags = append(frags, fragment{at: pos - base, data: data})
		}
		pos += itemHeaderBytes + int(length)
	}
}
