package store

import (
	"bytes"
	"encoding/binary"
	"errors"
	"testing"
)

func TestFileMetaRoundTrip(t *testing.T) {
	cases := []struct {
		name   string
		meta   fileMeta
		wantAE string
	}{
		{"with an odd-length UID and a source AE", fileMeta{mrImageStorage, "2.25.123", explicitVRLE, "OSTMIRE_MR1"}, "OSTMIRE_MR1"},
		{"with an implicit syntax and no AE", fileMeta{mrImageStorage, "2.25.1234", implicitVRLE, ""}, ""},
		{"with an unusable AE left out", fileMeta{mrImageStorage, "2.25.1", explicitVRLE, `BAD\AE`}, ""},
		{"with an over-long AE left out", fileMeta{mrImageStorage, "2.25.1", explicitVRLE, "A_TITLE_OF_17_CHR"}, ""},
	}
	for _, c := range cases {
		t.Run("file meta "+c.name+" reads back", func(t *testing.T) {
			b := encodeFileMeta(c.meta)
			if !bytes.Equal(b[:128], make([]byte, 128)) || string(b[128:132]) != "DICM" { // PS3.10 7.1
				t.Fatal("no zero preamble and DICM prefix")
			}
			// (0002,0000) holds the length of the rest of the group (PS3.10 7.1 Table 7.1-1).
			if gl := binary.LittleEndian.Uint32(b[140:144]); int(gl) != len(b)-144 {
				t.Errorf("group length %d, rest of group %d", gl, len(b)-144)
			}
			if len(b)%2 != 0 {
				t.Errorf("odd meta length %d (PS3.5 7.1.1 wants even values)", len(b))
			}
			got, off, err := readFileMeta(bytes.NewReader(append(b, 0x08, 0x00, 0x16, 0x00)))
			if err != nil {
				t.Fatal(err)
			}
			want := c.meta
			want.SourceAETitle = c.wantAE
			if got != want || off != int64(len(b)) {
				t.Errorf("read %+v at %d, want %+v at %d", got, off, want, len(b))
			}
		})
	}
}

func TestReadFileMetaRejects(t *testing.T) {
	good := encodeFileMeta(fileMeta{mrImageStorage, "2.25.1", explicitVRLE, ""})
	cases := []struct {
		name string
		data []byte
	}{
		{"an empty file", nil},
		{"a file without DICM", append(make([]byte, 128), "DICX"...)},
		{"a cut file meta", good[:len(good)-5]},
		{"a file meta without transfer syntax", encodeMetaWithout(0x0010)},
		{"an element longer than the limit", append(append(make([]byte, 128), "DICM"...),
			0x02, 0x00, 0x02, 0x01, 'O', 'B', 0, 0, 0xff, 0xff, 0xff, 0x7f)},
	}
	for _, c := range cases {
		t.Run(c.name+" is not read as Part 10", func(t *testing.T) {
			if _, _, err := readFileMeta(bytes.NewReader(c.data)); !errors.Is(err, errNotPart10) {
				t.Errorf("readFileMeta = %v, want errNotPart10", err)
			}
		})
	}
}

// encodeMetaWithout writes a meta without one element (no group length).
func encodeMetaWithout(element uint16) []byte {
	b := append(make([]byte, 128), "DICM"...)
	for _, e := range []struct {
		el uint16
		v  string
	}{{0x0002, mrImageStorage}, {0x0003, "2.25.1"}, {0x0010, explicitVRLE}} {
		if e.el != element {
			b = appendElement(b, e.el, "UI", padded(e.v, 0))
		}
	}
	return b
}
