package phantom

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"time"
)

// Transfer syntaxes Write can produce (PS3.5 A.1 and A.2, PS3.6 Table
// suyashkumar's writer handles both; nothing else is offered, so it
// is never handed a syntax it does not know.
const (
	ExplicitVRLittleEndian = "1.2.840.10008.1.2.1"
	ImplicitVRLittleEndian = "1.2.840.10008.1.2"
)

// Storage SOP classes written (PS3.4 B.5, PS3.6 Table A-1).
const (
	MRImageStorage         = "1.2.840.10008.5.1.4.1.1.4"
	EnhancedMRImageStorage = "1.2.840.10008.5.1.4.1.1.4.1"
)

// Defaults for zero Options fields.
const (
	DefaultMatrix = 128
	DefaultSlices = 20
	DefaultSNR    = 60.0 // b0 SNR in white matter; a 1.5 T brain DWI b0 is of this order (common practice)
	LowSNR        = 4.0  // the low-snr case: near the Rician floor at b = 1000 (docs/references.md#rician-floor: flag below about 3)
	DefaultDirs   = 3
	// ManyDirs is the largest direction scheme: a 30-direction DTI
	// acquisition, common in clinical tensor imaging (common practice).
	ManyDirs = 30
)

// Limits on Options, each with its reason.
const (
	// MinMatrix and MaxMatrix bound Options.Matrix. Below 16 pixels there
	// is no brain to see; clinical DWI stays at or below 256 and 512 is
	// already a reconstruction upsample (common practice).
	MinMatrix = 16
	MaxMatrix = 512
	// MaxSlices bounds Options.Slices: brain DWI covers the head in 20-60
	// slices (common practice); more is a mistake that would fill a disk.
	MaxSlices = 128
	// MaxBValues bounds the b-values of one protocol; multi-b body
	// protocols use up to about ten (common practice).
	MaxBValues = 16
	// MaxBValue bounds a b-value, s/mm^2: clinical DWI stays below 5000
	// (common practice); 10000 leaves room for research protocols.
	MaxBValue = 10000
	// maxText is the length of an LO value (PS3.5 6.2), the longest text
	// field Options carries.
	maxText = 64
	// maxAliasK bounds Options.B0ArtifactK for aliasing: k = 6 adds
	// 3000 to white matter's 600, near the 4095 the stored 12 bits hold
	// (acquire.go), beyond which the b0 clips.
	maxAliasK = 6
	// maxSH is the length of an SH value (PS3.5 6.2): Station Name.
	maxSH = 16
	// minBScale and maxBScale bound Options.AppliedBScale: a gradient
	// calibration off by more than about 20% in amplitude (b off by a
	// factor 0.64 to 1.44) would fail the scanner's own acceptance
	// tests (common practice); the bounds leave room past that.
	minBScale = 0.5
	maxBScale = 1.5
)

// The defect sizes of the cases, each with its reason.
const (
	// setDiffersFactor scales the highest b-value of the
	// bvalue-set-differs case: 1000 becomes 800.
	setDiffersFactor = 0.8
	// headerWrongFactor is the weighting applied in the
	// bvalue-header-wrong case relative to the header: 700 for 1000.
	headerWrongFactor = 0.7
	// misscaleFactor is how far the misscaled ADC map's Real World Value
	// Mapping is off: a factor 10, a unit slip between 1e-6 and 1e-5.
	misscaleFactor = 10
)

// ScannerProfile is the invented identity of a scanner (General
// Equipment, PS3.3 C.7.5.1, and Enhanced General Equipment C.7.5.2).
type ScannerProfile struct {
	Institution      string  // Institution Name (0008,0080)
	Station          string  // Station Name (0008,1010), at most 16 characters
	DeviceSerial     string  // Device Serial Number (0018,1000)
	Manufacturer     string  // Manufacturer (0008,0070): never a real vendor (a maker's layout writes the maker's instead, Layout)
	Model            string  // Manufacturer's Model Name (0008,1090)
	SoftwareVersions string  // Software Versions (0018,1020)
	FieldStrength    float64 // Magnetic Field Strength (0018,0087), tesla
}

// Scanners returns the invented scanners of Quellvander Ostmire Hospital.
// The zero ScannerProfile in Options means the first.
func Scanners() []ScannerProfile {
	const (
		hospital = "Quellvander Ostmire Hospital"
		maker    = "Synthetic"
		model    = "Phantom-1"
		software = "dwiaudit-phantom 1"
	)
	return []ScannerProfile{
		{hospital, "QOH-MR1", "SYN15T0001", maker, model, software, 1.5},
		{hospital, "QOH-MR2", "SYN30T0002", maker, model, software, 3},
		{hospital, "QOH-MR3", "SYN30T0003", maker, model, software, 3},
	}
}

