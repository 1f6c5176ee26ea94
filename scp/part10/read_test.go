package part10

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strconv"
	"testing"

	"dwiaudit/scp/scptest"
)

// dcmtkImplementationClassUID and dcmtkVersionName are what DCMTK 3.6.7's
// dump2dcm wrote into the committed testdata files (DCMTK dcmdump output).
const (
	dcmtkImplementationClassUID = "1.2.276.0.7230010.3.0.3.6.7"
	dcmtkVersionName            = "OFFIS_DCMTK_367"
)

func readTestdata(t testing.TB, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// withoutGroupLength removes (0002,0000), the 12 bytes after the prefix, from
// a file that has it.
func withoutGroupLength(b []byte) []byte {
	out := append([]byte{}, b[:headerStart]...)
	return append(out, b[headerStart+12:]...)
}

// withGroupLength rewrites the value of (0002,0000).
func withGroupLength(b []byte, n uint32) []byte {
	out := append([]byte{}, b...)
	binary.LittleEndian.PutUint32(out[headerStart+8:], n)
	return out
}

func groupLength(b []byte) uint32 { return binary.LittleEndian.Uint32(b[headerStart+8:]) }

// version is (0002,0001) as ReadMeta keeps it in Other.
var version = Element{Tag: TagFileMetaInformationVersion, VR: "OB", Value: []byte{0x00, 0x01}}

// explicitMeta is testdata/explicit.dcm's meta information: the values of
// testdata/explicit.dump plus what dump2dcm added (DCMTK dcmdump output).
var explicitMeta = Meta{
	MediaStorageSOPClassUID:      "1.2.840.10008.5.1.4.1.1.4",
	MediaStorageSOPInstanceUID:   "2.25.271828182845904523536028747135266249775",
	TransferSyntaxUID:            "1.2.840.10008.1.2.1",
	ImplementationClassUID:       dcmtkImplementationClassUID,
	ImplementationVersionName:    dcmtkVersionName,
	SourceApplicationEntityTitle: "QOH_MR1",
	Other: []Element{
		version,
		{Tag: 0x00020100, VR: "UI", Value: []byte("2.25.314159265358979323846264338327950288419")},
		{Tag: 0x00020102, VR: "OB", Value: []byte("dwiaudit")},
	},
}

// implicitMeta is testdata/implicit.dcm's meta information (values of
// testdata/implicit.dump; implementation fields from DCMTK dcmdump output).
var implicitMeta = Meta{
	MediaStorageSOPClassUID:    "1.2.840.10008.5.1.4.1.1.4",
	MediaStorageSOPInstanceUID: "2.25.161803398874989484820458683436563811772",
	TransferSyntaxUID:          "1.2.840.10008.1.2",
	ImplementationClassUID:     dcmtkImplementationClassUID,
	ImplementationVersionName:  dcmtkVersionName,
	Other:                      []Element{version},
}

// variant is one Part 10 file the reading tests run over.
type variant struct {
	name   string
	data   []byte
	meta   Meta
	offset int64
	// ahead is how many bytes past the offset ReadMeta needs: none when the
	// group length is right, the lookahead when it must find the end of
	// group 0002 by the next element's group.
	ahead int64
}

func variants(t testing.TB) []variant {
	explicit := readTestdata(t, "explicit.dcm")
	implicit := readTestdata(t, "implicit.dcm")
	// PS3.10 7.1 Table 7.1-1: the group length counts the bytes after the
	// 12-byte (0002,0000) element up to the end of group 0002.
	explicitOff := int64(headerStart) + 12 + int64(groupLength(explicit))
	implicitOff := int64(headerStart) + 12 + int64(groupLength(implicit))
	return []variant{
		{"an explicit VR file written by DCMTK", explicit, explicitMeta, explicitOff, 0},
		{"an implicit VR file written by DCMTK", implicit, implicitMeta, implicitOff, 0},
		{"a file without group length", withoutGroupLength(explicit), explicitMeta, explicitOff - 12, lookahead},
		{"a file whose group length is 8 bytes too long", withGroupLength(explicit, groupLength(explicit)+8),
			explicitMeta, explicitOff, lookahead},
	}
}

func TestReadMetaReadsTestdata(t *testing.T) {
	for _, v := range variants(t) {
		t.Run("it reads "+v.name, func(t *testing.T) {
			m, off, err := ReadMeta(bytes.NewReader(v.data))
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(m, v.meta) {
				t.Errorf("meta\n got %+v\nwant %+v", m, v.meta)
			}
			if off != v.offset {
				t.Errorf("offset %d, want %d", off, v.offset)
			}
			// The data sets in testdata begin with (0008,0016) SOP Class UID
			// (testdata/*.dump).
			if g := binary.LittleEndian.Uint16(v.data[off:]); g != 0x0008 {
				t.Errorf("data set at %d starts with group %04X, want 0008", off, g)
			}
		})
	}
}

func TestReadMetaAgreesWithDCMDump(t *testing.T) {
	for _, v := range variants(t) {
		t.Run("it agrees with dcmdump on "+v.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "f.dcm")
			if err := os.WriteFile(path, v.data, 0o644); err != nil {
				t.Fatal(err)
			}
			d := scptest.DCMDump(t, path)
			m, off, err := ReadMeta(bytes.NewReader(v.data))
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstDump(t, m, d)
			if gl, ok := d.Values["0002,0000"]; ok && v.ahead == 0 {
				n, err := strconv.Atoi(gl)
				if err != nil {
					t.Fatal(err)
				}
				// DCMTK dcmdump output: group length; PS3.10 7.1 Table 7.1-1.
				if want := int64(headerStart + 12 + n); off != want {
					t.Errorf("offset %d, dcmdump's group length %d puts it at %d", off, n, want)
				}
			}
		})
	}
}

