package header

// This file reads a Siemens image's diffusion encoding from its private
// elements: the CSA image header (csa.go) of the block "SIEMENS CSA
// HEADER" in group 0029, and the elements of the block "SIEMENS MR
// HEADER" in group 0019. Both blocks are found through their private
// creator (PS3.5 7.8.1), never at a fixed element number: a creator
// (gggg,00bb) reserves the elements (gggg,bb00)-(gggg,bbFF), and which bb
// a scanner or converter uses may differ.

import (
	"encoding/binary"
	"math"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
)

// Private creators and element offsets of the Siemens blocks. The
// offsets are the low byte of the element number within the reserved
// block. Names and meanings: nibabel's csareader.py and
// siemens_csa.rst for the CSA header; (0019,xx0C) B_value, (0019,xx0D)
// DiffusionDirectionality and (0019,xx0E) DiffusionGradientDirection
// from memory (they are also in the DICOM dictionaries of DCMTK and
// pydicom's private dictionary, "SIEMENS MR HEADER").
const (
	SiemensCSACreator = "SIEMENS CSA HEADER"
	SiemensMRCreator  = "SIEMENS MR HEADER"

	csaGroup           = 0x0029
	csaImageOffset     = 0x10 // CSA Image Header Info, OB
	csaSeriesOffset    = 0x20 // CSA Series Header Info, OB
	mrGroup            = 0x0019
	mrBValueOffset     = 0x0C // IS, s/mm^2
	mrDirectionality   = 0x0D // CS: DIRECTIONAL, NONE, ...
	mrGradientOffset   = 0x0E // FD x3
	privateCreatorLow  = 0x0010
	privateCreatorHigh = 0x00FF
)

// Names of the CSA image header elements read here (nibabel's
// csareader.py: get_b_value, get_g_vector, get_b_matrix, get_n_mosaic,
// get_slice_normal).
const (
	CSABValue          = "B_value"
	CSAGradient        = "DiffusionGradientDirection"
	CSABMatrix         = "B_matrix"
	CSAMosaicImages    = "NumberOfImagesInMosaic"
	CSASliceNormal     = "SliceNormalVector"
	CSADirectionality  = "DiffusionDirectionality"
	csaAcquisitionText = "AcquisitionMatrixText"
)

// SiemensDiffusion is what a Siemens image's private elements say about
// it. Gradient and SliceNormal are in the patient coordinate system
// (PS3.3 C.7.6.2.1.1), as the CSA header and (0019,xx0E) store them
// (from memory; nibabel's dicomwrappers.py treats the CSA B_matrix as
// "the space of the DICOM patient coordinate space" and rotates it into
// voxel axes itself).
type SiemensDiffusion struct {
	BValue    float64
	HasBValue bool
	// BValueSource is "csa" (the CSA image header) or "mr-header"
	// ((0019,xx0C)).
	BValueSource string

	Gradient    [3]float64
	HasGradient bool

	// BMatrix is XX XY XZ YY YZ ZZ, the upper triangle of the symmetric
	// b-matrix in the CSA header's order (nibabel's get_b_matrix).
	BMatrix    [6]float64
	HasBMatrix bool

	// Directionality is the text of the CSA DiffusionDirectionality or
	// of (0019,xx0D), as written ("DIRECTIONAL", "NONE", ...); "" when
	// absent.
	Directionality string

	// MosaicImages is NumberOfImagesInMosaic: the slices a MOSAIC image
	// holds as tiles; 0 when absent.
	MosaicImages int

	SliceNormal    [3]float64
	HasSliceNormal bool

	// CSA is the parsed CSA image header, nil when the image has none.
	CSA *CSAHeader
}

// ReadSiemens reads the Siemens private diffusion elements from the
// top-level elements of a data set; bo is the byte order of its transfer
// syntax (binary values of elements the parser kept as bytes are in
// it). found is false when neither Siemens block is present. A CSA
// header that is present but malformed is an error wrapping ErrCSA.
func ReadSiemens(elems []*dicom.Element, bo binary.ByteOrder) (d SiemensDiffusion, found bool, err error) {
	csa, csaFound, err := ReadCSA(elems, false)
	if err != nil {
		return d, true, err
	}
	mr, mrFound := privateBlock(elems, mrGroup, SiemensMRCreator)
	if !csaFound && !mrFound {
		return d, false, nil
	}
	d.CSA = csa

	// The CSA header first, then the MR header for what it lacks.
	if b, ok := csa.Float(CSABValue); ok && b >= 0 {
		d.BValue, d.HasBValue, d.BValueSource = b, true, "csa"
	}
	if v, ok := csa.Vector(CSAGradient, 3); ok && unitish(v) {
		copy(d.Gradient[:], v)
		d.HasGradient = true
	}
	if v, ok := csa.Vector(CSABMatrix, 6); ok {
		copy(d.BMatrix[:], v)
		d.HasBMatrix = true
	}
	d.Directionality = csa.Text(CSADirectionality)
	if n, ok := csa.Int(CSAMosaicImages); ok && n > 0 {
		d.MosaicImages = n
	}
	if v, ok := csa.Vector(CSASliceNormal, 3); ok && unitish(v) {
		copy(d.SliceNormal[:], v)
		d.HasSliceNormal = true
	}

	if mrFound {
		if !d.HasBValue {
			if v := elementFloats(findElement(elems, mrGroup, mr|mrBValueOffset), bo, 8); len(v) > 0 && v[0] >= 0 {
				d.BValue, d.HasBValue, d.BValueSource = v[0], true, "mr-header"
			}
		}
		if !d.HasGradient {
			if v := elementFloats(findElement(elems, mrGroup, mr|mrGradientOffset), bo, 8); len(v) == 3 && unitish(v) {
				copy(d.Gradient[:], v)
				d.HasGradient = true
			}
		}
		if d.Directionality == "" {
			if s := elementText(findElement(elems, mrGroup, mr|mrDirectionality)); len(s) > 0 {
				d.Directionality = s[0]
			}
		}
	}
	return d, true, nil
}

