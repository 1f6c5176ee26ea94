package dwi

// This file is the shared model of a diffusion study: what the readers
// of package audit/header produce, what assembly (assemble.go) groups,
// and what the computation (package audit/adc) and the rules read. Keep
// it free of I/O.

import (
	"fmt"
	"math"
	"strconv"
)

// Directionality is Diffusion Directionality (0018,9075), PS3.3
// C.8.13.5.9.
type Directionality int

const (
	DirectionalityUnknown     Directionality = iota // attribute absent
	DirectionalityNone                              // "NONE": b = 0 or no diffusion weighting
	DirectionalityDirectional                       // "DIRECTIONAL": one gradient direction
	DirectionalityBMatrix                           // "BMATRIX": b-matrix given
	DirectionalityIsotropic                         // "ISOTROPIC": trace or isotropic image
)

// String is the defined term (PS3.3 C.8.13.5.9), "unknown" when absent.
func (d Directionality) String() string {
	switch d {
	case DirectionalityNone:
		return "NONE"
	case DirectionalityDirectional:
		return "DIRECTIONAL"
	case DirectionalityBMatrix:
		return "BMATRIX"
	case DirectionalityIsotropic:
		return "ISOTROPIC"
	}
	return "unknown"
}

// MapKind says what an image is: an acquired diffusion-weighted image, or
// a map the scanner derived (PS3.3 C.8.13.1.1.1 Image Type value 4,
// PS3.17 suggestions; docs/references.md#derived-maps).
type MapKind int

const (
	KindAcquired     MapKind = iota // DWI or b0 as acquired (or a scanner-made trace)
	KindADC                         // scanner ADC map (value 4 ADC, or Real World Value Mapping in mm2/s, um2/s, 10-6.mm2/s)
	KindEADC                        // scanner eADC map (DIFFUSION_ATTNTD)
	KindOtherDerived                // other derived images the audit does not use
	KindFA                          // fractional anisotropy map (FA, DIFFUSION_ANISO)
	KindColourFA                    // colour FA: an RGB map of the principal direction (Samples per Pixel 3)
	KindTensorB0                    // the b0 a tensor fit writes out (TENSOR_B0)
	KindNonImage                    // not an image the audit reads (another SOP Class, e.g. a private non-image object)
)

// Audited says whether images of this kind take part in the audit:
// acquired images and the scanner's ADC and eADC maps (which
// scanner-adc-disagrees compares). Other derived maps are listed with
// their kind and not audited.
func (k MapKind) Audited() bool {
	return k == KindAcquired || k == KindADC || k == KindEADC
}

func (k MapKind) String() string {
	switch k {
	case KindAcquired:
		return "acquired"
	case KindADC:
		return "ADC map"
	case KindEADC:
		return "eADC map"
	case KindOtherDerived:
		return "other derived map"
	case KindFA:
		return "FA map"
	case KindColourFA:
		return "colour FA map"
	case KindTensorB0:
		return "tensor b0"
	case KindNonImage:
		return "non-image object"
	}
	return "MapKind(" + strconv.Itoa(int(k)) + ")"
}

// RealWorldValue is one Real World Value Mapping item (0040,9096):
// value = Slope*stored + Intercept, in Units (a UCUM code value from
// (0040,08EA), e.g. "mm2/s", "um2/s", "10-6.mm2/s").
type RealWorldValue struct {
	Slope, Intercept float64
	Units            string
}

// Scanner identifies the device an image came from. Label is the
// configured scanner label (from the calling AE title or the identity),
// used in metrics and reports; it never holds patient data.
type Scanner struct {
	StationName        string
	DeviceSerialNumber string
	InstitutionName    string
	Manufacturer       string
	ModelName          string
	CallingAETitle     string
	Label              string
}

// Geometry is the placement of one image (PS3.3 C.7.6.2): Image Position
// (Patient) of the first transmitted pixel, Image Orientation (Patient)
// row and column direction cosines, Pixel Spacing (row spacing, column
// spacing) in mm.
type Geometry struct {
	Rows, Columns  int
	PixelSpacing   [2]float64 // (0028,0030): adjacent rows, adjacent columns, mm
	Position       [3]float64 // (0020,0032) or Plane Position Sequence (0020,9113)
	Orientation    [6]float64 // (0020,0037) or Plane Orientation Sequence (0020,9116)
	SliceThickness float64    // (0018,0050), mm; 0 if absent
	// SpacingBetweenSlices is (0018,0088) (top level or Pixel Measures
	// Sequence), mm; 0 if absent.
	SpacingBetweenSlices float64
	Known                bool // position and orientation were present
}