// Options says what study to write. The zero value is a clean 128x128x20
// classic study with seed 0.
type Options struct {
	Case       Case  // CaseClean when empty
	Matrix     int   // rows = columns; DefaultMatrix when zero
	Slices     int   // DefaultSlices when zero
	Seed       int64 // fixes every UID and every noise sample
	MultiFrame bool  // Enhanced MR Image Storage instead of classic MR Image Storage (LayoutEnhanced)

	// Layout is how the diffusion encoding is written (see Layouts):
	// LayoutStandard when empty, or LayoutEnhanced when MultiFrame is set.
	// LayoutEnhanced sets MultiFrame; the makers' layouts are classic
	// images and refuse MultiFrame. A maker's layout writes the maker's
	// Manufacturer (0008,0070) in place of Scanner.Manufacturer.
	Layout Layout

	// SNR is the b0 signal-to-noise ratio of white matter (of the water for
	// the ice-water phantom): the noise standard deviation on each of the
	// real and imaginary channels is S0/SNR. Zero takes the case's default
	// (DefaultSNR, or LowSNR for the low-snr case); math.Inf(1) writes
	// noiseless images.
	SNR float64

	// BValues are the protocol's b-values, s/mm^2, ascending and
	// distinct; [0, 1000] when empty. Cases about b-values change what is
	// written from these (Truth.AppliedB and Truth.HeaderB say how).
	BValues []float64
	// Directions is the number of gradient directions per non-zero
	// b-value: 1 (z), 3 (x, y, z; the default) or 6 (the six (+-1,+-1,0)
	// permutations, normalised) or ManyDirs (a DTI scheme spread over the
	// half-sphere).
	Directions int
	// OmitTrace leaves out the scanner's isotropic trace image per
	// non-zero b-value, which is written by default.
	OmitTrace bool
	// B0Series puts the b0 images in a series of their own (same frame of
	// reference and slice positions), as some protocols do. The
	// slice-positions-differ case always does.
	B0Series bool
	// B0ArtifactK is the strength of the b0-artifact cases: the factor
	// by which the artifact scales the b0 of white matter at its centre
	// (docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by ln(k)/b). Aliasing adds
	// (k-1)·S0WhiteMatter at the centre and needs k > 1; dropout
	// multiplies the b0 by k there and needs 0 < k < 1. Zero keeps the
	// case's own strength (aliasing 1 + aliasAmplitude/S0WhiteMatter,
	// about 1.67; dropout dropoutFactor, 0.6). Other cases refuse a
	// non-zero value.
	B0ArtifactK float64
	// B0SliceShift is, for the slice-positions-differ case, the offset
	// of the b0 slices along the slice normal as a fraction of the slice
	// spacing: 0.25 puts them a quarter slice off the DWI's. Zero means
	// 0.5. Other cases refuse a non-zero value; |shift| must be below 1
	// (a whole slice or more is other coverage, not an offset).
	B0SliceShift float64
	// B0InSeries keeps the offset b0 of the slice-positions-differ case
	// inside the DWI series instead of in a series of its own, so that
	// the assembly of one series must tell an offset volume from missing
	// slices. Other cases refuse it.
	B0InSeries bool
	// Anisotropic gives white matter a diagonal tensor (wmAxialD along x,
	// wmRadialD along y and z, mean ADCWhiteMatter) instead of an
	// isotropic ADC, so that each direction differs and only the trace
	// (geometric mean) gives the ADC.
	Anisotropic bool
	// AppliedBScale is the diffusion weighting the scanner actually
	// applies relative to the b-values it writes in the header, as on a
	// scanner whose gradient amplitude calibration is off: b grows with
	// the square of the gradient amplitude (Stejskal-Tanner; common
	// practice), so an amplitude 1% high applies b x 1.0201. A phantom
	// then measures its ADC times this factor (ln(S0/Sb) = applied b x
	// ADC, read with the header's b). Zero means 1 (exact calibration);
	// it multiplies whatever a case applies (bvalue-header-wrong's 0.7).
	AppliedBScale float64

	Protocol       string         // Protocol Name (0018,1030); derived from the b-values when empty
	Scanner        ScannerProfile // Scanners()[0] when zero
	StudyDate      time.Time      // study date and time; 2025-03-14 09:30 when zero
	PatientID      string         // "QOH-SYN-0001" when empty (invented)
	PatientName    string         // "SYNTHETIC^CASE" when empty (invented)
	TransferSyntax string         // ExplicitVRLittleEndian (default) or ImplicitVRLittleEndian
}