// checkAgainstDump compares the named fields of m with dcmdump's values.
func checkAgainstDump(t *testing.T, m Meta, d scptest.Dump) {
	t.Helper()
	fields := []struct {
		tag, got string
	}{
		{"0002,0002", m.MediaStorageSOPClassUID},      // DCMTK dcmdump output
		{"0002,0003", m.MediaStorageSOPInstanceUID},   // DCMTK dcmdump output
		{"0002,0010", m.TransferSyntaxUID},            // DCMTK dcmdump output
		{"0002,0012", m.ImplementationClassUID},       // DCMTK dcmdump output
		{"0002,0013", m.ImplementationVersionName},    // DCMTK dcmdump output
		{"0002,0016", m.SourceApplicationEntityTitle}, // DCMTK dcmdump output
	}
	for _, f := range fields {
		if want := d.Values[f.tag]; f.got != want {
			t.Errorf("(%s) = %q, dcmdump says %q", f.tag, f.got, want)
		}
	}
}

func TestReadMetaReadsFreshDCMTKFiles(t *testing.T) {
	dump2dcm := scptest.NeedDCMTK(t, "dump2dcm")
	cases := []struct {
		name string
		args []string
		dump string
	}{
		{"it reads what dump2dcm writes in explicit VR", nil, "explicit.dump"},
		{"it reads what dump2dcm writes in implicit VR", []string{"+ti"}, "implicit.dump"},
		{"it reads what dump2dcm writes in explicit VR with group lengths everywhere", []string{"+g"}, "explicit.dump"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "f.dcm")
			args := append(append([]string{}, c.args...), filepath.Join("testdata", c.dump), out)
			if b, err := exec.Command(dump2dcm, args...).CombinedOutput(); err != nil {
				t.Fatalf("dump2dcm: %v\n%s", err, b)
			}
			m, off, err := ReadMetaFile(out)
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstDump(t, m, scptest.DCMDump(t, out))
			data, err := os.ReadFile(out)
			if err != nil {
				t.Fatal(err)
			}
			// With +g the data set starts with the (0008,0000) group length,
			// otherwise with (0008,0016) (testdata/*.dump); group 0008 either way.
			if g := binary.LittleEndian.Uint16(data[off:]); g != 0x0008 {
				t.Errorf("data set at %d starts with group %04X, want 0008", off, g)
			}
		})
	}
}

