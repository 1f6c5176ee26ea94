package part10

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dwiaudit/scp/scptest"
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
		if !bytes.Equal(h[:preambleLength], make([]byte, preambleLength)) {
			t.Fatal("preamble is not zero")
		}
	})
	t.Run("the prefix is DICM", func(t *testing.T) {
		if string(h[preambleLength:headerStart]) != "DICM" { // PS3.10 7.1
			t.Fatalf("prefix %q", h[preambleLength:headerStart])
		}
	})
	t.Run("the group length counts the bytes after it", func(t *testing.T) {
		// PS3.10 7.1 Table 7.1-1 (0002,0000).
		if want := []byte{0x02, 0x00, 0x00, 0x00, 'U', 'L', 4, 0}; !bytes.Equal(h[headerStart:headerStart+8], want) {
			t.Fatalf("group length header % x", h[headerStart:headerStart+8])
		}
		if n := binary.LittleEndian.Uint32(h[headerStart+8:]); int(n) != len(h)-headerStart-12 {
			t.Fatalf("group length %d, %d bytes follow", n, len(h)-headerStart-12)
		}
	})
	t.Run("elements are in ascending tag order, once each, with even lengths", func(t *testing.T) {
		s := &source{r: bytes.NewReader(h[headerStart:])}
		var tags []Tag
		for int(s.pos) < len(h)-headerStart {
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
		if !bytes.Equal(h[headerStart+12:headerStart+26], want) {
			t.Fatalf("version element % x", h[headerStart+12:headerStart+26])
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
			m.Other = []Element{{Tag: 0x00020100, VR: "UI", Value: bytes.Repeat([]byte("1"), maxValueLength+2)}}
		})},
		{"an other OB element above MaxBinaryValueLength", with(func(m *Meta) {
			m.Other = []Element{{Tag: 0x00020102, VR: "OB", Value: make([]byte, maxBinaryValueLength+2)}}
		})},
	}
	for _, c := range cases {
		t.Run("it rejects "+c.name, func(t *testing.T) {
			var b bytes.Buffer
			err := WriteHeader(&b, c.meta)
			if !errors.Is(err, errInvalidMeta) {
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
		}, explicit[headerStart+12+groupLength(explicit):], "Little Endian Explicit"},
		{"an implicit VR file with private information", Meta{
			MediaStorageSOPClassUID:    implicitMeta.MediaStorageSOPClassUID,
			MediaStorageSOPInstanceUID: implicitMeta.MediaStorageSOPInstanceUID,
			TransferSyntaxUID:          "1.2.840.10008.1.2",
			Other: []Element{
				{Tag: 0x00020100, VR: "UI", Value: []byte("2.25.6")},
				{Tag: 0x00020102, VR: "OB", Value: []byte("synthetic")},
			},
		}, implicit[headerStart+12+groupLength(implicit):], "Little Endian Implicit"},
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
			d := scptest.DCMDump(t, path)
			if d.Stderr != "" { // DCMTK dcmdump prints warnings and errors on stderr
				t.Fatalf("dcmdump complained:\n%s", d.Stderr)
			}
			m, off, err := ReadMetaFile(path)
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstDump(t, m, d)
			// DCMTK dcmdump output: the data set is decoded in the meta's
			// transfer syntax, and the 3rd of its elements from the dump
			// (testdata/*.dump) is found.
			if !strings.Contains(d.Text, "# Used TransferSyntax: "+c.xfer) {
				t.Errorf("dcmdump did not decode the data set as %s:\n%s", c.xfer, d.Text)
			}
			if d.Values["0008,0060"] != "MR" {
				t.Errorf("dcmdump: Modality %q, want MR", d.Values["0008,0060"])
			}
			if d.Values["0002,0012"] != ImplementationClassUID || d.Values["0002,0013"] != ImplementationVersionName {
				t.Errorf("dcmdump: implementation %q %q", d.Values["0002,0012"], d.Values["0002,0013"])
			}
			if off != int64(b.Len()-len(c.dataset)) {
				t.Errorf("offset %d, header was %d bytes", off, b.Len()-len(c.dataset))
			}
		})
	}
}

func TestAppendHeaderIsWriteHeader(t *testing.T) {
	var w bytes.Buffer
	if err := WriteHeader(&w, minimalMeta); err != nil {
		t.Fatal(err)
	}
	prefix := []byte("kept")
	got, err := AppendHeader(prefix, minimalMeta)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got[:len(prefix)], prefix) || !bytes.Equal(got[len(prefix):], w.Bytes()) {
		t.Errorf("AppendHeader gave %d bytes after the prefix, WriteHeader %d; they differ", len(got)-len(prefix), w.Len())
	}
	bad := minimalMeta
	bad.TransferSyntaxUID = ""
	if out, err := AppendHeader(prefix, bad); !errors.Is(err, errInvalidMeta) || !bytes.Equal(out, prefix) {
		t.Errorf("AppendHeader of an invalid meta = %q, %v; want the prefix alone and ErrInvalidMeta", out, err)
	}
}

