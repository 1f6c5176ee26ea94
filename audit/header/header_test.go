package header

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"dwiaudit/audit/synth"
	"dwiaudit/scp/part10"
)

// Transfer syntaxes (PS3.6 Annex A).
const (
	implicitLE = "1.2.840.10008.1.2"
	explicitLE = "1.2.840.10008.1.2.1"
	deflatedLE = "1.2.840.10008.1.2.1.99"
	explicitBE = "1.2.840.10008.1.2.2"
	mrStorage  = "1.2.840.10008.5.1.4.1.1.4"
)

// handEnc builds data sets by hand, for cases no writer would produce.
type handEnc struct {
	bo       binary.AppendByteOrder
	implicit bool
	b        bytes.Buffer
}

// el appends one element (PS3.5 7.1.2 explicit, 7.1.3 implicit).
func (e *handEnc) el(group, elem uint16, vr string, value []byte) *handEnc {
	return e.elLen(group, elem, vr, uint32(len(value)), value)
}

// elLen appends an element whose declared length may lie.
func (e *handEnc) elLen(group, elem uint16, vr string, vl uint32, value []byte) *handEnc {
	e.b.Write(e.bo.AppendUint16(nil, group))
	e.b.Write(e.bo.AppendUint16(nil, elem))
	switch {
	case e.implicit:
		e.b.Write(e.bo.AppendUint32(nil, vl))
	case longLengthVR(vr):
		e.b.WriteString(vr)
		e.b.Write([]byte{0, 0})
		e.b.Write(e.bo.AppendUint32(nil, vl))
	default:
		e.b.WriteString(vr)
		e.b.Write(e.bo.AppendUint16(nil, uint16(vl)))
	}
	e.b.Write(value)
	return e
}

// str pads a text value to even length (PS3.5 7.1.1: space, NUL for UI).
func str(s string, pad byte) []byte {
	b := []byte(s)
	if len(b)%2 == 1 {
		b = append(b, pad)
	}
	return b
}

// identityElements appends the attributes Identity reads, in tag order.
func (e *handEnc) identityElements() *handEnc {
	return e.
		el(0x0008, 0x0016, "UI", str(mrStorage, 0)).
		el(0x0008, 0x0018, "UI", str("2.25.1001", 0)).
		el(0x0008, 0x0020, "DA", str("20250314", ' ')).
		el(0x0008, 0x0030, "TM", str("093000", ' ')).
		el(0x0008, 0x0050, "SH", str("ACC7", ' ')).
		el(0x0008, 0x0060, "CS", str("MR", ' ')).
		el(0x0008, 0x0070, "LO", str("Synthetic", ' ')).
		el(0x0008, 0x0080, "LO", str("Quellvander Ostmire Hospital", ' ')).
		el(0x0008, 0x1010, "SH", str("QOH-MR2", ' ')).
		el(0x0008, 0x103E, "LO", str("DWI hand made", ' ')).
		el(0x0010, 0x0010, "PN", str("TEST^PHANTOM", ' ')).
		el(0x0010, 0x0020, "LO", str("PHANTOM01", ' ')).
		el(0x0018, 0x1000, "LO", str("SN-0042", ' ')).
		el(0x0020, 0x000D, "UI", str("2.25.2002", 0)).
		el(0x0020, 0x000E, "UI", str("2.25.3003", 0)).
		el(0x0020, 0x0011, "IS", str(" 7", ' ')).
		el(0x0020, 0x0013, "IS", str("12", ' ')).
		el(0x0020, 0x0052, "UI", str("2.25.4004", 0))
}

// wantHandMade is what identityElements encodes.
var wantHandMade = Identity{
	SOPClassUID: mrStorage, SOPInstanceUID: "2.25.1001",
	StudyInstanceUID: "2.25.2002", SeriesInstanceUID: "2.25.3003", FrameOfReferenceUID: "2.25.4004",
	StudyDate: "20250314", StudyTime: "093000", AccessionNumber: "ACC7", Modality: "MR",
	SeriesDescription: "DWI hand made", SeriesNumber: 7, InstanceNumber: 12,
	PatientName: "TEST^PHANTOM", PatientID: "PHANTOM01",
	InstitutionName: "Quellvander Ostmire Hospital", Manufacturer: "Synthetic",
	StationName: "QOH-MR2", DeviceSerialNumber: "SN-0042",
}

