package synth

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/scp/part10"
)

// UIDs this package writes (PS3.6 Table A-1).
const (
	MRImageStorage         = "1.2.840.10008.5.1.4.1.1.4"
	ExplicitVRLittleEndian = "1.2.840.10008.1.2.1"
	ImplicitVRLittleEndian = "1.2.840.10008.1.2"
)

// Defaults for a zero Series field.
const (
	defaultRows    = 256
	defaultColumns = 256
	defaultSlices  = 16
)

// Limits on a Series.
const (
	// maxMatrix caps Rows and Columns. Clinical MR matrices stay at or
	// below 1024 (common practice); one such 16-bit image is 2 MiB.
	maxMatrix = 1024
	// maxSlices caps the images of one series. A large DWI series is a few
	// thousand images (for example 60 slices times 65 volumes, common
	// practice); more here is a mistake that would fill the disk.
	maxSlices = 4096
)

// The invented people and places every file names (see the package doc).
const (
	InstitutionName   = "Quellvander Ostmire Hospital"
	StationName       = "QOH-MR1"
	Manufacturer      = "Synthetic"
	modelName         = "dwiaudit synth"
	PatientName       = "TEST^SYNTHETIC"
	PatientID         = "SYN0001"
	patientBirthDate  = "19700101"
	patientSex        = "O"
	AccessionNumber   = "SYNACC0001"
	studyDescription  = "MR brain synthetic"
	SeriesDescription = "DWI synthetic"
	StudyDate         = "20250314"
	StudyTime         = "093000"
)

// Acquisition geometry, chosen to look like a clinical axial DWI (common
// practice): 230 mm field of view, 4 mm gapless slices.
const (
	fieldOfViewMM    = 230.0
	sliceThicknessMM = 4.0
)

// Independent random streams from one Seed, so that giving a UID in the
// Series does not change the pixels and the other way round.
const (
	uidStream   = 0x55494453 // "UIDS"
	pixelStream = 0x5049584c // "PIXL"
)

// Pixel model: 12 bits stored (the MR Image Module allows 12 or 16, PS3.3
// C.8.3.1, from memory), signal S0·exp(-b·ADC) (Stejskal–Tanner, common practice), noise
// of standard deviation noiseSigma on each of the real and imaginary parts,
// shown as a magnitude.
const (
	bitsStored = 12
	maxPixel   = 1<<bitsStored - 1
	noiseSigma = 20.0
	tissueS0   = 1200.0
	csfS0      = 1900.0
	tissueADC  = 0.8e-3 // mm²/s, brain parenchyma (common practice)
	csfADC     = 3.0e-3 // mm²/s, free water at body temperature (common practice)
)

// Series describes one synthetic MR series. Zero fields take defaults.
type Series struct {
	// StudyInstanceUID and SeriesInstanceUID are generated with NewUID from
	// the Seed when empty.
	StudyInstanceUID, SeriesInstanceUID string
	// Rows and Columns are the image matrix, 256 × 256 when zero.
	Rows, Columns int
	// Slices is the number of images in the series, 16 when zero.
	// Image i lies at slice position i.
	Slices int
	// BValues, when set, puts Diffusion b-value (0018,9087) in every image,
	// image i taking BValues[i % len(BValues)], and attenuates its pixels
	// accordingly. In s/mm².
	BValues []float64
	// TransferSyntaxUID is ExplicitVRLittleEndian (the default) or
	// ImplicitVRLittleEndian.
	TransferSyntaxUID string
	// Seed fixes every UID that is generated and every pixel.
	Seed int64
}

