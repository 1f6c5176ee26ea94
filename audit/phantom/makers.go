package phantom

import (
	"fmt"
	"math"
	"strconv"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/synth"
)

// This file writes the diffusion encoding of the GE, Philips, Canon and
// UIH layouts of classic MR images (the Siemens mosaic is mosaic.go). Each
// is written from a public description of the maker's files, cited
// beside its constants; what no description at hand gives is marked
// "from memory". Every private block is reserved through its private
// creator (PS3.5 7.8.1, dataset.go).
//
// Coordinates: the phantom's slices are axial, rows along +x (patient
// left), columns along +y (posterior), phase encoding along the columns
// (In-plane Phase Encoding Direction COL). So the image axes (frequency,
// phase, slice) coincide with the patient axes (x, y, z) of PS3.3
// C.7.6.2.1.1, and a layout that stores the gradient in image axes writes
// the same numbers as one that stores it in patient axes. The code still
// projects onto the image axes, so that the layout stays right if the
// geometry changes.

// GE: the b-value is the first of the four values of (0043,xx39) in the
// GEMS_PARM_01 block ("Slop_int_6..9", 6 = b_value; NA-MIC wiki "DICOM
// for DWI and DTI", private vendor GE), which some software versions
// write plus a large power of ten, so that it must be masked (the same
// page: "0043,1039 might need to be masked"; the offset of 10^9 is from
// memory). The gradient components are (0019,xxBB/BC/BD) in the
// GEMS_ACQU_01 block, relative to the frequency, phase and slice axes
// (dcm2niix's GE notes: "the GE convention for reported diffusion
// gradient direction has always been in 'MR physics' logical coordinate,
// i.e Freq (X), Phase (Y), Slice (Z)"). What marks the images as a
// diffusion acquisition, from memory (and as the project's GE reader,
// audit/header, documents them): (0043,xx30) SS in GEMS_PARM_01, the
// image's kind, 14 for the T2 (b0) images, 16 for the diffusion-weighted
// ones, 19 for the trace; (0021,xx5A) SL in GEMS_RELA_01, the series'
// diffusion direction code, non-zero (16 for DTI) in a diffusion series.
// No standard diffusion attribute is written.
const (
	geParmCreator  = "GEMS_PARM_01"
	geParmGroup    = 0x0043
	geBValue       = 0x39 // (0043,xx39) IS, 4 values
	geImageKind    = 0x30 // (0043,xx30) SS
	geRelaCreator  = "GEMS_RELA_01"
	geRelaGroup    = 0x0021
	geDiffSeries   = 0x5A // (0021,xx5A) SL
	geKindT2       = 14
	geKindDWI      = 16
	geKindTrace    = 19
	geDTISeries    = 16
	geAcquCreator  = "GEMS_ACQU_01"
	geAcquGroup    = 0x0019
	geGradFreq     = 0xBB // (0019,xxBB) DS
	geGradPhase    = 0xBC // (0019,xxBC) DS
	geGradSlice    = 0xBD // (0019,xxBD) DS
	geBValueOffset = 1_000_000_000
)

// ge adds the GE private diffusion elements of v.
func (w *writer) ge(it *item, v *volume) {
	b := int(math.Round(v.bHeader)) + geBValueOffset
	// Values 2-4 are private imaging options 2, ihtagging and ihtagspc
	// (NA-MIC wiki); zero here.
	it.creator(geParmGroup, geParmCreator)
	it.private(privateTag(geParmGroup, geBValue), "IS", []string{strconv.Itoa(b), "0", "0", "0"})
	kind := map[volKind]int{volB0: geKindT2, volDirectional: geKindDWI, volTrace: geKindTrace}[v.kind]
	it.private(privateTag(geParmGroup, geImageKind), "SS", []int{kind})
	it.creator(geRelaGroup, geRelaCreator)
	it.private(privateTag(geRelaGroup, geDiffSeries), "SL", []int{geDTISeries})
	g := imageAxes(gradient(v))
	it.creator(geAcquGroup, geAcquCreator)
	for i, xx := range []uint8{geGradFreq, geGradPhase, geGradSlice} {
		it.private(privateTag(geAcquGroup, xx), "DS", []string{synth.FormatDS(g[i])})
	}
}

// Philips: Diffusion B-Factor (2001,xx03) FL in the "Philips Imaging DD
// 001" block (read as a 4-byte float by MITK's
// DiffusionHeaderPhilipsDICOMFileReader, tag 0x2001,0x1003), Diffusion
// Direction (2001,xx04) CS, and Diffusion Direction RL/AP/FH
// (2005,xxB0/B1/B2) FL in the "Philips MR Imaging DD 001" block, in
// patient axes (from memory). The direction labels are from memory: M,
// P, S for a gradient along the measurement (frequency), phase or slice
// axis, O for an oblique one, I for the scanner's isotropic (trace)
// image and for the b0 (an empty label marks a non-diffusion image). No
// standard diffusion attribute is written.
const (
	philipsImagingCreator = "Philips Imaging DD 001"
	philipsImagingGroup   = 0x2001
	philipsBValue         = 0x03 // (2001,xx03) FL
	philipsDirLabel       = 0x04 // (2001,xx04) CS
	philipsMRCreator      = "Philips MR Imaging DD 001"
	philipsMRGroup        = 0x2005
	philipsGradRL         = 0xB0 // (2005,xxB0) FL
	philipsGradAP         = 0xB1 // (2005,xxB1) FL
	philipsGradFH         = 0xB2 // (2005,xxB2) FL
)

