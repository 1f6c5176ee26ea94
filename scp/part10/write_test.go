package part10

import (
	"bytes"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// written is a header made by WriteHeader and the meta ReadMeta should find.
type written struct {
	data   []byte
	meta   Meta
	offset int64
}

// writtenFile writes m's header followed by a small explicit VR data set that
// starts with group 0008, and returns it with the meta a reader should see.
func writtenFile(t testing.TB, m Meta) written {
	t.Helper()
	var b bytes.Buffer
	if err := WriteHeader(&b, m); err != nil {
		t.Fatal(err)
	}
	off := int64(b.Len())
	b.Write(element(0x00080016, "UI", pad([]byte(m.MediaStorageSOPClassUID), 0)))
	b.Write(element(0x00080018, "UI", pad([]byte(m.MediaStorageSOPInstanceUID), 0)))
	return written{data: b.Bytes(), meta: expectedRead(m), offset: off}
}

// expectedRead is what ReadMeta gives back for a header WriteHeader made
// from m: defaults filled, the version first in Other, padding in place.
func expectedRead(m Meta) Meta {
	if m.ImplementationClassUID == "" {
		m.ImplementationClassUID = ImplementationClassUID
	}
	if m.ImplementationVersionName == "" {
		m.ImplementationVersionName = ImplementationVersionName
	}
	other := []Element{version}
	for _, e := range m.Other {
		e.Value = pad(e.Value, padByte(e.VR))
		other = append(other, e)
	}
	m.Other = other
	return m
}

var minimalMeta = Meta{
	MediaStorageSOPClassUID:    "1.2.840.10008.5.1.4.1.1.4",
	MediaStorageSOPInstanceUID: "2.25.12345678901234567890",
	TransferSyntaxUID:          "1.2.840.10008.1.2.1",
}

func TestWriteHeaderRoundTrips(t *testing.T) {
	cases := []struct {
		name string
		meta Meta
	}{
		{"a minimal meta with our implementation defaults", minimalMeta},
		{"an implicit VR meta with a source AE title of odd length", Meta{
			MediaStorageSOPClassUID:      "1.2.840.10008.5.1.4.1.1.4",
			MediaStorageSOPInstanceUID:   "2.25.1",
			TransferSyntaxUID:            "1.2.840.10008.1.2",
			SourceApplicationEntityTitle: "QOH_MR",
		}},
		{"a meta with someone else's implementation identity", Meta{
			MediaStorageSOPClassUID:    "1.2.840.10008.5.1.4.1.1.4",
			MediaStorageSOPInstanceUID: "2.25.2",
			TransferSyntaxUID:          "1.2.840.10008.1.2.1",
			ImplementationClassUID:     "2.25.99",
			ImplementationVersionName:  "OTHER_1",
		}},
		{"a meta with private information", Meta{
			MediaStorageSOPClassUID:    "1.2.840.10008.5.1.4.1.1.4",
			MediaStorageSOPInstanceUID: "2.25.3",
			TransferSyntaxUID:          "1.2.840.10008.1.2.1",
			Other: []Element{
				{Tag: 0x00020100, VR: "UI", Value: []byte("2.25.4\x00")},
				{Tag: 0x00020102, VR: "OB", Value: []byte{1, 2, 3}},
			},
		}},
	}
	for _, c := range cases {
		t.Run("it reads back "+c.name, func(t *testing.T) {
			w := writtenFile(t, c.meta)
			m, off, err := ReadMeta(bytes.NewReader(w.data))
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(m, w.meta) {
				t.Errorf("meta\n got %+v\nwant %+v", m, w.meta)
			}
			if off != w.offset {
				t.Errorf("offset %d, header was %d bytes", off, w.offset)
			}
		})
	}
}

func TestWriteHeaderLayout(t *testing.T) {
	m := minimalMeta
	m.SourceApplicationEntityTitle = "DWIAUDIT"
	m.Other = []Element{{Tag: 0x00020100, VR: "UI", Value: []byte("2.25.5")}, version}
	var b bytes.Buffer
	if err := WriteHeader(&b, m); err != nil {
		t.Fatal(err)
	}
	h := b.Bytes()
	t.Run("the preamble is 128 zero bytes", func(t *testing.T) {
		// PS3.10 7.1: all 128 bytes 00H when the preamble is not used.
		if !bytes.Equal(h[:PreambleLength], make([]byte, PreambleLength)) {
			t.Fatal("preamble is not zero")
		}
	})
	t.Run("the prefix is DICM", func(t *testing.T) {
		if string(h[PreambleLength:HeaderStart]) != "DICM" { // PS3.10 7.1
			t.Fatalf("prefix %q", h[PreambleLength:HeaderStart])
		}
	})
	t.Run("the group length counts the bytes after it", func(t *testing.T) {
		// PS3.10 7.1 Table 7.1-1 (0002,0000).
		if want := []byte{0x02, 0x00, 0x00, 0x00, 'U', 'L', 4, 0}; !bytes.Equal(h[HeaderStart:HeaderStart+8], want) {
			t.Fatalf("group length header % x", h[HeaderStart:HeaderStart+8])
		}
		if n := binary.LittleEndian.Uint32(h[HeaderStart+8:]); int(n) != len(h)-HeaderStart-12 {
			t.Fatalf("group length %d, %d bytes follow", n, len(h)-HeaderStart-12)
		}
	})
	t.Run("elements are in ascending tag order, once each, with even lengths", func(t *testing.T) {
		s := &source{r: bytes.NewReader(h[HeaderStart:])}
		var tags []Tag
		for int(s.pos) < len(h)-HeaderStart {
			e, err := readElement(s)
			if err != nil {
				t.Fatal(err)
			}
			if len(e.Value)%2 != 0 { // PS3.5 7.1.1
				t.Errorf("%v has odd length %d", e.Tag, len(e.Value))
			}
			if e.VR == "UI" && len(e.Value) > 0 && strings.HasSuffix(string(e.Value), " ") { // PS3.5 6.2: UI pads with NUL
				t.Errorf("%v padded with a space", e.Tag)
			}
			if len(tags) > 0 && e.Tag <= tags[len(tags)-1] { // PS3.5 7.1
				t.Errorf("%v after %v", e.Tag, tags[len(tags)-1])
			}
			tags = append(tags, e.Tag)
		}
		want := []Tag{TagGroupLength, TagFileMetaInformationVersion, TagMediaStorageSOPClassUID,
			TagMediaStorageSOPInstanceUID, TagTransferSyntaxUID, TagImplementationClassUID,
			TagImplementationVersionName, TagSourceApplicationEntityTitle, 0x00020100}
		if !reflect.DeepEqual(tags, want) {
			t.Errorf("tags %v, want %v", tags, want)
		}
	})
	t.Run("the version is 00 01", func(t *testing.T) {
		// PS3.10 7.1 Table 7.1-1 (0002,0001): OB 00H 01H.
		want := []byte{0x02, 0x00, 0x01, 0x00, 'O', 'B', 0, 0, 2, 0, 0, 0, 0x00, 0x01}
		if !bytes.Equal(h[HeaderStart+12:HeaderStart+26], want) {
			t.Fatalf("version element % x", h[HeaderStart+12:HeaderStart+26])
		}
	})
}

func TestImplementationIdentity(t *testing.T) {
	t.Run("the implementation class UID is a valid 2.25 UID", func(t *testing.T) {
		if err := checkUID(ImplementationClassUID); err != nil { // PS3.5 9.1
			t.Fatal(err)
		}
		if !strings.HasPrefix(ImplementationClassUID, "2.25.") { // PS3.5 B.2
			t.Fatal(ImplementationClassUID)
		}
	})
	t.Run("the implementation version name fits SH", func(t *testing.T) {
		if err := checkText(ImplementationVersionName, 16); err != nil { // PS3.5 6.2 SH: 16 chars
			t.Fatal(err)
		}
	})
}

func TestWriteHeaderRejectsInvalidMeta(t *testing.T) {
	with := func(f func(*Meta)) Meta {
		m := minimalMeta
		f(&m)
		return m
	}
	cases := []struct {
		name string
		meta Meta
	}{
		{"a missing SOP class UID", with(func(m *Meta) { m.MediaStorageSOPClassUID = "" })},
		{"a missing SOP instance UID", with(func(m *Meta) { m.MediaStorageSOPInstanceUID = "" })},
		{"a missing transfer syntax UID", with(func(m *Meta) { m.TransferSyntaxUID = "" })},
		{"a UID of 65 characters", with(func(m *Meta) { m.MediaStorageSOPInstanceUID = "2.25." + strings.Repeat("1", 60) })},
		{"a UID with a letter", with(func(m *Meta) { m.MediaStorageSOPInstanceUID = "2.25.1a" })},
		{"a UID with an empty component", with(func(m *Meta) { m.MediaStorageSOPInstanceUID = "2.25..1" })},
		{"a UID with a leading zero", with(func(m *Meta) { m.MediaStorageSOPInstanceUID = "2.25.01" })},
		{"a UID with its padding", with(func(m *Meta) { m.TransferSyntaxUID = "1.2.840.10008.1.2\x00" })},
		{"a version name of 17 characters", with(func(m *Meta) { m.ImplementationVersionName = strings.Repeat("V", 17) })},
		{"an AE title of 17 characters", with(func(m *Meta) { m.SourceApplicationEntityTitle = strings.Repeat("A", 17) })},
		{"an AE title with a backslash", with(func(m *Meta) { m.SourceApplicationEntityTitle = `QOH\MR1` })},
		{"an other element outside group 0002", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00080016, VR: "UI", Value: []byte("1.2")}}
		})},
		{"an other element with an unknown VR", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00020100, VR: "XX", Value: []byte("1.2")}}
		})},
		{"an other element that is a sequence", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00020100, VR: "SQ"}}
		})},
		{"an other UI element above MaxValueLength", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00020100, VR: "UI", Value: bytes.Repeat([]byte("1"), MaxValueLength+2)}}
		})},
		{"an other OB element above MaxBinaryValueLength", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00020102, VR: "OB", Value: make([]byte, MaxBinaryValueLength+2)}}
		})},
	}
	for _, c := range cases {
		t.Run("it rejects "+c.name, func(t *testing.T) {
			var b bytes.Buffer
			err := WriteHeader(&b, c.meta)
			if !errors.Is(err, ErrInvalidMeta) {
				t.Fatalf("err = %v, want ErrInvalidMeta", err)
			}
			if b.Len() != 0 {
				t.Fatalf("%d bytes written despite the error", b.Len())
			}
		})
	}
}

