package phantom

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
)

// This file writes LayoutSiemensMosaic: the layout of Siemens classic
// DWI, as the public readers of it describe it. The reference for every
// byte is nibabel (Debian python3-nibabel 5.0), whose
// nibabel.nicom.csareader.read parses the CSA header (after the SPM
// description of the format) and whose
// nibabel.nicom.dicomwrappers.MosaicWrapper splits the mosaic and places
// its first slice; the tests parse our files with both.
//
// A mosaic image holds every slice of one volume: n slices tiled row by
// row, left to right, into a grid of g x g tiles, g = ceil(sqrt(n)),
// unused tiles black (MosaicWrapper.get_data). Its Image Position
// (Patient) is not that of its first slice: it is the top-left pixel of
// the whole mosaic, placed as if the mosaic were one big image centred
// where the first slice is centred. A reader gets the first slice's
// position back by adding (mosaic size - tile size)/2 pixels along the
// rows and the columns (MosaicWrapper.image_position, nibabel's
// "dicom_mosaic" note; the usual mosaic rule, common practice):
//
//	IPP(mosaic) = IPP(slice 0) - ((C-c)/2)·Δc·row direction - ((R-r)/2)·Δr·column direction
//
// where R x C is the mosaic and r x c a tile. Slice i of the mosaic lies
// at IPP(slice 0) + i·(spacing)·SliceNormalVector.

// The Siemens private blocks written (private creator strings as Siemens
// writes them; element offsets from nibabel's csareader (xx10 image
// header) and, for group 0019, from memory).
const (
	siemensCSACreator = "SIEMENS CSA HEADER"
	siemensCSAGroup   = 0x0029
	siemensCSAImage   = 0x10 // (0029,xx10) CSA Image Header Info, OB
	siemensMRCreator  = "SIEMENS MR HEADER"
	siemensMRGroup    = 0x0019
	siemensMosaicN    = 0x0A // (0019,xx0A) NumberOfImagesInMosaic, US (from memory)
	siemensBValue     = 0x0C // (0019,xx0C) B_value, IS
	siemensDirType    = 0x0D // (0019,xx0D) DiffusionDirectionality, CS
	siemensGradient   = 0x0E // (0019,xx0E) DiffusionGradientDirection, FD 3
	siemensBMatrix    = 0x27 // (0019,xx27) B_matrix, FD 6 (from memory)
)

// mosaicGrid is the tiles per side of a mosaic of n slices
// (MosaicWrapper: mosaic_size = ceil(sqrt(n))).
func mosaicGrid(n int) int { return int(math.Ceil(math.Sqrt(float64(n)))) }

// writeMosaicSeries writes one mosaic MR image per volume.
func (w *writer) writeMosaicSeries(so *seriesOut) (*SeriesInfo, error) {
	a := w.a
	info := &SeriesInfo{UID: so.uid, Number: so.number, Description: so.description, Role: so.role, SOPClassUID: MRImageStorage}
	n := a.slices
	g := mosaicGrid(n)
	rows, cols := g*a.rows, g*a.cols
	for k, v := range so.vols {
		pixels := make([]byte, 2*rows*cols)
		for s := 0; s < n; s++ {
			if !v.present(s) {
				// withDefaults refuses missing slices for a mosaic.
				return nil, fmt.Errorf("phantom: volume %d of series %d misses slice %d; a mosaic holds every slice", k, so.number, s)
			}
			tr, tc := s/g, s%g
			src := w.sliceBytes(v, s)
			for r := 0; r < a.rows; r++ {
				off := 2 * ((tr*a.rows+r)*cols + tc*a.cols)
				copy(pixels[off:off+2*a.cols], src[2*r*a.cols:2*(r+1)*a.cols])
			}
		}
		first := w.position(v, 0)
		row, col := orientation()[:3], orientation()[3:]
		pos := make([]float64, 3)
		for i := range pos {
			pos[i] = first[i] - float64(cols-a.cols)/2*a.spacing*row[i] - float64(rows-a.rows)/2*a.spacing*col[i]
		}
		im := classicImage{vol: v, k: k, slice: 0, instance: k + 1, rows: rows, cols: cols, pos: pos, pixels: pixels, mosaic: n}
		if err := w.writeClassicFile(so, info, im); err != nil {
			return nil, err
		}
		info.Images += n - 1 // writeClassicFile counted one
	}
	return info, nil
}

// siemensDirectionality is the DiffusionDirectionality Siemens writes
// (CSA and (0019,xx0D)): DIRECTIONAL for one gradient, NONE for b0, and
// here ISOTROPIC for the trace (the standard's term, PS3.3 C.8.13.5.9;
// what Siemens writes on its trace images is from memory).
func siemensDirectionality(k volKind) string { return directionality(k) }

