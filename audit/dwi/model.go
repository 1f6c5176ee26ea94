package dwi

// This file is the shared model of a diffusion study: what the readers
// of package audit/header produce, what assembly (assemble.go) groups,
// and what the computation (package audit/adc) and the rules read. Keep
// it free of I/O.

import "strconv"

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
// PS3.17 suggestions; DOMAIN.md).
type MapKind int

const (
	KindAcquired     MapKind = iota // DWI or b0 as acquired (or a scanner-made trace)
	KindADC                         // scanner ADC map (value 4 ADC, or Real World Value Mapping in mm2/s, um2/s, 10-6.mm2/s)
	KindEADC                        // scanner eADC map (DIFFUSION_ATTNTD)
	KindOtherDerived                // FA and other derived images the audit does not use
)

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

	// Encapsulated is set when the pixel data is compressed
	// (encapsulated transfer syntax): the audit reports "cannot compute"
	// instead of guessing.
	Encapsulated bool
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

// Volume is every slice of one diffusion weighting: one b-value and one
// direction (or isotropic), ordered by slice position along the slice
// normal. Slices[i] is nil where the series' slice grid has a position
// this volume lacks.
type Volume struct {
	BValue    float64 // nominal b-value (mean of the cluster), s/mm^2
	Direction Direction
	Isotropic bool    // a scanner-made trace/isotropic image, or b = 0
	Kind      MapKind // acquired, or a scanner ADC/eADC map
	SeriesUID string  // the series the volume came from (a b0 may come from another series)
	Slices    []*Frame
	// Geometry is the geometry of the volume's first present slice.
	Geometry Geometry
}

// Facts are what assembly found, as data, for the rules.
type Facts struct {
	BValues          []float64               // distinct nominal b-values, ascending
	Directions       map[float64][]Direction // directions per b-value (none for isotropic)
	SlicesPerVolume  []int                   // present slices of each volume, same order as Series.Volumes
	MissingSlices    []MissingSlice          // grid positions absent from some volume
	Duplicates       []string                // SOP Instance UID (and frame) of images that repeat another image's b-value, direction and position
	Encapsulated     bool                    // some image has compressed pixel data
	InconsistentB    []string                // images whose b-value disagrees with their volume beyond tolerance, or with their b-matrix trace
	GeometryMismatch []string                // volumes whose geometry differs from the reference volume beyond tolerance
	B0FromSeries     string                  // when the b0 volume came from another series of the study

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
}