// withDefaults fills the zero fields of o and checks every field,
// reporting every problem at once.
func (o Options) withDefaults() (Options, error) {
	if o.Case == "" {
		o.Case = CaseClean
	}
	if !o.Case.Valid() {
		return o, fmt.Errorf("%w %q (see Cases)", ErrUnknownCase, o.Case)
	}
	switch {
	case o.Layout == "" && o.MultiFrame:
		o.Layout = LayoutEnhanced
	case o.Layout == "":
		o.Layout = LayoutStandard
	case !o.Layout.Valid():
		return o, fmt.Errorf("%w %q (see Layouts)", ErrUnknownLayout, o.Layout)
	case o.Layout == LayoutEnhanced:
		o.MultiFrame = true
	}
	if o.Matrix == 0 {
		o.Matrix = DefaultMatrix
	}
	if o.Slices == 0 {
		o.Slices = DefaultSlices
	}
	if o.SNR == 0 {
		o.SNR = DefaultSNR
		if o.Case == CaseLowSNR {
			o.SNR = LowSNR
		}
	}
	if len(o.BValues) == 0 {
		o.BValues = []float64{0, 1000}
	}
	o.BValues = slices.Clone(o.BValues)
	if o.Directions == 0 {
		o.Directions = DefaultDirs
	}
	if o.Scanner == (ScannerProfile{}) {
		o.Scanner = Scanners()[0]
	}
	if m := o.Layout.manufacturer(); m != "" {
		o.Scanner.Manufacturer = m
	}
	if o.StudyDate.IsZero() {
		o.StudyDate = time.Date(2025, 3, 14, 9, 30, 0, 0, time.UTC)
	}
	if o.PatientID == "" {
		o.PatientID = "QOH-SYN-0001"
	}
	if o.PatientName == "" {
		o.PatientName = "SYNTHETIC^CASE"
	}
	if o.TransferSyntax == "" {
		o.TransferSyntax = ExplicitVRLittleEndian
	}
	if o.AppliedBScale == 0 {
		o.AppliedBScale = 1
	}
	if o.Protocol == "" {
		o.Protocol = defaultProtocol(o.Case, o.BValues)
	}

	var errs []error
	bad := func(format string, a ...any) {
		errs = append(errs, fmt.Errorf("%w: "+format, append([]any{ErrInvalidOptions}, a...)...))
	}
	if o.Matrix < MinMatrix || o.Matrix > MaxMatrix {
		bad("Matrix %d, want %d..%d", o.Matrix, MinMatrix, MaxMatrix)
	}
	if o.Slices < 1 || o.Slices > MaxSlices {
		bad("Slices %d, want 1..%d", o.Slices, MaxSlices)
	}
	if !(o.SNR > 0) { // NaN too
		bad("SNR %v, want > 0 (or +Inf for noiseless images)", o.SNR)
	}
	if len(o.BValues) > MaxBValues {
		bad("%d BValues, limit %d", len(o.BValues), MaxBValues)
	}
	for i, b := range o.BValues {
		if !(b >= 0 && b <= MaxBValue) {
			bad("BValues[%d] = %v, want 0..%d", i, b, MaxBValue)
		} else if i > 0 && !(b > o.BValues[i-1]) {
			bad("BValues must ascend without repeats, got %v", o.BValues)
		}
	}
	if o.Case != CaseSlicePositions && (o.B0SliceShift != 0 || o.B0InSeries) {
		bad("B0SliceShift %v and B0InSeries %v apply only to the case %s", o.B0SliceShift, o.B0InSeries, CaseSlicePositions)
	}
	if !(math.Abs(o.B0SliceShift) < 1) {
		bad("B0SliceShift %v, want a fraction of the slice spacing, |shift| < 1", o.B0SliceShift)
	}
	switch k := o.B0ArtifactK; {
	case k == 0:
	case !o.Case.b0Artifact():
		bad("B0ArtifactK %v applies only to the cases %s and %s", k, CaseB0ArtifactAliasing, CaseB0ArtifactDropout)
	case o.Case == CaseB0ArtifactAliasing && !(k > 1 && k <= maxAliasK):
		bad("B0ArtifactK %v for %s, want 1 < k <= %d (signal added)", k, o.Case, maxAliasK)
	case o.Case == CaseB0ArtifactDropout && !(k > 0 && k < 1):
		bad("B0ArtifactK %v for %s, want 0 < k < 1 (signal lost)", k, o.Case)
	}
	if !(o.AppliedBScale >= minBScale && o.AppliedBScale <= maxBScale) { // NaN too
		bad("AppliedBScale %v, want %g..%g", o.AppliedBScale, minBScale, maxBScale)
	}
	if o.Directions != 1 && o.Directions != 3 && o.Directions != 6 && o.Directions != ManyDirs {
		bad("Directions %d, want 1, 3, 6 or %d", o.Directions, ManyDirs)
	}
	if o.TransferSyntax != ExplicitVRLittleEndian && o.TransferSyntax != ImplicitVRLittleEndian {
		bad("TransferSyntax %q, want %s or %s", o.TransferSyntax, ExplicitVRLittleEndian, ImplicitVRLittleEndian)
	}
	if o.MultiFrame && o.Layout.maker() {
		bad("MultiFrame with layout %s, which writes classic MR images", o.Layout)
	}
	if len(o.Scanner.Station) > maxSH {
		bad("Scanner.Station %q longer than %d characters", o.Scanner.Station, maxSH)
	}
	for name, v := range map[string]string{
		"Protocol": o.Protocol, "PatientID": o.PatientID, "PatientName": o.PatientName,
		"Scanner.Institution": o.Scanner.Institution, "Scanner.DeviceSerial": o.Scanner.DeviceSerial,
		"Scanner.Manufacturer": o.Scanner.Manufacturer, "Scanner.Model": o.Scanner.Model,
		"Scanner.SoftwareVersions": o.Scanner.SoftwareVersions,
	} {
		if len(v) > maxText {
			bad("%s longer than %d characters", name, maxText)
		}
	}
	if o.Scanner.Manufacturer == "" || o.Scanner.Model == "" || o.Scanner.DeviceSerial == "" || o.Scanner.SoftwareVersions == "" {
		bad("Scanner needs Manufacturer, Model, DeviceSerial and SoftwareVersions (Type 1 in Enhanced General Equipment, PS3.3 C.7.5.2)")
	}
	if !(o.Scanner.FieldStrength > 0) {
		bad("Scanner.FieldStrength %v, want > 0 T", o.Scanner.FieldStrength)
	}
	if len(errs) > 0 {
		return o, sortedJoin(errs)
	}

	// What each case needs of the protocol.
	hasB0 := o.BValues[0] == 0
	switch {
	case o.Case == CaseNoB0 && len(o.BValues) < 2:
		bad("case %s drops the lowest b-value and needs at least two", o.Case)
	case (o.Case.b0Artifact() || o.Case == CaseSlicePositions) && !hasB0:
		bad("case %s needs a b = 0 in BValues", o.Case)
	case (o.Case == CaseBValueSetDiffers || o.Case == CaseBValueHeaderWrong || o.Case.scannerADC()) && len(o.BValues) < 2:
		bad("case %s needs at least two b-values", o.Case)
	case o.Case == CaseMissingSlices && o.Slices < 3:
		bad("case %s needs at least 3 slices", o.Case)
	case o.Case == CaseMissingSlices && o.Layout == LayoutSiemensMosaic:
		bad("case %s cannot be written as layout %s: a mosaic holds every slice of its volume", o.Case, o.Layout)
	}
	if len(errs) > 0 {
		return o, sortedJoin(errs)
	}
	return o, nil
}

// sortedJoin joins errs in a stable order (the map iteration above is
// random).
func sortedJoin(errs []error) error {
	slices.SortFunc(errs, func(a, b error) int {
		switch {
		case a.Error() < b.Error():
			return -1
		case a.Error() > b.Error():
			return 1
		}
		return 0
	})
	return errors.Join(errs...)
}

// defaultProtocol names the protocol after its b-values, the way sites
// name theirs ("DWI brain b0 b1000").
func defaultProtocol(c Case, bs []float64) string {
	name := "DWI brain"
	if c.iceWater() {
		name = "QA ice-water DWI"
	}
	for _, b := range bs {
		name += fmt.Sprintf(" b%g", b)
	}
	if len(name) > maxText {
		name = name[:maxText]
	}
	return name
}

// noiseSigma is the standard deviation of the noise on each channel.
func (o Options) noiseSigma() float64 {
	if math.IsInf(o.SNR, 1) {
		return 0
	}
	ref := S0WhiteMatter
	if o.Case.iceWater() {
		ref = S0Water
	}
	return ref / o.SNR
}
