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
	"fmt"
	"math"
	"strings"

	"github.com/suyashkumar/dicom"

	"dwiaudit/audit/dwi"
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

	csaGroup         = 0x0029
	csaImageOffset   = 0x10 // CSA Image Header Info, OB
	csaSeriesOffset  = 0x20 // CSA Series Header Info, OB
	mrGroup          = 0x0019
	mrBValueOffset   = 0x0C // IS, s/mm^2
	mrDirectionality = 0x0D // CS: DIRECTIONAL, NONE, ...
	mrGradientOffset = 0x0E // FD x3
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
// voxel axes itself; TestReadSiemensNibabelMosaics turns the direction of
// nibabel's siemens_dwi_1000 into nibabel's voxel axes and meets its
// EXPECTED_PARAMS within 1e-6 (1e-8 measured), where reading it as
// image axes would miss by 2.6e-5).
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
// header that is present but malformed is an error wrapping ErrCSA (and
// ErrPrivateSource).
func ReadSiemens(elems []*dicom.Element, bo binary.ByteOrder) (d SiemensDiffusion, found bool, err error) {
	return readSiemens(&MakerImage{Frame: &dwi.Frame{}, levels: []level{elems}, bo: bo, reader: siemensName})
}

// ReadCSA finds and parses the CSA image header (series false) or the
// CSA series header (series true) among the top-level elements. found
// is false when the block or the element is absent (an anonymiser may
// drop the element and keep its creator; nibabel's get_csa_header then
// returns None too).
func ReadCSA(elems []*dicom.Element, series bool) (h *CSAHeader, found bool, err error) {
	off := uint8(csaImageOffset)
	if series {
		off = csaSeriesOffset
	}
	return readCSA(&MakerImage{Frame: &dwi.Frame{}, levels: []level{elems}, bo: binary.LittleEndian, reader: siemensName}, off)
}

func readCSA(im *MakerImage, off uint8) (*CSAHeader, bool, error) {
	e, _ := im.Private(SiemensCSACreator, csaGroup, off)
	if e == nil {
		return nil, false, nil
	}
	b := e.Bytes()
	if len(b) == 0 {
		return nil, false, nil
	}
	h, err := ParseCSA(b)
	if err != nil {
		return nil, true, fmt.Errorf("%w: %w", im.Fail(e, "CSA header"), err)
	}
	return h, true, nil
}

func readSiemens(im *MakerImage) (d SiemensDiffusion, found bool, err error) {
	csa, csaFound, err := readCSA(im, csaImageOffset)
	if err != nil {
		return d, true, err
	}
	_, mrFound := im.Private(SiemensMRCreator, mrGroup, mrBValueOffset)
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

	if !mrFound {
		return d, true, nil
	}
	if e, _ := im.Private(SiemensMRCreator, mrGroup, mrBValueOffset); e != nil && !d.HasBValue {
		v, err := e.Numbers(ValueIS)
		if err != nil || len(v) != 1 || v[0] < 0 {
			return d, true, im.Fail(e, "b-value %v: %v", v, err)
		}
		d.BValue, d.HasBValue, d.BValueSource = v[0], true, "mr-header"
	}
	if e, _ := im.Private(SiemensMRCreator, mrGroup, mrGradientOffset); e != nil && !d.HasGradient {
		v, err := e.Numbers(ValueFD)
		if err != nil || len(v) != 3 {
			return d, true, im.Fail(e, "gradient direction %v: %v", v, err)
		}
		if unitish(v) { // a zero vector is "no direction"
			copy(d.Gradient[:], v)
			d.HasGradient = true
		}
	}
	if e, _ := im.Private(SiemensMRCreator, mrGroup, mrDirectionality); e != nil && d.Directionality == "" {
		if s := e.Strings(); len(s) > 0 {
			d.Directionality = s[0]
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

// siemensName is the maker reader's name: Frame.BValueSource is
// "maker:siemens" for the b-values it gives.
const siemensName = "siemens"

// SiemensReader is the built-in maker reader for Siemens images: the
// b-value, gradient direction and directionality from the CSA image
// header, else from the "SIEMENS MR HEADER" elements, and the split of
// MOSAIC images into their slices. It applies to any image that carries
// either private block, whatever its Manufacturer says (a converter or
// an anonymiser may change that attribute and keep the blocks).
func SiemensReader() MakerReader {
	return MakerReader{
		Name:     siemensName,
		Creators: []string{SiemensCSACreator, SiemensMRCreator},
		Read:     siemensMakerRead,
		Split:    siemensSplit,
	}
}

func siemensMakerRead(im *MakerImage) (MakerDiffusion, error) {
	d, found, err := readSiemens(im)
	if err != nil || !found {
		return MakerDiffusion{}, err
	}
	m := MakerDiffusion{BValue: d.BValue, HasBValue: d.HasBValue, Gradient: d.Gradient, HasGradient: d.HasGradient}
	switch strings.ToUpper(d.Directionality) {
	case "NONE":
		m.Directionality = dwi.DirectionalityNone
	case "DIRECTIONAL":
		m.Directionality = dwi.DirectionalityDirectional
	case "ISOTROPIC":
		m.Directionality = dwi.DirectionalityIsotropic
	case "BMATRIX":
		m.Directionality = dwi.DirectionalityBMatrix
	}
	if d.HasBValue && d.BValue == 0 {
		// A b0 is no direction, whatever the header says (nibabel's
		// siemens_dwi_0 has B_value 0 and DiffusionDirectionality
		// DIRECTIONAL; PS3.3 C.8.13.5.9: NONE for b = 0).
		m.Directionality = dwi.DirectionalityNone
		m.HasGradient = false
	}
	return m, nil
}

// siemensSplit says whether an image is a mosaic (Image Type MOSAIC)
// and lays out its slices from NumberOfImagesInMosaic and
// SliceNormalVector of its CSA header (mosaic.go). A mosaic that cannot
// be laid out is malformed (ErrMalformed and ErrMosaic): the image is
// unreadable, never a false single slice.
func siemensSplit(im *MakerImage) (Mosaic, bool, error) {
	if !IsMosaic(im.Frame.ImageType) {
		return Mosaic{}, false, nil
	}
	csa, _, err := readCSA(im, csaImageOffset)
	if err != nil {
		return Mosaic{}, false, err
	}
	n, ok := csa.Int(CSAMosaicImages)
	if !ok {
		return Mosaic{}, false, fmt.Errorf("%w: %w: a MOSAIC image without NumberOfImagesInMosaic in a CSA image header", ErrMalformed, ErrMosaic)
	}
	var normal [3]float64
	v, hasNormal := csa.Vector(CSASliceNormal, 3)
	if hasNormal {
		copy(normal[:], v)
	}
	m, err := MosaicLayout(im.Frame.Geometry, n, normal, hasNormal && unitish(v))
	if err != nil {
		return Mosaic{}, false, fmt.Errorf("%w: %w", ErrMalformed, err)
	}
	return m, true, nil
}