// Frame is one image: a classic MR instance, or one frame of a
// multi-frame instance. Pixels are stored values after Rescale Slope and
// Intercept (or the per-frame Pixel Value Transformation), row-major,
// Rows*Columns long; nil when not loaded or not computable.
type Frame struct {
	SOPInstanceUID    string
	SOPClassUID       string
	TransferSyntaxUID string
	FrameNumber       int // 1-based within a multi-frame instance; 0 for a single-frame image
	// Tile is the 1-based slice of a mosaic image (several slices side
	// by side in one image) that a maker reader split; 0 otherwise.
	Tile           int
	InstanceNumber int

	StudyInstanceUID    string
	SeriesInstanceUID   string
	FrameOfReferenceUID string
	SeriesNumber        int
	SeriesDescription   string
	ProtocolName        string
	StudyDate           string
	AccessionNumber     string
	Modality            string // (0008,0060)
	// AcquisitionContrast is (0008,9209), "DIFFUSION" for diffusion
	// weighted Enhanced MR frames (PS3.3 C.8.13.3.1.2); "" if absent.
	AcquisitionContrast string
	// BodyPartExamined is (0018,0015) of the General Series module
	// (PS3.3 C.7.3.1), e.g. "BRAIN", "HEAD", "PROSTATE"; "" if absent.
	// Rules match protocols on it.
	BodyPartExamined string

	BValue         float64
	HasBValue      bool
	BValueSource   string // "standard" (0018,9087 top level), "per-frame", "shared", "private:<name>" (a configured source) or "maker:<name>" (a maker reader)
	Directionality Directionality
	Gradient       [3]float64 // Diffusion Gradient Orientation (0018,9089), patient axes
	HasGradient    bool
	BMatrix        [6]float64 // XX XY XZ YY YZ ZZ (0018,9602..9607)
	HasBMatrix     bool

	Geometry         Geometry
	RescaleSlope     float64 // 1 when absent
	RescaleIntercept float64
	ImageType        []string // Image Type (0008,0008) or Frame Type (0008,9007)
	Kind             MapKind
	RealWorld        []RealWorldValue

	Scanner Scanner

	// Encapsulated is set when the pixel data is compressed in a way the
	// audit does not decode (a transfer syntax package audit/codec does
	// not know, such as JPEG 2000): the audit reports "cannot compute"
	// instead of guessing. Undecoded says why, naming the syntax.
	// Compressed pixel data the codecs decode gives Pixels as native
	// data does, and neither is set.
	Encapsulated bool
	Undecoded    string
	Pixels       []float32
}

// ID names the image in facts and errors: its SOP Instance UID, followed
// by "#n" for frame n of a multi-frame instance and "/k" for slice k of
// a mosaic. It holds no patient data.
func (f *Frame) ID() string {
	id := f.SOPInstanceUID
	if f.FrameNumber != 0 {
		id += "#" + strconv.Itoa(f.FrameNumber)
	}
	if f.Tile != 0 {
		id += "/" + strconv.Itoa(f.Tile)
	}
	return id
}

// Direction is a unit gradient direction; the zero value stands for
// "isotropic or none".
type Direction [3]float64

// Weighting says what diffusion weighting a volume holds, as the
// gradient table shows it.
type Weighting int

const (
	// WeightingB0 is a reference weighting: b up to Tolerances.B0Max
	// (50 s/mm², common practice), with or without a direction.
	WeightingB0 Weighting = iota
	// WeightingDirection is one gradient direction (Diffusion Gradient
	// Orientation or a b-matrix, PS3.3 C.8.13.5.9).
	WeightingDirection
	// WeightingTrace is the scanner's own trace (isotropic) image:
	// Diffusion Directionality ISOTROPIC (PS3.3 C.8.13.5.9), or Image
	// Type value TRACEW (common practice).
	WeightingTrace
	// WeightingIsotropic is diffusion-weighted images that give no
	// direction and no isotropic label: treated as isotropic. With more
	// than one such image per slice their directions are unknown
	// (Facts.UnknownDirections) and the volume is their geometric mean.
	WeightingIsotropic
)