// TestAppendHeaderBytes pins the envelope byte for byte: the store writes
// every received instance with it, and files already stored must keep
// reading the same. The layout is PS3.10 7.1 Table 7.1-1 in Explicit VR
// Little Endian (PS3.5 7.1.2): zero preamble, "DICM", (0002,0000) UL,
// (0002,0001) OB with reserved bytes and a 32-bit length, then UI, SH and
// AE values padded to even length (PS3.5 7.1.1: NUL after UI, space after
// text).
func TestAppendHeaderBytes(t *testing.T) {
	got, err := AppendHeader(nil, Meta{
		MediaStorageSOPClassUID:      "1.2.840.10008.5.1.4.1.1.4",
		MediaStorageSOPInstanceUID:   "2.25.123",
		TransferSyntaxUID:            "1.2.840.10008.1.2.1",
		SourceApplicationEntityTitle: "QOH_MR1",
	})
	if err != nil {
		t.Fatal(err)
	}
	var want []byte
	want = append(want, make([]byte, 128)...)
	want = append(want, "DICM"...)
	want = append(want, 0x02, 0x00, 0x00, 0x00, 'U', 'L', 4, 0, 178, 0, 0, 0)
	want = append(want, 0x02, 0x00, 0x01, 0x00, 'O', 'B', 0, 0, 2, 0, 0, 0, 0x00, 0x01)
	want = append(want, 0x02, 0x00, 0x02, 0x00, 'U', 'I', 26, 0)
	want = append(want, "1.2.840.10008.5.1.4.1.1.4\x00"...)
	want = append(want, 0x02, 0x00, 0x03, 0x00, 'U', 'I', 8, 0)
	want = append(want, "2.25.123"...)
	want = append(want, 0x02, 0x00, 0x10, 0x00, 'U', 'I', 20, 0)
	want = append(want, "1.2.840.10008.1.2.1\x00"...)
	want = append(want, 0x02, 0x00, 0x12, 0x00, 'U', 'I', 42, 0)
	want = append(want, "2.25.5539447777562070585615222628860829091"...)
	want = append(want, 0x02, 0x00, 0x13, 0x00, 'S', 'H', 12, 0)
	want = append(want, "DWIAUDIT_010"...)
	want = append(want, 0x02, 0x00, 0x16, 0x00, 'A', 'E', 8, 0)
	want = append(want, "QOH_MR1 "...)
	if !bytes.Equal(got, want) {
		t.Errorf("AppendHeader:\n got %q\nwant %q", got, want)
	}
}

func TestWriteHeaderToleratesLeadingZeros(t *testing.T) {
	// PS3.5 9.1 forbids a leading zero in a component, but senders in the
	// field produce them and the store keeps such instances (as scp/pdu
	// lets them through); re-wrapping one must work.
	m := minimalMeta
	m.MediaStorageSOPInstanceUID = "2.25.01"
	w := writtenFile(t, m)
	got, off, err := ReadMeta(bytes.NewReader(w.data))
	if err != nil {
		t.Fatal(err)
	}
	if got.MediaStorageSOPInstanceUID != "2.25.01" || off != w.offset {
		t.Errorf("read back %q at %d, want 2.25.01 at %d", got.MediaStorageSOPInstanceUID, off, w.offset)
	}
}

func TestValidAETitle(t *testing.T) {
	cases := []struct {
		ae string
		ok bool
	}{
		{"QOH_MR1", true},
		{"A_TITLE_OF_16CHR", true}, // 16 characters: the AE limit (PS3.5 6.2 Table 6.2-1)
		{"A_TITLE_OF_17_CHR", false},
		{"", false},
		{`BAD\AE`, false}, // backslash separates values (PS3.5 6.2)
		{"TAB\tAE", false},
		{"ÄE", false},
	}
	for _, c := range cases {
		t.Run("the title "+strconvQuote(c.ae)+" is judged correctly", func(t *testing.T) {
			if got := ValidAETitle(c.ae); got != c.ok {
				t.Errorf("ValidAETitle(%q) = %v, want %v", c.ae, got, c.ok)
			}
			if c.ae == "" {
				return
			}
			m := minimalMeta
			m.SourceApplicationEntityTitle = c.ae
			if _, err := AppendHeader(nil, m); (err == nil) != c.ok {
				t.Errorf("AppendHeader with %q: %v, want ok=%v", c.ae, err, c.ok)
			}
		})
	}
}

func strconvQuote(s string) string { return strings.Trim(fmt.Sprintf("%q", s), `"`) }

func TestVRTable(t *testing.T) {
	// PS3.5 7.1.2 Table 7.1-1: the VRs with reserved bytes and a 32-bit
	// length; PS3.5 6.2 Table 6.2-1: every VR.
	long := []string{"OB", "OD", "OF", "OL", "OV", "OW", "SQ", "SV", "UC", "UN", "UR", "UT", "UV"}
	short := []string{"AE", "AS", "AT", "CS", "DA", "DS", "DT", "FD", "FL", "IS", "LO", "LT",
		"PN", "SH", "SL", "SS", "ST", "TM", "UI", "UL", "US"}
	for _, vr := range long {
		if !LongLengthVR(vr) || !knownVR(vr) {
			t.Errorf("%s: LongLengthVR %v, KnownVR %v; want both", vr, LongLengthVR(vr), knownVR(vr))
		}
	}
	for _, vr := range short {
		if LongLengthVR(vr) || !knownVR(vr) {
			t.Errorf("%s: LongLengthVR %v, KnownVR %v; want short and known", vr, LongLengthVR(vr), knownVR(vr))
		}
	}
	for _, vr := range []string{"NA", "XX", "ob", ""} {
		if knownVR(vr) || LongLengthVR(vr) {
			t.Errorf("%q is taken for a VR", vr)
		}
	}
}