// siemens adds the Siemens private blocks of the mosaic im: the CSA image
// header (0029,xx10) and the SIEMENS MR HEADER elements.
func (w *writer) siemens(it *item, im classicImage) {
	v, a := im.vol, w.a
	normal := sliceNormal()
	csa := []csaElement{
		{name: "NumberOfImagesInMosaic", vr: "US", values: []string{strconv.Itoa(im.mosaic)}},
		// AcquisitionMatrixText: nibabel's is_mosaic wants it; "64p*64"
		// is Siemens' form (from memory).
		{name: "AcquisitionMatrixText", vr: "SH", values: []string{fmt.Sprintf("%dp*%d", a.rows, a.cols)}},
		{name: "SliceNormalVector", vr: "FD", values: csaFloats(normal[:])},
	}
	it.creator(siemensMRGroup, siemensMRCreator)
	it.private(privateTag(siemensMRGroup, siemensMosaicN), "US", []int{im.mosaic})
	if v.kind != volADC {
		b := strconv.Itoa(int(math.Round(v.bHeader))) // B_value is an integer (IS); the protocol's b-values are whole numbers
		csa = append(csa,
			csaElement{name: "B_value", vr: "IS", values: []string{b}},
			csaElement{name: "DiffusionDirectionality", vr: "CS", values: []string{siemensDirectionality(v.kind)}},
		)
		it.private(privateTag(siemensMRGroup, siemensBValue), "IS", []string{b})
		it.private(privateTag(siemensMRGroup, siemensDirType), "CS", []string{siemensDirectionality(v.kind)})
		if v.kind == volDirectional {
			bm := bMatrix(v.bHeader, v.dir)
			csa = append(csa,
				csaElement{name: "DiffusionGradientDirection", vr: "FD", values: csaFloats(v.dir[:])},
				csaElement{name: "B_matrix", vr: "FD", values: csaFloats(bm[:])},
			)
			it.private(privateTag(siemensMRGroup, siemensGradient), "FD", v.dir[:])
			it.private(privateTag(siemensMRGroup, siemensBMatrix), "FD", bm[:])
		}
	}
	it.creator(siemensCSAGroup, siemensCSACreator)
	it.private(privateTag(siemensCSAGroup, siemensCSAImage), "OB", csaHeader(csa))
}

// sliceNormal is the unit normal of the slices, row x column direction
// cosines: Siemens' SliceNormalVector, pointing the way the slices
// ascend.
func sliceNormal() [3]float64 {
	o := orientation()
	r, c := o[:3], o[3:]
	return [3]float64{r[1]*c[2] - r[2]*c[1], r[2]*c[0] - r[0]*c[2], r[0]*c[1] - r[1]*c[0]}
}

// bMatrix is the upper triangle of b·g·gᵀ, xx xy xz yy yz zz, in patient
// coordinates (nibabel csareader.get_b_matrix: "the 6 vector is the upper
// triangle of the symmetric B matrix").
func bMatrix(b float64, g [3]float64) [6]float64 {
	return [6]float64{b * g[0] * g[0], b * g[0] * g[1], b * g[0] * g[2], b * g[1] * g[1], b * g[1] * g[2], b * g[2] * g[2]}
}

func csaFloats(v []float64) []string {
	out := make([]string, len(v))
	for i, f := range v {
		if f == 0 {
			f = 0 // no "-0"
		}
		out[i] = strconv.FormatFloat(f, 'f', 8, 64)
	}
	return out
}

// csaElement is one tag of a CSA header: its name, VR, and its values as
// the text CSA items hold.
type csaElement struct {
	name   string
	vr     string
	values []string
}

// CSA2 layout constants (nibabel csareader.read, after the SPM
// description).
const (
	csaNameLen   = 64
	csaMarker    = 77  // "check" word after the tag count, and of every non-empty tag and item (SPM description)
	csaEmptyMark = 205 // the same word of a tag with no items (SPM description, from memory)
)

// csaSyngoDT is the syngo data type code of a VR, a field readers ignore
// (nibabel keeps it as "syngodt"); the codes are from memory.
func csaSyngoDT(vr string) int32 {
	switch vr {
	case "DS":
		return 3
	case "FD":
		return 4
	case "IS":
		return 6
	case "US":
		return 10
	case "CS":
		return 16
	case "SH":
		return 22
	}
	return 0
}

// csaHeader encodes elems as a CSA2 header ("SV10"), little endian:
//
//	"SV10", 4 unused bytes (\x04\x03\x02\x01), uint32 tag count, uint32 77,
//	per tag: name (64 bytes, NUL-padded), int32 VM, VR (4 bytes), int32
//	syngo data type, int32 item count, int32 77 (205 without items),
//	per item: int32 x4 (length, length, 77, length), the value as text
//	with a terminating NUL, padded with NULs to a multiple of 4 bytes.
//
// nibabel's csareader.read takes the second word of an item as its
// length in a CSA2 header; the length counts the terminating NUL.
func csaHeader(elems []csaElement) []byte {
	var b bytes.Buffer
	put := func(v any) { _ = binary.Write(&b, binary.LittleEndian, v) } // bytes.Buffer never fails
	b.WriteString("SV10")
	b.Write([]byte{4, 3, 2, 1})
	put(uint32(len(elems)))
	put(uint32(csaMarker))
	for _, e := range elems {
		var name [csaNameLen]byte
		copy(name[:csaNameLen-1], e.name)
		b.Write(name[:])
		put(int32(len(e.values)))
		var vr [4]byte
		copy(vr[:], e.vr)
		b.Write(vr[:])
		put(csaSyngoDT(e.vr))
		put(int32(len(e.values)))
		if len(e.values) > 0 {
			put(int32(csaMarker))
		} else {
			put(int32(csaEmptyMark))
		}
		for _, v := range e.values {
			n := int32(len(v) + 1)
			put([4]int32{n, n, csaMarker, n})
			b.WriteString(v)
			b.WriteByte(0)
			for pad := (4 - int(n)%4) % 4; pad > 0; pad-- {
				b.WriteByte(0)
			}
		}
	}
	return b.Bytes()
}