// writePart10 writes a Part 10 file (PS3.10 7.1) around a data set.
func writePart10(t *testing.T, ts string, dataSet []byte) string {
	t.Helper()
	var b bytes.Buffer
	err := part10.WriteHeader(&b, part10.Meta{
		MediaStorageSOPClassUID:    mrStorage,
		MediaStorageSOPInstanceUID: "2.25.1001",
		TransferSyntaxUID:          ts,
	})
	if err != nil {
		t.Fatal(err)
	}
	b.Write(dataSet)
	path := filepath.Join(t.TempDir(), "x.dcm")
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func deflate(t *testing.T, b []byte) []byte {
	t.Helper()
	var out bytes.Buffer
	w, err := flate.NewWriter(&out, flate.BestCompression)
	if err != nil {
		t.Fatal(err)
	}
	w.Write(b)
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return out.Bytes()
}

func TestReadFileReadsSynthSeries(t *testing.T) {
	for _, ts := range []string{synth.ExplicitVRLittleEndian, synth.ImplicitVRLittleEndian} {
		t.Run("synthetic MR in "+ts+" reads back what synth wrote", func(t *testing.T) {
			dir := t.TempDir()
			s := synth.Series{Slices: 3, Rows: 32, Columns: 32, Seed: 5, TransferSyntaxUID: ts,
				StudyInstanceUID: "2.25.77", SeriesInstanceUID: "2.25.78"}
			paths, err := synth.WriteSeries(dir, s)
			if err != nil {
				t.Fatal(err)
			}
			id, err := ReadFile(paths[2])
			if err != nil {
				t.Fatal(err)
			}
			meta, _, err := part10.ReadMetaFile(paths[2])
			if err != nil {
				t.Fatal(err)
			}
			// The expected values are the constants synth writes
			// (audit/synth/synth.go).
			want := Identity{
				TransferSyntaxUID: ts,
				SOPClassUID:       synth.MRImageStorage, SOPInstanceUID: meta.MediaStorageSOPInstanceUID,
				StudyInstanceUID: "2.25.77", SeriesInstanceUID: "2.25.78", FrameOfReferenceUID: id.FrameOfReferenceUID,
				StudyDate: synth.StudyDate, StudyTime: synth.StudyTime, AccessionNumber: synth.AccessionNumber,
				Modality: "MR", SeriesDescription: synth.SeriesDescription, SeriesNumber: 1, InstanceNumber: 3,
				PatientName: synth.PatientName, PatientID: synth.PatientID,
				InstitutionName: synth.InstitutionName, Manufacturer: synth.Manufacturer, StationName: synth.StationName,
			}
			if id != want {
				t.Errorf("got  %+v\nwant %+v", id, want)
			}
			if id.FrameOfReferenceUID == "" {
				t.Error("no Frame of Reference UID")
			}
		})
	}
}

func TestReadFileReadsEveryByteOrderAndDeflate(t *testing.T) {
	le := (&handEnc{bo: binary.LittleEndian}).identityElements().b.Bytes()
	tests := []struct {
		name    string
		ts      string
		dataSet []byte
	}{
		{"explicit VR little endian", explicitLE, le},
		{"implicit VR little endian", implicitLE, (&handEnc{bo: binary.LittleEndian, implicit: true}).identityElements().b.Bytes()},
		{"explicit VR big endian", explicitBE, (&handEnc{bo: binary.BigEndian}).identityElements().b.Bytes()},
		// PS3.5 A.5: the data set of Deflated Explicit VR Little Endian
		// is raw deflate (RFC 1951) of its explicit LE encoding.
		{"deflated explicit VR little endian", deflatedLE, deflate(t, le)},
	}
	for _, tt := range tests {
		t.Run(tt.name+" reads every attribute", func(t *testing.T) {
			id, err := ReadFile(writePart10(t, tt.ts, tt.dataSet))
			if err != nil {
				t.Fatal(err)
			}
			want := wantHandMade
			want.TransferSyntaxUID = tt.ts
			if id != want {
				t.Errorf("got  %+v\nwant %+v", id, want)
			}
		})
	}
}

func TestReadFileStopsBeforePixelData(t *testing.T) {
	// After group 0020 comes a pixel data element claiming 1 GiB that is
	// not there: the region the parser reads ends before it, so the
	// file still identifies.
	e := (&handEnc{bo: binary.LittleEndian}).identityElements()
	e.elLen(0x7FE0, 0x0010, "OW", 1<<30, make([]byte, 64))
	id, err := ReadFile(writePart10(t, explicitLE, e.b.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	if id.SeriesInstanceUID != wantHandMade.SeriesInstanceUID {
		t.Errorf("series UID %q, want %q", id.SeriesInstanceUID, wantHandMade.SeriesInstanceUID)
	}
}

func TestReadFileRefusesBadFiles(t *testing.T) {
	le := func() *handEnc { return &handEnc{bo: binary.LittleEndian} }
	deep := le().el(0x0008, 0x0016, "UI", str(mrStorage, 0))
	// 40 nested undefined-length sequences (PS3.5 7.5.2), deeper than maxDepth.
	for range 40 {
		deep.elLen(0x0008, 0x1115, "SQ", undefinedLength, nil)
		deep.b.Write(binary.LittleEndian.AppendUint32(binary.LittleEndian.AppendUint32(nil, 0xE000FFFE), undefinedLength))
	}
	tests := []struct {
		name    string
		ts      string
		dataSet []byte
		raw     []byte // the whole file, instead of ts and dataSet
		want    error
	}{
		{name: "a file without the DICM prefix", raw: make([]byte, 300), want: ErrNotPart10},
		{name: "a transfer syntax the parser does not know", ts: "1.2.3.4.5.6", dataSet: le().identityElements().b.Bytes(), want: ErrUnknownTransferSyntax},
		{name: "a private OB claiming 4 GiB", ts: explicitLE,
			dataSet: le().el(0x0008, 0x0016, "UI", str(mrStorage, 0)).elLen(0x0009, 0x1010, "OB", 0xFFFFFFF0, []byte{1, 2}).b.Bytes(),
			want:    ErrMalformed},
		{name: "an implicit VR string claiming 3 GiB", ts: implicitLE,
			dataSet: (&handEnc{bo: binary.LittleEndian, implicit: true}).el(0x0008, 0x0016, "UI", str(mrStorage, 0)).elLen(0x0008, 0x103E, "LO", 3<<30, []byte("x")).b.Bytes(),
			want:    ErrMalformed},
		{name: "a file cut inside an element", ts: explicitLE, dataSet: le().identityElements().b.Bytes()[:100], want: ErrMalformed},
		{name: "sequences nested 40 deep", ts: explicitLE, dataSet: deep.b.Bytes(), want: ErrMalformed},
		{name: "an item outside a sequence", ts: explicitLE,
			dataSet: binary.LittleEndian.AppendUint32(binary.LittleEndian.AppendUint32(nil, 0xE000FFFE), 0), want: ErrMalformed},
		{name: "a deflate stream that is not deflate", ts: deflatedLE, dataSet: []byte("this is not a deflate stream at all"), want: ErrMalformed},
	}
	for _, tt := range tests {
		t.Run(tt.name+" is refused without panic or big allocation", func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "raw.dcm")
			if tt.raw != nil {
				if err := os.WriteFile(path, tt.raw, 0o644); err != nil {
					t.Fatal(err)
				}
			} else {
				path = writePart10(t, tt.ts, tt.dataSet)
			}
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			_, err := ReadFile(path)
			runtime.ReadMemStats(&after)
			if !errors.Is(err, tt.want) {
				t.Errorf("error %v, want %v", err, tt.want)
			}
			if grew := after.TotalAlloc - before.TotalAlloc; grew > 8<<20 {
				t.Errorf("allocated %d bytes reading a %d-byte file", grew, len(tt.dataSet))
			}
		})
	}
}

// FuzzReadFile checks that no input makes ReadFile panic. Seeds: the
// hand-made data sets of the tests, in each transfer syntax.
func FuzzReadFile(f *testing.F) {
	f.Add(explicitLE, (&handEnc{bo: binary.LittleEndian}).identityElements().b.Bytes())
	f.Add(implicitLE, (&handEnc{bo: binary.LittleEndian, implicit: true}).identityElements().b.Bytes())
	f.Add(explicitBE, (&handEnc{bo: binary.BigEndian}).identityElements().b.Bytes())
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, ts string, dataSet []byte) {
		var b bytes.Buffer
		if err := part10.WriteHeader(&b, part10.Meta{MediaStorageSOPClassUID: mrStorage, MediaStorageSOPInstanceUID: "2.25.1", TransferSyntaxUID: ts}); err != nil {
			return
		}
		b.Write(dataSet)
		path := filepath.Join(dir, "fuzz.dcm")
		if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		ReadFile(path) // must return, whatever it returns
	})
}