// String is the gradient table's name of the kind: "b0", "direction",
// "trace", "isotropic".
func (w Weighting) String() string {
	switch w {
	case WeightingB0:
		return "b0"
	case WeightingDirection:
		return "direction"
	case WeightingTrace:
		return "trace"
	case WeightingIsotropic:
		return "isotropic"
	}
	return "Weighting(" + strconv.Itoa(int(w)) + ")"
}

// Combination says how a volume's slices were made from its images.
type Combination int

const (
	// CombinedNone: one image per slice, used as it is.
	CombinedNone Combination = iota
	// CombinedMean: repeats (averages) of one b-value, direction and
	// slice, averaged pixel by pixel (the arithmetic mean of magnitude
	// images, as a scanner's own averaging does; common practice).
	CombinedMean
	// CombinedGeometricMean: several images per slice without a
	// direction, combined as a trace is (their geometric mean; Basser &
	// Pierpaoli, docs/references.md#basser-pierpaoli): right when they are distinct directions of
	// a balanced scheme, biased otherwise (Facts.UnknownDirections).
	CombinedGeometricMean
)

// Volume is every slice of one diffusion weighting: one b-value and one
// direction (or isotropic), ordered by slice position along the slice
// normal. Slices[i] is nil where the series' slice grid has a position
// this volume lacks.
//
// Images with the same b-value, direction and slice are repeats
// (averages): they are all kept in Images, and Slices[i] is then a
// Frame of its own whose header is the first repeat's and whose pixels
// are the combination (Combined) of them all. The ADC is computed from
// Slices; nothing acquired is dropped.
type Volume struct {
	// BValue is the nominal b-value, s/mm²: the whole number most of the
	// volume's images carry, 0 for a b-value within the b-value
	// tolerance of 0 (Tolerances). The ADC uses it.
	BValue float64
	// BValueMeasured is the mean of the b-values the images carry.
	BValueMeasured float64
	Direction      Direction
	Isotropic      bool      // no direction: b0, a scanner-made trace/isotropic image, or no direction given
	Weighting      Weighting // b0, direction, trace or isotropic (maps: the acquired weighting they were made from is unknown, b0)
	Kind           MapKind   // acquired, or a scanner ADC/eADC map
	SeriesUID      string    // the series the volume came from (a b0 may come from another series)
	Slices         []*Frame
	// Images are the images behind each slice, in instance order
	// (Images[i][0] is the first); nil where a volume was built without
	// them, when each slice is its one image.
	Images [][]*Frame
	// Combined says how slices with more than one image were made.
	Combined Combination
	// Geometry is the geometry of the volume's first present slice.
	Geometry Geometry
}

// SliceOffset is a volume whose slices lie off the series' grid along
// the slice normal.
type SliceOffset struct {
	Volume string  // the volume, as Volume.String names it
	MM     float64 // its median offset along the normal, mm (signed)
	// Spacing is the slice spacing of the other volumes, mm (0 when they
	// have one slice).
	Spacing float64
	// Tilted: the volume's orientation differs from the others' beyond
	// tolerance, which is what moves its slices.
	Tilted bool
	// Outside counts its images left out because, placed on the others'
	// slices, they fall beyond the others' coverage.
	Outside int
}

// String describes the offset for a finding.
func (o SliceOffset) String() string {
	s := fmt.Sprintf("%s: slice positions %+.2f mm along the normal from the other volumes'", o.Volume, o.MM)
	if o.Spacing > 0 {
		s += fmt.Sprintf(" (%.2f of the %.2f mm slice spacing)", math.Abs(o.MM)/o.Spacing, o.Spacing)
	}
	if o.Tilted {
		s += ", the volume tilted against them"
	}
	if o.Outside > 0 {
		s += fmt.Sprintf("; %d of its images beyond their coverage left out", o.Outside)
	}
	return s
}

// ImagesAt is the acquired images behind slice i: Images[i], or
// Slices[i] alone when the volume carries no Images.
func (v *Volume) ImagesAt(i int) []*Frame {
	if i < len(v.Images) {
		return v.Images[i]
	}
	if i < len(v.Slices) && v.Slices[i] != nil {
		return []*Frame{v.Slices[i]}
	}
	return nil
}

// ImageCount is how many acquired images the volume holds, repeats
// included.
func (v *Volume) ImageCount() int {
	n := 0
	for i := range v.Slices {
		n += len(v.ImagesAt(i))
	}
	return n
}