// unitish says whether v is a direction: finite and of length about 1
// (scanners write 6-8 significant digits; a zero vector means "none").
func unitish(v []float64) bool {
	var n float64
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
		n += x * x
	}
	return math.Abs(math.Sqrt(n)-1) < 1e-3
}

// ReadCSA finds and parses the CSA image header (series false) or the
// CSA series header (series true) among the top-level elements. found
// is false when the block or the element is absent (an anonymiser may
// drop the element and keep its creator; nibabel's get_csa_header then
// returns None too).
func ReadCSA(elems []*dicom.Element, series bool) (h *CSAHeader, found bool, err error) {
	block, ok := privateBlock(elems, csaGroup, SiemensCSACreator)
	if !ok {
		return nil, false, nil
	}
	off := uint16(csaImageOffset)
	if series {
		off = csaSeriesOffset
	}
	e := findElement(elems, csaGroup, block|off)
	if e == nil || e.Value == nil {
		return nil, false, nil
	}
	b, ok := e.Value.GetValue().([]byte)
	if !ok || len(b) == 0 {
		return nil, false, nil
	}
	h, err = ParseCSA(b)
	if err != nil {
		return nil, true, err
	}
	return h, true, nil
}

// privateBlock returns the reserved block of private creator creator
// in group: bb<<8 for the creator element (group,00bb), PS3.5 7.8.1.
func privateBlock(elems []*dicom.Element, group uint16, creator string) (uint16, bool) {
	for _, e := range elems {
		if e.Tag.Group != group || e.Tag.Element < privateCreatorLow || e.Tag.Element > privateCreatorHigh {
			continue
		}
		if v := elementText(e); len(v) == 1 && v[0] == creator {
			return e.Tag.Element << 8, true
		}
	}
	return 0, false
}

func findElement(elems []*dicom.Element, group, element uint16) *dicom.Element {
	for _, e := range elems {
		if e.Tag.Group == group && e.Tag.Element == element {
			return e
		}
	}
	return nil
}

// elementText returns the values of a text element, padding removed
// (PS3.5 6.2); an element kept as bytes (UN in an implicit VR data set,
// or a private element written as OB) is read as its text.
func elementText(e *dicom.Element) []string {
	if e == nil || e.Value == nil {
		return nil
	}
	var v []string
	switch x := e.Value.GetValue().(type) {
	case []string:
		v = x
	case []byte:
		v = strings.Split(string(x), `\`)
	default:
		return nil
	}
	out := make([]string, len(v))
	for i, s := range v {
		out[i] = strings.Trim(s, " \x00")
	}
	return out
}

// elementFloats returns the numbers of a numeric element: parsed
// values, decimal text, or bytes. Bytes are read as text when they look
// like text (an IS or DS kept as UN), else as binary values of size
// bytes each (8: FD, 4: FL) in byte order bo. nil when unreadable.
func elementFloats(e *dicom.Element, bo binary.ByteOrder, size int) []float64 {
	if e == nil || e.Value == nil {
		return nil
	}
	switch x := e.Value.GetValue().(type) {
	case []float64:
		return x
	case []int:
		out := make([]float64, len(x))
		for i, v := range x {
			out[i] = float64(v)
		}
		return out
	case []string:
		return decimals(x)
	case []byte:
		if isDecimalText(x) {
			return decimals(strings.Split(string(x), `\`))
		}
		if len(x) == 0 || len(x)%size != 0 {
			return nil
		}
		out := make([]float64, 0, len(x)/size)
		for i := 0; i < len(x); i += size {
			var v float64
			if size == 8 {
				v = math.Float64frombits(bo.Uint64(x[i:]))
			} else {
				v = float64(math.Float32frombits(bo.Uint32(x[i:])))
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil
			}
			out = append(out, v)
		}
		return out
	}
	return nil
}

func decimals(s []string) []float64 {
	out := make([]float64, 0, len(s))
	for _, t := range s {
		v, err := strconv.ParseFloat(strings.Trim(t, " \x00"), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		out = append(out, v)
	}
	return out
}

// isDecimalText says whether b is the text of IS or DS values (PS3.5
// 6.2: digits, sign, point, exponent, space padding, backslash).
func isDecimalText(b []byte) bool {
	digit := false
	for _, c := range b {
		switch {
		case c >= '0' && c <= '9':
			digit = true
		case c == '+' || c == '-' || c == '.' || c == 'e' || c == 'E' || c == ' ' || c == '\\' || c == 0:
		default:
			return false
		}
	}
	return digit
}