// WriteSeries writes s into dir (created if missing) as one MR Image Storage
// Part 10 file per image, named MR0001.dcm, MR0002.dcm, ..., and returns
// their paths in order. The bytes depend only on s: the same Series, Seed
// included, gives the same files, SOP Instance UIDs too, so series meant to
// coexist in one archive need different seeds. On error the file being
// written is removed; those before it are kept.
func WriteSeries(dir string, s Series) ([]string, error) {
	s, err := s.withDefaults()
	if err != nil {
		return nil, err
	}
	uids := rand.New(rand.NewPCG(uint64(s.Seed), uidStream))
	pixels := rand.New(rand.NewPCG(uint64(s.Seed), pixelStream))
	if s.StudyInstanceUID == "" {
		s.StudyInstanceUID = NewUID(uids)
	}
	if s.SeriesInstanceUID == "" {
		s.SeriesInstanceUID = NewUID(uids)
	}
	frameOfReference := NewUID(uids)

	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	g := newGeometry(s)
	raw := make([]uint16, s.Rows*s.Columns)
	// Reused for every image: each file is written before the next fill.
	pixelBytes := make([]byte, 2*len(raw))
	paths := make([]string, 0, s.Slices)
	for i := 0; i < s.Slices; i++ {
		img := image{
			index:            i,
			sopInstanceUID:   NewUID(uids),
			frameOfReference: frameOfReference,
			bValue:           math.NaN(),
		}
		if len(s.BValues) > 0 {
			img.bValue = s.BValues[i%len(s.BValues)]
		}
		g.fill(raw, i, img.bValue, pixels)
		for j, p := range raw {
			binary.LittleEndian.PutUint16(pixelBytes[2*j:], p)
		}
		path := filepath.Join(dir, fmt.Sprintf("MR%04d.dcm", i+1))
		ds, err := dataset(s, g, img, pixelBytes)
		if err != nil {
			return paths, err
		}
		if err := WriteFile(path, ds); err != nil {
			return paths, err
		}
		paths = append(paths, path)
	}
	return paths, nil
}

// withDefaults fills zero fields and checks the rest.
func (s Series) withDefaults() (Series, error) {
	if s.Rows == 0 {
		s.Rows = defaultRows
	}
	if s.Columns == 0 {
		s.Columns = defaultColumns
	}
	if s.Slices == 0 {
		s.Slices = defaultSlices
	}
	if s.TransferSyntaxUID == "" {
		s.TransferSyntaxUID = ExplicitVRLittleEndian
	}
	switch {
	case s.Rows < 0 || s.Rows > maxMatrix || s.Columns < 0 || s.Columns > maxMatrix:
		return s, fmt.Errorf("%w: matrix %d×%d, each side 1..%d", errInvalidSeries, s.Rows, s.Columns, maxMatrix)
	case s.Slices < 0 || s.Slices > maxSlices:
		return s, fmt.Errorf("%w: %d slices, limit %d", errInvalidSeries, s.Slices, maxSlices)
	case s.TransferSyntaxUID != ExplicitVRLittleEndian && s.TransferSyntaxUID != ImplicitVRLittleEndian:
		return s, fmt.Errorf("%w: %q", errUnsupportedTransferSyntax, s.TransferSyntaxUID)
	}
	for _, u := range []string{s.StudyInstanceUID, s.SeriesInstanceUID} {
		if u != "" && !validUID(u) {
			return s, fmt.Errorf("%w: UID %q", errInvalidSeries, u)
		}
	}
	for _, b := range s.BValues {
		if b < 0 || math.IsNaN(b) || math.IsInf(b, 0) {
			return s, fmt.Errorf("%w: b-value %v", errInvalidSeries, b)
		}
	}
	s.BValues = slices.Clone(s.BValues)
	return s, nil
}

// validUID checks the UI syntax of PS3.5 9.1: at most 64 characters, digits
// in dot-separated components, no leading zero in a multi-digit component.
func validUID(u string) bool {
	if len(u) > 64 {
		return false
	}
	for _, c := range strings.Split(u, ".") {
		if c == "" || (len(c) > 1 && c[0] == '0') || strings.Trim(c, "0123456789") != "" {
			return false
		}
	}
	return true
}

// image is what differs from one file of a series to the next.
type image struct {
	index            int
	sopInstanceUID   string
	frameOfReference string
	bValue           float64 // NaN when the series has no b-values
}