// UnknownDirections is one b-value whose diffusion-weighted images carry
// no gradient direction and no isotropic label, with more than one of
// them per slice: they may be distinct directions or repeats, and the
// audit cannot tell.
type UnknownDirections struct {
	BValue float64
	// Images is how many such images the series has at this b-value;
	// PerSlice the most on one slice.
	Images, PerSlice int
}

// Facts are what assembly found, as data, for the rules.
type Facts struct {
	BValues         []float64               // distinct nominal b-values, ascending
	Directions      map[float64][]Direction // directions per b-value (none for isotropic)
	SlicesPerVolume []int                   // present slices of each volume, same order as Series.Volumes
	MissingSlices   []MissingSlice          // grid positions absent from some volume
	// Duplicates are images (SOP Instance UID and frame) met twice: the
	// same image, not a repeat; the second is left out.
	Duplicates []string
	// Repeats are images averaged into a slice with another image of the
	// same b-value, direction and position (every repeat but the first;
	// Volume.Combined is CombinedMean).
	Repeats []string
	// UnknownDirections lists the b-values above Tolerances.B0Max whose
	// images give no direction, several per slice (Volume.Combined is
	// CombinedGeometricMean).
	UnknownDirections []UnknownDirections
	Encapsulated      bool     // some image has compressed pixel data
	InconsistentB     []string // images whose b-value disagrees with their volume beyond tolerance, or with their b-matrix trace
	GeometryMismatch  []string // volumes whose geometry differs from the reference volume beyond tolerance
	// SliceOffsets are the volumes whose slice positions lie off the
	// other volumes' by a fraction of the slice spacing (a quarter, a
	// half), or off them because the volume is tilted: placed on the
	// nearest slice of the others so that they are not taken for
	// missing slices, and listed in GeometryMismatch too.
	SliceOffsets []SliceOffset
	B0FromSeries string // when the b0 volume came from another series of the study

	// NoGeometry lists images without usable Image Position and
	// Orientation (Patient) (PS3.3 C.7.6.2): they are in no volume, and
	// the rest of the series is assembled without them.
	NoGeometry []string
	// NoBValue lists images with no b-value from any source and a
	// Diffusion Directionality other than NONE: they are in no volume.
	NoBValue []string
	// SliceSpacing is the median distance between neighbouring grid
	// positions, mm; 0 with fewer than two positions.
	SliceSpacing float64
	// GridGaps are grid positions no image of the series has, inferred
	// from the regular SliceSpacing (a slice missing from every volume).
	// They are in Series.Grid, so every volume lists them as missing.
	GridGaps []float64
	// B0Unmatched lists series of the same study and frame of reference
	// whose b0 could not be borrowed because their slices or geometry
	// differ from this series'.
	B0Unmatched []string
}

// MissingSlice is a slice position (mm along the normal) that a volume
// lacks.
type MissingSlice struct {
	BValue    float64
	Direction Direction
	Position  float64
}

// Series is one assembled diffusion series (plus a b0 borrowed from a
// sibling series when it has none).
type Series struct {
	StudyInstanceUID  string
	SeriesInstanceUID string
	SeriesNumber      int
	SeriesDescription string
	ProtocolName      string
	BodyPartExamined  string // (0018,0015) of the reference image
	Scanner           Scanner

	// Grid is the common slice grid: positions along Normal, ascending.
	Grid      []float64
	Normal    [3]float64
	Reference Geometry // geometry of the first slice of the reference (lowest-b) volume

	Volumes []*Volume // sorted by b-value, then direction
	Maps    []*Volume // scanner-derived ADC/eADC maps in this series
	Facts   Facts
}

// Study groups the series of one study.
type Study struct {
	StudyInstanceUID string
	Series           []*Series
	// Failed lists the diffusion series that could not be assembled,
	// each with its error; the other series are still in Series.
	Failed []*SeriesError
	// Derived lists the series made only of derived maps the audit does
	// not use (FA, colour FA, tensor b0, ...: MapKind.Audited false):
	// known, not audited.
	Derived []DerivedSeries
}

// DerivedSeries is a series of derived maps the audit lists and does
// not audit.
type DerivedSeries struct {
	SeriesInstanceUID string
	SeriesNumber      int
	SeriesDescription string
	Kind              MapKind // the kind most of its images are
	Images            int
}