// philipsLabel is the (2001,xx04) label of v, "" for none.
func philipsLabel(v *volume) string {
	switch v.kind {
	case volB0, volTrace:
		return "I"
	case volDirectional:
		switch imageAxes(v.dir) {
		case [3]float64{1, 0, 0}:
			return "M"
		case [3]float64{0, 1, 0}:
			return "P"
		case [3]float64{0, 0, 1}:
			return "S"
		}
		return "O"
	}
	return ""
}

// philips adds the Philips private diffusion elements of v.
func (w *writer) philips(it *item, v *volume) {
	it.creator(philipsImagingGroup, philipsImagingCreator)
	it.private(privateTag(philipsImagingGroup, philipsBValue), "FL", []float64{v.bHeader})
	if l := philipsLabel(v); l != "" {
		it.private(privateTag(philipsImagingGroup, philipsDirLabel), "CS", []string{l})
	}
	g := gradient(v)
	it.creator(philipsMRGroup, philipsMRCreator)
	for i, xx := range []uint8{philipsGradRL, philipsGradAP, philipsGradFH} {
		it.private(privateTag(philipsMRGroup, xx), "FL", []float64{g[i]})
	}
}

// Canon (formerly Toshiba) classic images, as described publicly:
// "Toshiba used public tags to report diffusion properties ...
// DiffusionBValue (0018,9087) and DiffusionGradientOrientation
// (0018,9089). Be aware that these tags are only populated for images
// where a diffusion gradient is applied" (dcm2niix's Canon notes), and
// "the gradient direction is stored in the text-based image comments
// fields ... (0020,4000) LT [b=1500(0.445,0.000,0.895)]" (NA-MIC wiki,
// private vendor Canon). No public description puts Canon's b-value in a
// private block, so none is invented: the b0 images carry no b-value
// and no diffusion attribute, only the Image Comments text "b=0" (that a
// b0 carries the text too is from memory), which is what a reader must
// recognise. The text gives the gradient in patient axes (from memory:
// no description at hand says in which frame).
const canonCommentFormat = "b=%g(%.3f,%.3f,%.3f)"

// canon adds the Canon diffusion encoding of v.
func (w *writer) canon(it *item, v *volume) {
	g := gradient(v)
	switch v.kind {
	case volB0:
		it.str(tag.ImageComments, fmt.Sprintf(canonCommentFormat, v.bHeader, g[0], g[1], g[2]))
		return
	case volDirectional:
		it.str(tag.ImageComments, fmt.Sprintf(canonCommentFormat, v.bHeader, zero(g[0]), zero(g[1]), zero(g[2])))
	}
	w.diffusion(it, v)
}

// UIH: BActualValue (0065,xx09) FD ("Actual B-Value from sequence") and
// BUserValue (0065,xx0A) FD ("User Choose B-Value from UI"), and
// SliceNormalVector (0065,xx14) DS 3, from UIH's table of private tags in
// dcm2niix's UIH notes; the gradient direction (0065,xx37) FD 3 in the
// image axes (rows, columns, slice normal) and the private creator string
// are from memory. No standard diffusion attribute is written.
const (
	uihCreator     = "Image Private Header" // from memory
	uihGroup       = 0x0065
	uihBActual     = 0x09 // (0065,xx09) FD
	uihBUser       = 0x0A // (0065,xx0A) FD
	uihSliceNormal = 0x14 // (0065,xx14) DS 3
	uihGradient    = 0x37 // (0065,xx37) FD 3 (from memory)
)

// uih adds the UIH private diffusion elements of v.
func (w *writer) uih(it *item, v *volume) {
	n := sliceNormal()
	g := imageAxes(gradient(v))
	it.creator(uihGroup, uihCreator)
	it.private(privateTag(uihGroup, uihBActual), "FD", []float64{v.bHeader})
	it.private(privateTag(uihGroup, uihBUser), "FD", []float64{v.bHeader})
	it.private(privateTag(uihGroup, uihSliceNormal), "DS", []string{synth.FormatDS(n[0]), synth.FormatDS(n[1]), synth.FormatDS(n[2])})
	it.private(privateTag(uihGroup, uihGradient), "FD", g[:])
}

// gradient is v's unit gradient in patient axes, zero for a b0 or a
// trace (no single direction).
func gradient(v *volume) [3]float64 {
	if v.kind != volDirectional {
		return [3]float64{}
	}
	return v.dir
}

// imageAxes is g projected on the row direction (frequency encoding,
// phase encoding being COL), the column direction (phase) and the slice
// normal.
func imageAxes(g [3]float64) [3]float64 {
	o := orientation()
	r, c, n := o[:3], o[3:], sliceNormal()
	dot := func(a []float64) float64 { return zero(g[0]*a[0] + g[1]*a[1] + g[2]*a[2]) }
	return [3]float64{dot(r), dot(c), dot(n[:])}
}

// zero turns -0 into 0, so no "-0" is written.
func zero(f float64) float64 {
	if f == 0 {
		return 0
	}
	return f
}
