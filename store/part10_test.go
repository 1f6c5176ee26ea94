package store

import (
	"bytes"
	"encoding/binary"
	"errors"
	"testing"

	"dwiaudit/scp/part10"
)

// mustFileMeta is the envelope the store writes for an MR image.
func mustFileMeta(t testing.TB, sop, transferSyntax, sourceAE string) []byte {
	t.Helper()
	b, err := encodeFileMeta(mrImageStorage, sop, transferSyntax, sourceAE)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestFileMetaRoundTrip(t *testing.T) {
	cases := []struct {
		name   string
		sop    string
		ts     string
		ae     string
		wantAE string
	}{
		{"with an odd-length UID and a source AE", "2.25.123", explicitVRLE, "OSTMIRE_MR1", "OSTMIRE_MR1"},
		{"with an implicit syntax and no AE", "2.25.1234", implicitVRLE, "", ""},
		{"with an unusable AE left out", "2.25.1", explicitVRLE, `BAD\AE`, ""},
		{"with an over-long AE left out", "2.25.1", explicitVRLE, "A_TITLE_OF_17_CHR", ""},
		{"with a leading zero the store tolerates", "2.25.01", explicitVRLE, "", ""},
	}
	for _, c := range cases {
		t.Run("file meta "+c.name+" reads back", func(t *testing.T) {
			b := mustFileMeta(t, c.sop, c.ts, c.ae)
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
			if got.MediaStorageSOPClassUID != mrImageStorage || got.MediaStorageSOPInstanceUID != c.sop ||
				got.TransferSyntaxUID != c.ts || got.SourceApplicationEntityTitle != c.wantAE || off != int64(len(b)) {
				t.Errorf("read %+v at %d, want %s %s %q at %d", got, off, c.sop, c.ts, c.wantAE, len(b))
			}
		})
	}
}

func TestReadFileMetaRejects(t *testing.T) {
	good := mustFileMeta(t, "2.25.1", explicitVRLE, "")
	cases := []struct {
		name string
		data []byte
		want error
	}{
		{"an empty file", nil, part10.ErrNotPart10},
		{"a file without DICM", append(make([]byte, 128), "DICX"...), part10.ErrNotPart10},
		{"a cut file meta", good[:len(good)-5], part10.ErrTruncated},
		{"a file meta without transfer syntax", metaWithout(0x0010), part10.ErrNoTransferSyntax},
		{"an element longer than the limit", append(append(make([]byte, 128), "DICM"...),
			0x02, 0x00, 0x02, 0x01, 'O', 'B', 0, 0, 0xff, 0xff, 0xff, 0x7f), part10.ErrValueTooLong},
	}
	for _, c := range cases {
		t.Run(c.name+" is not read as Part 10", func(t *testing.T) {
			if _, _, err := readFileMeta(bytes.NewReader(c.data)); !errors.Is(err, c.want) {
				t.Errorf("readFileMeta = %v, want %v", err, c.want)
			}
		})
	}
}

// metaWithout writes a meta of the three UIDs without one of them and
// without a group length, followed by the start of a data set.
func metaWithout(element uint16) []byte {
	b := append(make([]byte, 128), "DICM"...)
	for _, e := range []struct {
		el uint16
		v  string
	}{{0x0002, mrImageStorage}, {0x0003, "2.25.1"}, {0x0010, explicitVRLE}} {
		if e.el == element {
			continue
		}
		v := []byte(e.v)
		if len(v)%2 == 1 {
			v = append(v, 0) // PS3.5 7.1.1
		}
		b = binary.LittleEndian.AppendUint16(b, 0x0002)
		b = binary.LittleEndian.AppendUint16(b, e.el)
		b = append(b, "UI"...)
		b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
		b = append(b, v...)
	}
	return append(b, 0x08, 0x00, 0x16, 0x00)
}
