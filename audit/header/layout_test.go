package header

import (
	"bytes"
	"encoding/binary"
	"errors"
	"testing"
)

func TestFindPixelDataLocatesThePixelData(t *testing.T) {
	le := binary.LittleEndian
	// Explicit VR little endian elements (PS3.5 7.1.2): a short string,
	// a sequence of one item, then pixel data.
	head := func() []byte {
		var b []byte
		b = append(b, 0x08, 0x00, 0x60, 0x00, 'C', 'S', 2, 0, 'M', 'R')
		item := []byte{0x20, 0x00, 0x32, 0x00, 'D', 'S', 2, 0, '1', ' '}
		b = append(b, 0x20, 0x00, 0x13, 0x91, 'S', 'Q', 0, 0)
		b = le.AppendUint32(b, uint32(8+len(item)))
		b = append(b, 0xFE, 0xFF, 0x00, 0xE0)
		b = le.AppendUint32(b, uint32(len(item)))
		return append(b, item...)
	}
	pixel := func(vr string, vl uint32, value []byte) []byte {
		b := append(head(), 0xE0, 0x7F, 0x10, 0x00, vr[0], vr[1], 0, 0)
		return append(le.AppendUint32(b, vl), value...)
	}
	// PS3.5 A.4: basic offset table item, one fragment, delimiter.
	fragments := []byte{0xFE, 0xFF, 0x00, 0xE0, 0, 0, 0, 0, 0xFE, 0xFF, 0x00, 0xE0, 2, 0, 0, 0, 1, 2, 0xFE, 0xFF, 0xDD, 0xE0, 0, 0, 0, 0}
	const off = 132 // any offset: positions are counted from it
	headLen := int64(len(head()))
	tests := []struct {
		name string
		data []byte
		want PixelDataLayout
		err  error
	}{
		{"native pixel data", pixel("OW", 8, make([]byte, 8)),
			PixelDataLayout{Tag: TagPixelData, Offset: off + headLen, ValueOffset: off + headLen + 12, Length: 8, End: off + headLen + 20}, nil},
		{"pixel data longer than the file", pixel("OW", 1<<30, make([]byte, 8)),
			PixelDataLayout{Tag: TagPixelData, Offset: off + headLen, ValueOffset: off + headLen + 12, Length: 1 << 30, End: off + headLen + 20, Truncated: true}, nil},
		{"encapsulated pixel data", pixel("OB", undefinedLength, fragments),
			PixelDataLayout{Tag: TagPixelData, Offset: off + headLen, ValueOffset: off + headLen + 12, Length: -1, End: off + headLen + 12 + int64(len(fragments))}, nil},
		{"no pixel data", head(), PixelDataLayout{}, nil},
		{"a sequence item longer than its sequence", append(head()[:len(head())-10-4], 0xFF, 0, 0, 0), PixelDataLayout{}, ErrMalformed},
	}
	for _, tt := range tests {
		t.Run(tt.name+" is found where it is", func(t *testing.T) {
			got, err := FindPixelData(bytes.NewReader(tt.data), le, false, off, off+int64(len(tt.data)))
			if !errors.Is(err, tt.err) {
				t.Fatalf("error %v, want %v", err, tt.err)
			}
			if got != tt.want {
				t.Errorf("got  %+v\nwant %+v", got, tt.want)
			}
		})
	}
}
