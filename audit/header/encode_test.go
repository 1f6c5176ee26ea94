package header

// A small DICOM encoder for the tests (audit/dwi has the same one for
// its own tests; a test helper cannot be imported): it writes exactly the
// data sets the tests describe, including broken ones no writer would produce, in
// any of the four native transfer syntaxes (PS3.5 7.1, A.1-A.3, A.5).

import (
	"bytes"
	"cmp"
	"compress/flate"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"dwiaudit/audit/dwi"
	"dwiaudit/scp/part10"
)

// Transfer syntaxes (PS3.6 Annex A) and SOP classes (PS3.4 B.5).
const (
	tsImplicitLE = "1.2.840.10008.1.2"
	tsExplicitLE = "1.2.840.10008.1.2.1"
	tsDeflated   = "1.2.840.10008.1.2.1.99"
	tsExplicitBE = "1.2.840.10008.1.2.2"
	tsJPEGBase   = "1.2.840.10008.1.2.4.50"
	tsJ2K        = "1.2.840.10008.1.2.4.90" // JPEG 2000 Lossless Only: not decoded
	mrImage      = "1.2.840.10008.5.1.4.1.1.4"
	enhancedMR   = "1.2.840.10008.5.1.4.1.1.4.1"
)

// el is one element to encode.
type el struct {
	tag   uint32
	vr    string
	strs  []string
	f64   []float64
	f32   []float32
	u16   []uint16
	u32   []uint32
	raw   []byte
	items [][]el
	// undefined encodes a sequence (and its items) with undefined length
	// (PS3.5 7.5.2), or pixel data as encapsulated fragments (raw is
	// then the fragments, already framed).
	undefined bool
	// lie, when set, is written as the value length instead of the
	// true one.
	lie *uint32
}

func txt(t uint32, vr string, v ...string) el { return el{tag: t, vr: vr, strs: v} }
func fd(t uint32, v ...float64) el            { return el{tag: t, vr: "FD", f64: v} }
func us(t uint32, v ...uint16) el             { return el{tag: t, vr: "US", u16: v} }
func sq(t uint32, items ...[]el) el           { return el{tag: t, vr: "SQ", items: items} }
func raw(t uint32, vr string, b []byte) el    { return el{tag: t, vr: vr, raw: b} }

// ds writes decimal strings (PS3.5 6.2 DS) for numbers.
func ds(t uint32, v ...float64) el {
	s := make([]string, len(v))
	for i, f := range v {
		s[i] = strconv.FormatFloat(f, 'g', 10, 64)
	}
	return el{tag: t, vr: "DS", strs: s}
}

func is(t uint32, v int) el { return el{tag: t, vr: "IS", strs: []string{strconv.Itoa(v)}} }

// byteOrder reads and appends.
type byteOrder interface {
	binary.ByteOrder
	binary.AppendByteOrder
}

// enc encodes data sets in one transfer syntax.
type enc struct {
	bo       byteOrder
	implicit bool
}

func encFor(ts string) enc {
	switch ts {
	case tsImplicitLE:
		return enc{bo: binary.LittleEndian, implicit: true}
	case tsExplicitBE:
		return enc{bo: binary.BigEndian}
	}
	return enc{bo: binary.LittleEndian}
}

func longVR(vr string) bool {
	switch vr {
	case "OB", "OD", "OF", "OL", "OW", "SQ", "UN", "UC", "UR", "UT":
		return true
	}
	return false
}