func TestReadMetaRejectsFilesThatAreNotPart10(t *testing.T) {
	cases := []struct {
		name string
		data []byte
	}{
		{"a text file", readTestdata(t, "explicit.dump")},
		{"an empty file", nil},
		{"a file shorter than the preamble", make([]byte, 100)},
		{"a preamble of zeros without the prefix", make([]byte, 400)},
		{"a prefix at offset 0 without the preamble", append([]byte("DICM"), make([]byte, 300)...)},
		{"a data set without file meta information", readTestdata(t, "explicit.dcm")[headerStart+12+groupLength(readTestdata(t, "explicit.dcm")):]},
		{"a prefix in lower case", append(make([]byte, preambleLength), []byte("dicm\x02\x00\x00\x00UL\x04\x00\x00\x00\x00\x00")...)},
	}
	for _, c := range cases {
		t.Run("it rejects "+c.name, func(t *testing.T) {
			_, _, err := ReadMeta(bytes.NewReader(c.data))
			if !errors.Is(err, ErrNotPart10) {
				t.Fatalf("err = %v, want ErrNotPart10", err)
			}
		})
	}
}

func TestReadMetaFailsOnEveryTruncation(t *testing.T) {
	written := writtenFile(t, Meta{
		MediaStorageSOPClassUID:    "1.2.840.10008.5.1.4.1.1.4",
		MediaStorageSOPInstanceUID: "2.25.1",
		TransferSyntaxUID:          "1.2.840.10008.1.2.1",
	})
	all := append(variants(t), variant{"a file written by WriteHeader", written.data, written.meta, written.offset, 0})
	readers := []struct {
		name string
		wrap func([]byte) io.Reader
	}{
		{"a plain reader", func(b []byte) io.Reader { return bytes.NewReader(b) }},
		{"a bufio.Reader", func(b []byte) io.Reader { return bufio.NewReader(bytes.NewReader(b)) }},
	}
	for _, v := range all {
		for _, rd := range readers {
			t.Run("it fails on every cut of "+v.name+" through "+rd.name, func(t *testing.T) {
				for n := 0; n <= len(v.data); n++ {
					m, off, err := ReadMeta(rd.wrap(v.data[:n]))
					switch {
					case int64(n) < v.offset+v.ahead:
						if err == nil {
							t.Fatalf("cut at %d of %d: no error", n, v.offset)
						}
						if n < headerStart && !errors.Is(err, ErrNotPart10) {
							t.Fatalf("cut at %d: err = %v, want ErrNotPart10", n, err)
						}
						if n >= headerStart && !errors.Is(err, ErrTruncated) {
							t.Fatalf("cut at %d: err = %v, want ErrTruncated", n, err)
						}
					default:
						if err != nil {
							t.Fatalf("cut at %d, past the meta information at %d: %v", n, v.offset, err)
						}
						if off != v.offset || !reflect.DeepEqual(m, v.meta) {
							t.Fatalf("cut at %d: read %+v at %d", n, m, off)
						}
					}
				}
			})
		}
	}
}

func TestReadMetaLeavesAPeekableReaderAtTheDataSet(t *testing.T) {
	for _, v := range variants(t) {
		t.Run("a bufio.Reader is left at the data set of "+v.name, func(t *testing.T) {
			br := bufio.NewReader(bytes.NewReader(v.data))
			_, off, err := ReadMeta(br)
			if err != nil {
				t.Fatal(err)
			}
			rest, err := io.ReadAll(br)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(rest, v.data[off:]) {
				t.Fatalf("%d bytes left, want the %d from offset %d", len(rest), len(v.data)-int(off), off)
			}
		})
	}
}