type failingWriter struct{}

var errDiskFull = errors.New("disk full")

func (failingWriter) Write([]byte) (int, error) { return 0, errDiskFull }

func TestWriteHeaderReportsWriteErrors(t *testing.T) {
	if err := WriteHeader(failingWriter{}, minimalMeta); !errors.Is(err, errDiskFull) {
		t.Fatalf("err = %v", err)
	}
}

func TestDCMDumpAcceptsOurHeaders(t *testing.T) {
	explicit := readTestdata(t, "explicit.dcm")
	implicit := readTestdata(t, "implicit.dcm")
	cases := []struct {
		name    string
		meta    Meta
		dataset []byte
		xfer    string
	}{
		{"an explicit VR file", Meta{
			MediaStorageSOPClassUID:      explicitMeta.MediaStorageSOPClassUID,
			MediaStorageSOPInstanceUID:   explicitMeta.MediaStorageSOPInstanceUID,
			TransferSyntaxUID:            "1.2.840.10008.1.2.1",
			SourceApplicationEntityTitle: "DWIAUDIT",
		}, explicit[HeaderStart+12+groupLength(explicit):], "Little Endian Explicit"},
		{"an implicit VR file with private information", Meta{
			MediaStorageSOPClassUID:    implicitMeta.MediaStorageSOPClassUID,
			MediaStorageSOPInstanceUID: implicitMeta.MediaStorageSOPInstanceUID,
			TransferSyntaxUID:          "1.2.840.10008.1.2",
			Other: []Element{
				{Tag: 0x00020100, VR: "UI", Value: []byte("2.25.6")},
				{Tag: 0x00020102, VR: "OB", Value: []byte("synthetic")},
			},
		}, implicit[HeaderStart+12+groupLength(implicit):], "Little Endian Implicit"},
	}
	for _, c := range cases {
		t.Run("dcmdump reads "+c.name+" without warnings", func(t *testing.T) {
			var b bytes.Buffer
			if err := WriteHeader(&b, c.meta); err != nil {
				t.Fatal(err)
			}
			b.Write(c.dataset)
			path := filepath.Join(t.TempDir(), "ours.dcm")
			if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
			d := runDCMDump(t, path)
			if d.stderr != "" { // DCMTK dcmdump prints warnings and errors on stderr
				t.Fatalf("dcmdump complained:\n%s", d.stderr)
			}
			m, off, err := ReadMetaFile(path)
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstDump(t, m, d)
			// DCMTK dcmdump output: the data set is decoded in the meta's
			// transfer syntax, and the 3rd of its elements from the dump
			// (testdata/*.dump) is found.
			if !strings.Contains(d.text, "# Used TransferSyntax: "+c.xfer) {
				t.Errorf("dcmdump did not decode the data set as %s:\n%s", c.xfer, d.text)
			}
			if d.values["0008,0060"] != "MR" {
				t.Errorf("dcmdump: Modality %q, want MR", d.values["0008,0060"])
			}
			if d.values["0002,0012"] != ImplementationClassUID || d.values["0002,0013"] != ImplementationVersionName {
				t.Errorf("dcmdump: implementation %q %q", d.values["0002,0012"], d.values["0002,0013"])
			}
			if off != int64(b.Len()-len(c.dataset)) {
				t.Errorf("offset %d, header was %d bytes", off, b.Len()-len(c.dataset))
			}
		})
	}
}