// value encodes the value field of e (not its header).
func (x enc) value(e el) []byte {
	var b []byte
	switch {
	case e.vr == "SQ":
		for _, it := range e.items {
			body := x.dataset(it)
			b = x.bo.AppendUint16(b, 0xFFFE)
			b = x.bo.AppendUint16(b, 0xE000)
			if e.undefined {
				b = x.bo.AppendUint32(b, 0xFFFFFFFF)
				b = append(b, body...)
				b = x.bo.AppendUint16(b, 0xFFFE)
				b = x.bo.AppendUint16(b, 0xE00D)
				b = x.bo.AppendUint32(b, 0)
			} else {
				b = x.bo.AppendUint32(b, uint32(len(body)))
				b = append(b, body...)
			}
		}
		if e.undefined {
			b = x.bo.AppendUint16(b, 0xFFFE)
			b = x.bo.AppendUint16(b, 0xE0DD)
			b = x.bo.AppendUint32(b, 0)
		}
		return b
	case e.strs != nil:
		b = []byte(strings.Join(e.strs, `\`))
		if len(b)%2 == 1 {
			pad := byte(' ')
			if e.vr == "UI" {
				pad = 0
			}
			b = append(b, pad)
		}
	case e.f64 != nil:
		for _, f := range e.f64 {
			b = x.bo.AppendUint64(b, math.Float64bits(f))
		}
	case e.f32 != nil:
		for _, f := range e.f32 {
			b = x.bo.AppendUint32(b, math.Float32bits(f))
		}
	case e.u16 != nil:
		for _, v := range e.u16 {
			b = x.bo.AppendUint16(b, v)
		}
	case e.u32 != nil:
		for _, v := range e.u32 {
			b = x.bo.AppendUint32(b, v)
		}
	default:
		b = e.raw
	}
	return b
}

// dataset encodes elements in ascending tag order (PS3.5 7.1).
func (x enc) dataset(els []el) []byte {
	els = slices.Clone(els)
	slices.SortStableFunc(els, func(a, b el) int { return cmp.Compare(a.tag, b.tag) })
	var out []byte
	for _, e := range els {
		v := x.value(e)
		n := uint32(len(v))
		if e.undefined {
			n = 0xFFFFFFFF
		}
		if e.lie != nil {
			n = *e.lie
		}
		out = x.bo.AppendUint16(out, uint16(e.tag>>16))
		out = x.bo.AppendUint16(out, uint16(e.tag))
		switch {
		case x.implicit:
			out = x.bo.AppendUint32(out, n)
		case longVR(e.vr):
			out = append(out, e.vr...)
			out = append(out, 0, 0)
			out = x.bo.AppendUint32(out, n)
		default:
			out = append(out, e.vr...)
			out = x.bo.AppendUint16(out, uint16(n))
		}
		out = append(out, v...)
	}
	return out
}

// part10File wraps a data set in a Part 10 envelope (PS3.10 7.1),
// deflating it for the deflated transfer syntax (PS3.5 A.5).
func part10File(t testing.TB, ts, sopClass, sopInstance string, els []el) []byte {
	t.Helper()
	var b bytes.Buffer
	err := part10.WriteHeader(&b, part10.Meta{
		MediaStorageSOPClassUID: sopClass, MediaStorageSOPInstanceUID: sopInstance, TransferSyntaxUID: ts,
	})
	if err != nil {
		t.Fatal(err)
	}
	body := encFor(ts).dataset(els)
	if ts == tsDeflated {
		w, err := flate.NewWriter(&b, flate.DefaultCompression)
		if err != nil {
			t.Fatal(err)
		}
		w.Write(body)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
	} else {
		b.Write(body)
	}
	return b.Bytes()
}

// Tags the tests write (PS3.6 Table 6-1).
const (
	tImageType       = 0x00080008
	tSOPClass        = 0x00080016
	tSOPInstance     = 0x00080018
	tStudyDate       = 0x00080020
	tAccession       = 0x00080050
	tModality        = 0x00080060
	tManufacturer    = 0x00080070
	tInstitution     = 0x00080080
	tStation         = 0x00081010
	tSeriesDesc      = 0x0008103E
	tModel           = 0x00081090
	tFrameType       = 0x00089007
	tAcqContrast     = 0x00089209
	tCodeValue       = 0x00080100
	tPatientName     = 0x00100010
	tSliceThickness  = 0x00180050
	tSpacingSlices   = 0x00180088
	tSerial          = 0x00181000
	tProtocol        = 0x00181030
	tDirectionality  = 0x00189075
	tGradientSeq     = 0x00189076
	tBValue          = 0x00189087
	tGradient        = 0x00189089
	tMRDiffusionSeq  = 0x00189117
	tMRFrameTypeSeq  = 0x00189226
	tBMatrixSeq      = 0x00189601
	tBXX             = 0x00189602
	tBXY             = 0x00189603
	tBXZ             = 0x00189604
	tBYY             = 0x00189605
	tBYZ             = 0x00189606
	tBZZ             = 0x00189607
	tStudyUID        = 0x0020000D
	tSeriesUID       = 0x0020000E
	tSeriesNumber    = 0x00200011
	tInstanceNumber  = 0x00200013
	tIPP             = 0x00200032
	tIOP             = 0x00200037
	tFrameOfRef      = 0x00200052
	tPlanePosSeq     = 0x00209113
	tPlaneOriSeq     = 0x00209116
	tSamples         = 0x00280002
	tPhotometric     = 0x00280004
	tNumberOfFrames  = 0x00280008
	tRows            = 0x00280010
	tColumns         = 0x00280011
	tPixelSpacing    = 0x00280030
	tBitsAllocated   = 0x00280100
	tBitsStored      = 0x00280101
	tHighBit         = 0x00280102
	tPixelRep        = 0x00280103
	tRescaleInt      = 0x00281052
	tRescaleSlope    = 0x00281053
	tPixelMeasures   = 0x00289110
	tPixelValueTrans = 0x00289145
	tUnitsCodeSeq    = 0x004008EA
	tRWVMapping      = 0x00409096
	tRWVIntercept    = 0x00409224
	tRWVSlope        = 0x00409225
	tSharedFG        = 0x52009229
	tPerFrameFG      = 0x52009230
	tPixelData       = 0x7FE00010
	tFloatPixelData  = 0x7FE00008
)

// img is one image of a test series.
type img struct {
	b              float64
	noB            bool // write no b-value
	dir            [3]float64
	directionality string // "" derives it: NONE for b = 0, DIRECTIONAL otherwise, ISOTROPIC with iso
	iso            bool   // a scanner trace image
	bmatrix        *[6]float64
	slice          float64 // slice index (may be fractional, to shift a slice)
	imageType      []string
	rwvUnits       string
	plain          bool // no diffusion attributes at all (a T2 image)
	extra          []el // more top-level (classic) or per-frame (enhanced) elements
}

// testSeries describes a series the tests write as classic files or as
// one Enhanced MR file.
type testSeries struct {
	study, series, frameOfRef string
	number                    int
	rows, cols                int
	orientation               [6]float64
	spacing                   float64 // mm, square pixels
	thickness                 float64 // mm between slices
	origin                    [3]float64
	slope, intercept          float64
	images                    []img
	noGeometry                bool
	pixelFrames               int    // enhanced: write pixel data for this many frames only (0: all)
	manufacturer              string // Manufacturer (0008,0070); "" writes "Synthetic"
	uidBase                   string
}

// newSeries is an axial 8x8 series (rows along +y, columns along +x,
// slices foot to head; PS3.3 C.7.6.2.1.1 LPS).
func newSeries(uidBase string, images ...img) testSeries {
	return testSeries{
		study: "2.25.100", series: "2.25.100." + uidNumber(uidBase), frameOfRef: "2.25.100.9", number: 4,
		rows: 8, cols: 8, orientation: [6]float64{1, 0, 0, 0, 1, 0}, spacing: 1.5, thickness: 4,
		origin: [3]float64{-5.25, -5.25, -20}, slope: 1, images: images, uidBase: uidBase,
	}
}

// dwiImages is b0 plus three orthogonal directions at each b, on n
// slices.
func dwiImages(n int, bs ...float64) []img {
	var out []img
	for s := range n {
		out = append(out, img{b: 0, slice: float64(s)})
		for _, b := range bs {
			for _, d := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} {
				out = append(out, img{b: b, dir: d, slice: float64(s)})
			}
		}
	}
	return out
}

// normal is the slice normal, row x column direction cosines (PS3.3
// C.7.6.2.1.1); the test series have unit, orthogonal cosines.
func (s testSeries) normal() [3]float64 {
	o := s.orientation
	return [3]float64{o[1]*o[5] - o[2]*o[4], o[2]*o[3] - o[0]*o[5], o[0]*o[4] - o[1]*o[3]}
}

func (s testSeries) position(m img) [3]float64 {
	n := s.normal()
	z := m.slice * s.thickness
	return [3]float64{s.origin[0] + z*n[0], s.origin[1] + z*n[1], s.origin[2] + z*n[2]}
}

// pixel is the stored value at (r, c) of image k: distinct per image and
// pixel, so that a misplaced image or a transposed matrix shows.
func (s testSeries) pixel(k, r, c int) uint16 {
	return uint16(100 + 7*k + 3*r + c + int(s.images[k].b)/10)
}

func (s testSeries) pixelBytes(bo byteOrder, k int) []byte {
	var b []byte
	for r := range s.rows {
		for c := range s.cols {
			b = bo.AppendUint16(b, s.pixel(k, r, c))
		}
	}
	return b
}

func (s testSeries) sopUID(k int) string {
	return fmt.Sprintf("2.25.200.%s.%d", uidNumber(s.uidBase), k+1)
}

// uidNumber turns a test's name for a series into a UID component (PS3.5
// 9.1: digits only, no leading zero).
func uidNumber(name string) string {
	return strconv.FormatUint(uint64(crc32.ChecksumIEEE([]byte(name)))+1, 10)
}

// diffusion is the MR Diffusion Macro content of one image (PS3.3
// C.8.13.5.9).
func diffusion(m img) []el {
	if m.plain {
		return nil
	}
	var out []el
	if !m.noB {
		out = append(out, fd(tBValue, m.b))
	}
	dir := m.directionality
	if dir == "" {
		switch {
		case m.iso:
			dir = "ISOTROPIC"
		case m.b == 0:
			dir = "NONE"
		default:
			dir = "DIRECTIONAL"
		}
	}
	out = append(out, txt(tDirectionality, "CS", dir))
	if dir == "DIRECTIONAL" {
		out = append(out, sq(tGradientSeq, []el{fd(tGradient, m.dir[:]...)}))
	}
	if m.bmatrix != nil {
		bm := m.bmatrix
		out = append(out, sq(tBMatrixSeq, []el{fd(tBXX, bm[0]), fd(tBXY, bm[1]), fd(tBXZ, bm[2]), fd(tBYY, bm[3]), fd(tBYZ, bm[4]), fd(tBZZ, bm[5])}))
	}
	return out
}

func (s testSeries) common(sopClass, sopInstance string) []el {
	manufacturer := cmp.Or(s.manufacturer, "Synthetic")
	return []el{
		txt(tSOPClass, "UI", sopClass), txt(tSOPInstance, "UI", sopInstance),
		txt(tStudyDate, "DA", "20250314"), txt(tAccession, "SH", "ACC42"), txt(tModality, "CS", "MR"),
		txt(tManufacturer, "LO", manufacturer), txt(tInstitution, "LO", "Quellvander Ostmire"),
		txt(tStation, "SH", "QOH-MR2"), txt(tSeriesDesc, "LO", "DWI test"), txt(tModel, "LO", "Test model"),
		txt(tPatientName, "PN", "TEST^PHANTOM"), txt(tSerial, "LO", "SN-0042"), txt(tProtocol, "LO", "DWI brain"),
		txt(tStudyUID, "UI", s.study), txt(tSeriesUID, "UI", s.series), txt(tFrameOfRef, "UI", s.frameOfRef),
		is(tSeriesNumber, s.number),
		us(tSamples, 1), txt(tPhotometric, "CS", "MONOCHROME2"), us(tRows, uint16(s.rows)), us(tColumns, uint16(s.cols)),
		us(tBitsAllocated, 16), us(tBitsStored, 16), us(tHighBit, 15), us(tPixelRep, 0),
	}
}

func imageTypeOf(m img) []string {
	if m.imageType != nil {
		return m.imageType
	}
	return []string{"ORIGINAL", "PRIMARY", "DIFFUSION", "NONE"}
}

func rwv(units string) el {
	return sq(tRWVMapping, []el{fd(tRWVIntercept, 0), fd(tRWVSlope, 1), sq(tUnitsCodeSeq, []el{txt(tCodeValue, "SH", units)})})
}

// classic writes one MR Image Storage file per image.
func (s testSeries) classic(t testing.TB, ts string) [][]byte {
	t.Helper()
	bo := encFor(ts).bo
	var files [][]byte
	for k, m := range s.images {
		els := s.common(mrImage, s.sopUID(k))
		els = append(els, is(tInstanceNumber, k+1), txt(tImageType, "CS", imageTypeOf(m)...),
			ds(tPixelSpacing, s.spacing, s.spacing), ds(tSliceThickness, s.thickness),
			ds(tRescaleInt, s.intercept), ds(tRescaleSlope, s.slope),
			raw(tPixelData, "OW", s.pixelBytes(bo, k)))
		if !s.noGeometry {
			p := s.position(m)
			els = append(els, ds(tIPP, p[:]...), ds(tIOP, s.orientation[:]...))
		}
		if m.rwvUnits != "" {
			els = append(els, rwv(m.rwvUnits))
		}
		els = append(els, diffusion(m)...)
		els = append(els, m.extra...)
		files = append(files, part10File(t, ts, mrImage, s.sopUID(k), els))
	}
	return files
}

// enhanced writes the series as one Enhanced MR Image Storage file
// (PS3.3 A.36.2): geometry and diffusion per frame, pixel measures and
// rescale shared.
func (s testSeries) enhanced(t testing.TB, ts string) []byte {
	t.Helper()
	bo := encFor(ts).bo
	uid := s.sopUID(1000)
	els := s.common(enhancedMR, uid)
	var pixels []byte
	var perFrame [][]el
	for k, m := range s.images {
		if s.pixelFrames == 0 || k < s.pixelFrames {
			pixels = append(pixels, s.pixelBytes(bo, k)...)
		}
		item := []el{
			sq(tMRDiffusionSeq, diffusion(m)),
			sq(tMRFrameTypeSeq, []el{txt(tFrameType, "CS", imageTypeOf(m)...)}),
		}
		if !s.noGeometry {
			p := s.position(m)
			item = append(item, sq(tPlanePosSeq, []el{ds(tIPP, p[:]...)}))
		}
		if m.rwvUnits != "" {
			item = append(item, rwv(m.rwvUnits))
		}
		item = append(item, m.extra...)
		perFrame = append(perFrame, item)
	}
	shared := []el{
		sq(tPixelMeasures, []el{ds(tPixelSpacing, s.spacing, s.spacing), ds(tSliceThickness, s.thickness)}),
		sq(tPixelValueTrans, []el{ds(tRescaleInt, s.intercept), ds(tRescaleSlope, s.slope), txt(0x00281054, "LO", "US")}),
	}
	if !s.noGeometry {
		shared = append(shared, sq(tPlaneOriSeq, []el{ds(tIOP, s.orientation[:]...)}))
	}
	pf := sq(tPerFrameFG, perFrame...)
	pf.undefined = true // as many writers do (PS3.5 7.5.2)
	els = append(els, is(tInstanceNumber, 1), txt(tImageType, "CS", "ORIGINAL", "PRIMARY", "DIFFUSION", "NONE"),
		txt(tAcqContrast, "CS", "DIFFUSION"), is(tNumberOfFrames, len(s.images)),
		sq(tSharedFG, shared), pf, raw(tPixelData, "OW", pixels))
	return part10File(t, ts, enhancedMR, uid, els)
}

// extractAll extracts every file, failing the test on an error.
func extractAll(t testing.TB, files [][]byte, opt ExtractOptions) []dwi.Frame {
	t.Helper()
	var out []dwi.Frame
	for i, b := range files {
		fs, err := Extract(b, opt)
		if err != nil {
			t.Fatalf("file %d: %v", i, err)
		}
		out = append(out, fs...)
	}
	return out
}