// element encodes one Explicit VR Little Endian element for crafted inputs,
// without the limits WriteHeader applies (PS3.5 7.1.2).
func element(tag Tag, vr string, value []byte) []byte {
	if LongLengthVR(vr) {
		return append(longHeader(tag, vr, uint32(len(value))), value...)
	}
	b := binary.LittleEndian.AppendUint16(nil, tag.group())
	b = binary.LittleEndian.AppendUint16(b, tag.element())
	b = append(b, vr...)
	b = binary.LittleEndian.AppendUint16(b, uint16(len(value)))
	return append(b, value...)
}

// crafted builds preamble, prefix, the given raw elements and a data set
// that starts with group 0008.
func crafted(elems ...[]byte) []byte {
	b := append(make([]byte, preambleLength), prefix...)
	for _, e := range elems {
		b = append(b, e...)
	}
	return append(b, element(0x00080016, "UI", []byte("1.2.840.10008.5.1.4.1.1.4\x00"))...)
}

// longHeader is a 32-bit-length element header claiming length n.
func longHeader(tag Tag, vr string, n uint32) []byte {
	b := binary.LittleEndian.AppendUint16(nil, tag.group())
	b = binary.LittleEndian.AppendUint16(b, tag.element())
	b = append(b, vr...)
	b = append(b, 0, 0)
	return binary.LittleEndian.AppendUint32(b, n)
}

func ul(n uint32) []byte { return binary.LittleEndian.AppendUint32(nil, n) }

var ts = element(TagTransferSyntaxUID, "UI", []byte("1.2.840.10008.1.2.1\x00"))

func TestReadMetaRejectsMalformedMetaInformation(t *testing.T) {
	many := [][]byte{}
	for i := 0; i < maxMetaLength/(maxValueLength+8)+2; i++ {
		many = append(many, element(0x00020100, "UI", bytes.Repeat([]byte("1"), maxValueLength)))
	}
	cases := []struct {
		name string
		data []byte
		want error
		tag  Tag // of the *elementError, 0 when none is expected
	}{
		{"a text value longer than MaxValueLength", crafted(ts, longHeader(0x00020026, "UR", maxValueLength+1)),
			ErrValueTooLong, 0x00020026},
		{"a UI value longer than MaxValueLength", crafted(element(TagMediaStorageSOPClassUID, "UI", make([]byte, maxValueLength+2)), ts),
			ErrValueTooLong, TagMediaStorageSOPClassUID},
		{"an OB value longer than MaxBinaryValueLength", crafted(ts, longHeader(0x00020102, "OB", maxBinaryValueLength+1)),
			ErrValueTooLong, 0x00020102},
		{"an OB value claiming 4 GiB", crafted(ts, longHeader(0x00020102, "OB", 0xFFFFFFFE)),
			ErrValueTooLong, 0x00020102},
		{"an undefined length", crafted(ts, longHeader(0x00020102, "OB", 0xFFFFFFFF)),
			errUndefinedLength, 0x00020102},
		{"a sequence", crafted(ts, longHeader(0x00020102, "SQ", 0xFFFFFFFF)),
			errUndefinedLength, 0x00020102},
		{"an unknown VR", crafted(ts, []byte{0x02, 0x00, 0x12, 0x00, 'z', 'z', 0x02, 0x00, '1', 0x00}),
			errBadVR, TagImplementationClassUID},
		{"implicit VR meta information", crafted([]byte{0x02, 0x00, 0x10, 0x00, 0x14, 0x00, 0x00, 0x00}, []byte("1.2.840.10008.1.2.1\x00")),
			errBadVR, TagTransferSyntaxUID},
		{"a group length above MaxMetaLength", crafted(element(TagGroupLength, "UL", ul(maxMetaLength+1)), ts),
			errMetaTooLong, TagGroupLength},
		{"a group length that is not UL", crafted(element(TagGroupLength, "UI", []byte("12")), ts),
			errBadGroupLength, TagGroupLength},
		{"a group length of 2 bytes", crafted(element(TagGroupLength, "UL", []byte{1, 0}), ts),
			errBadGroupLength, TagGroupLength},
		{"no transfer syntax", crafted(element(TagMediaStorageSOPClassUID, "UI", []byte("1.2\x00"))),
			ErrNoTransferSyntax, 0},
		{"more meta information than MaxMetaLength without a group length", crafted(append([][]byte{ts}, many...)...),
			errMetaTooLong, 0x00020100},
		{"meta information that ends the file", append(append(make([]byte, preambleLength), prefix...), ts...),
			ErrTruncated, 0},
	}
	for _, c := range cases {
		t.Run("it rejects "+c.name, func(t *testing.T) {
			_, _, err := ReadMeta(bytes.NewReader(c.data))
			if !errors.Is(err, c.want) {
				t.Fatalf("err = %v, want %v", err, c.want)
			}
			var ee *elementError
			if c.tag != 0 {
				if !errors.As(err, &ee) || ee.Tag != c.tag {
					t.Fatalf("err = %v, want an *ElementError for %v", err, c.tag)
				}
			}
		})
	}
}