// geometry places the images: axial slices, rows along patient posterior
// (+y), columns along patient left (+x), slices from foot to head (+z),
// centred on the origin (PS3.3 C.7.6.2.1.1: LPS patient coordinates).
type geometry struct {
	rows, cols, slices int
	spacing            float64 // mm, square pixels
}

func newGeometry(s Series) geometry {
	return geometry{
		rows: s.Rows, cols: s.Columns, slices: s.Slices,
		spacing: fieldOfViewMM / float64(max(s.Rows, s.Columns)),
	}
}

// z is the patient z of slice i, in mm.
func (g geometry) z(i int) float64 {
	return (float64(i) - float64(g.slices-1)/2) * sliceThicknessMM
}

// position is Image Position (Patient), the centre of the first pixel
// (PS3.3 C.7.6.2.1.1).
func (g geometry) position(i int) []string {
	x := -float64(g.cols-1) / 2 * g.spacing
	y := -float64(g.rows-1) / 2 * g.spacing
	return []string{FormatDS(x), FormatDS(y), FormatDS(g.z(i))}
}

// fill draws slice i of a head-like phantom into raw, attenuated for b (NaN:
// no diffusion weighting): an ellipse of tissue, two CSF-filled ventricles,
// smooth shading, and magnitude noise, all from rnd in a fixed order.
func (g geometry) fill(raw []uint16, i int, b float64, rnd *rand.Rand) {
	if math.IsNaN(b) {
		b = 0
	}
	tissue := tissueS0 * math.Exp(-b*tissueADC)
	csf := csfS0 * math.Exp(-b*csfADC)
	// The head is an ellipsoid: slices far from the centre cut a smaller
	// ellipse.
	zn := g.z(i) / (float64(g.slices)/2*sliceThicknessMM + 2*sliceThicknessMM)
	scale := math.Sqrt(max(0, 1-zn*zn))
	ax, ay := 0.38*float64(g.cols)*scale, 0.46*float64(g.rows)*scale
	cx, cy := float64(g.cols-1)/2, float64(g.rows-1)/2
	for r := 0; r < g.rows; r++ {
		for c := 0; c < g.cols; c++ {
			signal := 0.0
			if ax > 0 && ay > 0 {
				u, v := (float64(c)-cx)/ax, (float64(r)-cy)/ay
				if u*u+v*v < 1 {
					// Gentle shading, as a receive coil gives (common practice).
					signal = tissue * (1 + 0.08*math.Cos(2.5*u)*math.Cos(1.7*v))
					// Ventricles: two small ellipses either side of the midline.
					for _, side := range [2]float64{-1, 1} {
						du, dv := (u-side*0.14)/0.09, (v+0.05)/0.28
						if du*du+dv*dv < 1 {
							signal = csf
						}
					}
				}
			}
			re := signal + noiseSigma*rnd.NormFloat64()
			im := noiseSigma * rnd.NormFloat64()
			raw[r*g.cols+c] = uint16(min(maxPixel, math.Round(math.Hypot(re, im))))
		}
	}
}