func TestReadMetaAcceptsValuesUpToTheLimits(t *testing.T) {
	data := crafted(ts,
		element(0x00020100, "UI", bytes.Repeat([]byte("1"), maxValueLength)),
		element(0x00020102, "OB", make([]byte, maxBinaryValueLength)))
	m, _, err := ReadMeta(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	if len(m.Other) != 2 || len(m.Other[1].Value) != maxBinaryValueLength {
		t.Fatalf("other elements %d, want the 2 at their limits", len(m.Other))
	}
}

func TestReadMetaTrimsPadding(t *testing.T) {
	data := crafted(
		element(TagMediaStorageSOPClassUID, "UI", []byte("1.2.3\x00")),
		element(TagMediaStorageSOPInstanceUID, "UI", []byte("1.2.34 ")), // space-padded, a common writer bug
		ts,
		element(TagImplementationClassUID, "UI", []byte("1.2.3.4\x00\x00\x00")),
		element(TagImplementationVersionName, "SH", []byte("VER1 ")),
		element(TagSourceApplicationEntityTitle, "AE", []byte("  QOH_MR1       ")),
	)
	m, _, err := ReadMeta(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	want := Meta{
		MediaStorageSOPClassUID:      "1.2.3",
		MediaStorageSOPInstanceUID:   "1.2.34",
		TransferSyntaxUID:            "1.2.840.10008.1.2.1",
		ImplementationClassUID:       "1.2.3.4",
		ImplementationVersionName:    "VER1",
		SourceApplicationEntityTitle: "QOH_MR1", // PS3.5 6.2: AE leading and trailing spaces are not significant
	}
	if !reflect.DeepEqual(m, want) {
		t.Fatalf("got %+v\nwant %+v", m, want)
	}
}

func TestReadMetaFile(t *testing.T) {
	t.Run("it reads a file by path", func(t *testing.T) {
		m, off, err := ReadMetaFile(filepath.Join("testdata", "implicit.dcm"))
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(m, implicitMeta) || off != variants(t)[1].offset {
			t.Fatalf("got %+v at %d", m, off)
		}
	})
	t.Run("it reports a missing file as fs.ErrNotExist", func(t *testing.T) {
		_, _, err := ReadMetaFile(filepath.Join(t.TempDir(), "absent.dcm"))
		if !errors.Is(err, fs.ErrNotExist) {
			t.Fatalf("err = %v", err)
		}
	})
	t.Run("it names the file when it is not Part 10", func(t *testing.T) {
		path := filepath.Join("testdata", "explicit.dump")
		_, _, err := ReadMetaFile(path)
		if !errors.Is(err, ErrNotPart10) || !bytes.Contains([]byte(err.Error()), []byte(path)) {
			t.Fatalf("err = %v", err)
		}
	})
}