// dataset builds the Part 10 content of one image: File Meta Information
// and an MR Image IOD data set (PS3.3 A.4), elements in tag order.
func dataset(s Series, g geometry, img image, pixelBytes []byte) (dicom.Dataset, error) {
	num := strconv.Itoa(img.index + 1)
	spacing := FormatDS(g.spacing)
	thickness := FormatDS(sliceThicknessMM)

	var elems []*dicom.Element
	var errs []error
	add := func(t tag.Tag, v any) {
		e, err := dicom.NewElement(t, v)
		if err != nil {
			errs = append(errs, fmt.Errorf("synth: element %v: %w", t, err))
			return
		}
		elems = append(elems, e)
	}
	str := func(t tag.Tag, v ...string) { add(t, v) }
	// File Meta Information (PS3.10 7.1 Table 7.1-1).
	add(tag.FileMetaInformationVersion, []byte{0x00, 0x01})
	str(tag.MediaStorageSOPClassUID, MRImageStorage)
	str(tag.MediaStorageSOPInstanceUID, img.sopInstanceUID)
	str(tag.TransferSyntaxUID, s.TransferSyntaxUID)
	str(tag.ImplementationClassUID, part10.ImplementationClassUID)
	str(tag.ImplementationVersionName, part10.ImplementationVersionName)

	// Patient, General Study, General Series, Frame of Reference,
	// General Equipment, General Image, Image Plane, Image Pixel, MR Image
	// and SOP Common modules of the MR Image IOD (PS3.3 A.4, from memory), with a Type 2
	// element left empty where nothing sensible can be invented.
	str(tag.ImageType, "ORIGINAL", "PRIMARY", "OTHER")
	str(tag.SOPClassUID, MRImageStorage)
	str(tag.SOPInstanceUID, img.sopInstanceUID)
	str(tag.StudyDate, StudyDate)
	str(tag.SeriesDate, StudyDate)
	str(tag.ContentDate, StudyDate)
	str(tag.StudyTime, StudyTime)
	str(tag.SeriesTime, StudyTime)
	str(tag.ContentTime, StudyTime)
	str(tag.AccessionNumber, AccessionNumber)
	str(tag.Modality, "MR")
	str(tag.Manufacturer, Manufacturer)
	str(tag.InstitutionName, InstitutionName)
	str(tag.ReferringPhysicianName, "")
	str(tag.StationName, StationName)
	str(tag.StudyDescription, studyDescription)
	str(tag.SeriesDescription, SeriesDescription)
	str(tag.ManufacturerModelName, modelName)
	str(tag.PatientName, PatientName)
	str(tag.PatientID, PatientID)
	str(tag.PatientBirthDate, patientBirthDate)
	str(tag.PatientSex, patientSex)
	str(tag.ScanningSequence, "EP")      // echo planar, as DWI is acquired (common practice)
	str(tag.SequenceVariant, "SK", "SP") // segmented k-space, spoiled (common practice)
	str(tag.ScanOptions, "FS")           // fat saturation (common practice)
	str(tag.MRAcquisitionType, "2D")
	str(tag.SliceThickness, thickness)
	str(tag.RepetitionTime, "5000")          // ms (common practice for DWI)
	str(tag.EchoTime, "80")                  // ms (common practice for DWI)
	str(tag.MagneticFieldStrength, "3")      // T
	str(tag.SpacingBetweenSlices, thickness) // gapless
	str(tag.EchoTrainLength, "")
	str(tag.PatientPosition, "HFS")
	if !math.IsNaN(img.bValue) {
		add(tag.DiffusionBValue, []float64{img.bValue})
	}
	str(tag.StudyInstanceUID, s.StudyInstanceUID)
	str(tag.SeriesInstanceUID, s.SeriesInstanceUID)
	str(tag.StudyID, "1")
	str(tag.SeriesNumber, "1")
	str(tag.InstanceNumber, num)
	str(tag.ImagePositionPatient, g.position(img.index)...)
	str(tag.ImageOrientationPatient, "1", "0", "0", "0", "1", "0")
	str(tag.FrameOfReferenceUID, img.frameOfReference)
	str(tag.PositionReferenceIndicator, "")
	str(tag.SliceLocation, FormatDS(g.z(img.index)))
	add(tag.SamplesPerPixel, []int{1})
	str(tag.PhotometricInterpretation, "MONOCHROME2")
	add(tag.Rows, []int{g.rows})
	add(tag.Columns, []int{g.cols})
	str(tag.PixelSpacing, spacing, spacing)
	add(tag.BitsAllocated, []int{16})
	add(tag.BitsStored, []int{bitsStored})
	add(tag.HighBit, []int{bitsStored - 1})
	add(tag.PixelRepresentation, []int{0})
	// Native pixel data handed over as its little-endian bytes (PS3.5 8.2,
	// both our transfer syntaxes are little endian): the writer's own frame
	// encoder spends two allocations per pixel, half of WriteSeries' time.
	add(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: pixelBytes})

	SortElements(elems)
	return dicom.Dataset{Elements: elems}, errors.Join(errs...)
}
