package rules

// The b0-only-hotspot rule: the product's core case
// (docs/references.md#b0-only-artifacts). An artifact on the b0 alone (wrap-around/aliasing, Nyquist
// N/2 ghost, spike, signal dropout) passes straight into the ADC: a b0
// scaled by k shifts the ADC by ln(k)/b, while the DWI stays normal
// there. The rule finds regions where the b0 departs from what its
// surroundings predict and the DWI does not, so that the ADC there is
// abnormal, and tells them apart from a true restriction (the DWI is
// abnormal) and from T2 shine-through (b0 and DWI depart together).
//
// # Method
//
// Work in logarithms: for every voxel let β = ln(b0/b0̂) and
// δ = ln(dwi/dwî) be the departures of the b0 and of the highest-b trace
// from their predictions b0̂ and dwî, and ΔADC = ADC − ADĈ. The
// mono-exponential model (docs/references.md#mono-exponential) gives b·ΔADC ≈ β − δ, so the three
// kinds of abnormality separate by which image carries the change:
//
//	                      β (b0)     δ (DWI)        ΔADC
//	b0-only artifact      ln k       ≈ 0            ln(k)/b
//	true restriction      ≈ 0        > 0 (bright)   < 0
//	T2 shine-through      > 0        ≈ β (bright)   ≈ 0
//	CSF, partial volume   > 0        < 0 (dark)     > 0
//
// A voxel is flagged when
//
//  1. the b0 departs: |k−1| ≥ MinB0Departure, with k = e^β, and
//     |b0 − b0̂| ≥ NoiseSigmas·σ (σ the b0 noise, Measures.Noise);
//  2. the DWI does not: |δ| ≤ MaxDWIShare·|β| + NoiseSigmas·σ_dwi/dwî
//     (σ_dwi the highest-b noise, Measures.HighBNoise, divided by
//     √directions for a trace made of several directions);
//  3. the ADC is abnormal the way the b0 says: ΔADC has the sign of β
//     and |ΔADC| ≥ MinADCShift;
//
// and it is not next to CSF (see Partial volume). Tests 1 and 2 run on
// the 3×3 in-plane means of β and δ, with the noise allowances divided
// by √(voxels averaged): a third of a voxel's noise, so that test 2 can
// be tight without losing artifact voxels to noise. A b0-only change is
// smooth on the DWI (δ ≈ 0 throughout), so the mean costs it nothing but
// one pixel at the corners of a sharp-edged change.
//
// Flagged voxels are grouped into 3D connected regions (4-connected
// in-plane, to the same pixel of the adjacent slices); a region is
// reported when its in-plane area summed over slices reaches MinAreaMM2
// and the medians of β, δ and ΔADC over it pass tests 1-3 again with no
// noise allowance (the median of many voxels has little noise, so the
// region as a whole must carry the signature, not a few of its voxels).
//
// # Prediction
//
// The prediction is a robust median of the surroundings, in-plane and
// through-plane, at two scales so that it is cheap and leaves out the
// voxel's own neighbourhood:
//
//   - each slice is cut into blocks of about hotspotBlockMM; a block
//     with enough reference voxels gets the medians of ln b0, ln dwi and
//     ADC over them;
//   - a block's prediction is the median of the block medians within a
//     WindowMM square in its own slice and the slices above and below,
//     leaving out the block itself and its eight in-plane neighbours.
//
// The window is wide (default 100 mm) because real b0 artifacts are:
// a wrapped nose or a Nyquist ghost covers centimetres, and a prediction
// from a window the artifact fills predicts the artifact itself. A
// median, not a mean, so that the artifact, a minority of the window,
// does not move it. Leaving out the centre keeps a small artifact out of
// its own prediction. The neighbouring slices add robustness where a
// slice holds little tissue; they do not help against an artifact that
// spans many slices alike, which is why the window is wide in-plane.
//
// The reference voxels are parenchyma (Result.Parenchyma: tissue with
// ADC below the analysis' parenchyma limit) inside the eroded mask: CSF
// is bright on b0 and dark on DWI and would pull both predictions apart.
// The predictions do not depend on tissue class beyond that: one median
// over mixed grey and white matter is what "normal here" means at the
// scale of an artifact, and grey matter against it is rejected by tests
// 2 and 3 (see MaxDWIShare, MinADCShift). Receive-coil shading and B1
// inhomogeneity scale b0 and DWI alike (a change of S0), so they move β
// and δ together, which test 2 rejects.
//
// # Why it stays silent
//
//   - True restriction (DWI bright, ADC low, b0 about normal): the DWI
//     departs more than the b0 (test 2: the phantom's lesion has
//     δ = 0.45 against β = 0.15), which is what makes its ADC low; and
//     its b0 is about normal (test 1: 1.16 against the prediction in the
//     phantom, below 1.2).
//   - T2 shine-through (b0 and DWI both bright, ADC normal): the DWI
//     departs nearly as much as the b0 (δ = 0.99 against β = 1.09 in the
//     phantom, test 2), and the ADC shift is small (+0.1e-3, test 3).
//
// # Partial volume
//
// Partial volume at the edges is the main source of false alarms: a
// voxel part CSF and part tissue has a brighter b0, a darker DWI and a
// higher ADC, the signature of a b0-only change blurred by a DWI change.
// Three defences: the mask is eroded by EdgeMM in-plane before anything
// is tested or used as reference (the brain surface, where CSF and the
// cortex mix, and the skull ring); test 2 bounds the DWI change to a
// small share of the b0 change, so that voxels with CSF (dark DWI) fail;
// and voxels within hotspotCSFMarginPixels of DWI-dark tissue (CSF on
// the DWI, hotspotDarkDWI, which no b0 artifact can make) are not
// flagged. The 3×3 mean also carries a neighbouring CSF voxel's dark DWI
// into its neighbours, which makes test 2 stricter there.
//
// # Severity
//
// Warning by default: the ADC in the region cannot be trusted. Error
// when the region's median ADC shift reaches ErrorADCShift (default
// 0.3e-3 mm²/s): larger than the whole width of normal white matter
// (0.62-0.79e-3, Helenius et al., AJNR 2002;23:194; docs/references.md#helenius-2002) and
// enough to take white matter at 0.70e-3 to 0.4e-3, where acute
// restriction is read, or to 1.0e-3, the range of oedema (common
// practice): a map a reader could misinterpret. The example in docs/references.md#b0-only-artifacts
// k = 0.6 gives −0.51e-3.
//
// # Sensitivity
//
// Measured by TestHotspotSweep (64×64, 20 slices, SNR 60, b = 1000, 20
// seeds per strength): the phantom's tapered artifacts are found in 95%
// of seeds from a b0 raised by 35% (aliasing) or lowered by 25%
// (dropout) at their centre, ADC shifts of +0.30e-3 and −0.29e-3 there;
// no finding on 50 clean series. At b = 1000 test 3 binds (MinADCShift
// is k = 1.28 or 0.78 at the peak, and the region's median lies below
// the peak). DEVELOPERS.md has the table.
//
// # Cost
//
// A few volume-sized buffers per series (about 13 bytes a voxel), none
// per voxel; the block and window medians reuse one scratch slice.
// BenchmarkHotspot: about 0.2 s for 256×256×60 on 2 cores.

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/analysis"
)

// HotspotID is the rule's identifier.
const HotspotID = "b0-only-hotspot"

// HotspotThresholds tune the b0-only-hotspot rule (see hotspot.go's
// method). DefaultHotspotThresholds gives the shipped values, each with
// its reason.
type HotspotThresholds struct {
	// MinB0Departure is the smallest relative change of the b0 against
	// its prediction, |k−1|. Default 0.2: beyond what noise and the
	// smooth shading left after the prediction give at clinical SNR
	// (the b0 SNR of 1.5 T brain DWI is of the order of 60, common
	// practice; 3σ at SNR 20 is 15%), and beyond the phantom's
	// restriction lesion, whose b0 is 1.16 times the prediction. At
	// b = 1000 a 20% change shifts the ADC by ln(1.2)/b = +0.18e-3 or
	// ln(0.8)/b = −0.22e-3 (docs/references.md#b0-only-artifacts), so there MinADCShift decides;
	// at lower b-values this test does.
	MinB0Departure float64 `yaml:"min_b0_departure"`
	// NoiseSigmas is how many noise standard deviations a voxel's b0
	// change must exceed, and how many the DWI may move by noise alone.
	// Default 3 (common practice for a per-voxel test; regions then need
	// MinAreaMM2 of such voxels and pass on their medians).
	NoiseSigmas float64 `yaml:"noise_sigmas"`
	// MaxDWIShare is the largest DWI departure, as a share of the b0
	// departure (|δ| ≤ MaxDWIShare·|β|, in logarithms), for the change
	// to count as b0-borne. Default 0.15: a b0-only artifact has 0 (the
	// phantom's regions measure 0.01-0.04, the prediction's error);
	// grey matter against a white-matter prediction has about 0.35 at
	// b = 1000 (the phantom's S0 800 against 600 and ADC 0.89e-3
	// against 0.70e-3, Helenius 2002: β = 0.29, δ = 0.10), T2
	// shine-through about 0.9, CSF partial volume and true restriction
	// more than 1 (inference from the model).
	MaxDWIShare float64 `yaml:"max_dwi_share"`
	// MinADCShift is the smallest ADC change against the prediction,
	// mm²/s. Default 0.25e-3: above the grey-white difference (0.89e-3
	// against 0.70e-3, Helenius 2002; docs/references.md#helenius-2002). Test 2 keeps cortex
	// out at b = 1000, but near b = 1500 (and so in multi-b protocols
	// reaching it) the longer T2 and higher ADC of grey matter cancel on
	// the DWI (ln(800/600) = 0.19e-3·1500), and cortex then looks
	// exactly like a b0-only change of +33%: only its ADC shift, 0.19e-3,
	// tells it apart. 0.25e-3 is also about 30% of parenchyma, far beyond
	// the 8% worth reporting (QIBA profile review, Radiology 2024;
	// docs/references.md#qiba-review-2024).
	MinADCShift float64 `yaml:"min_adc_shift"`
	// ErrorADCShift is the median ADC shift of a region from which the
	// finding is an error instead of a warning, mm²/s. Default 0.3e-3
	// (see the Severity section of hotspot.go).
	ErrorADCShift float64 `yaml:"error_adc_shift"`
	// MinAreaMM2 is the smallest region, its in-plane area summed over
	// its slices, mm². Default 100 (1 cm²): an artifact smaller than
	// that is unlikely to mislead, and noise clusters of a few voxels
	// stay below it even at a 3.75 mm pixel (7 voxels).
	MinAreaMM2 float64 `yaml:"min_area_mm2"`
	// EdgeMM is how far inside the tissue mask, in-plane, a voxel must
	// lie to be tested or used as reference, mm. Default 6: the
	// subarachnoid CSF and the outer cortex, where CSF and tissue mix,
	// are about that thick in an adult brain (common practice).
	EdgeMM float64 `yaml:"edge_mm"`
	// MeasurableSigmas is how far above the noise floor, in noise σ of
	// the DWI (analysis.Measures.FloorNoise), a voxel's DWI and the DWI
	// its surroundings predict must lie for the voxel to be tested:
	// below that the DWI cannot show a change (the Rician floor,
	// Gudbjartsson & Patz, MRM 1995;34:910), and "the DWI did not
	// change" means nothing. Default 3 (docs/references.md#rician-floor: high-b SNR below
	// about 3 is at the floor).
	MeasurableSigmas float64 `yaml:"measurable_sigmas"`
	// WindowMM is the side of the square window the prediction is the
	// median of, mm. Default 100: three times the half-width of a
	// wrapped nose or a ghost band of a few centimetres (common
	// practice), so such an artifact fills well under half the window.
	WindowMM float64 `yaml:"window_mm"`
}

// DefaultHotspotThresholds returns the shipped thresholds (see the
// fields for each reason).
func DefaultHotspotThresholds() HotspotThresholds {
	return HotspotThresholds{
		MinB0Departure:   0.2,
		NoiseSigmas:      3,
		MaxDWIShare:      0.15,
		MinADCShift:      0.25e-3,
		ErrorADCShift:    0.3e-3,
		MinAreaMM2:       100,
		EdgeMM:           6,
		WindowMM:         100,
		MeasurableSigmas: 3,
	}
}

// Limits on HotspotThresholds, each with its reason.
const (
	// hotspotMaxWindowMM bounds WindowMM: a window wider than any head
	// (about 180 mm, the adult head in docs/references.md#head-size; common practice) is the
	// whole slice, and 400 mm covers any field of view.
	hotspotMaxWindowMM = 400
	// hotspotMaxEdgeMM bounds EdgeMM: 30 mm would erode a child's brain
	// slice to nothing.
	hotspotMaxEdgeMM = 30
)

// Validate reports every problem with t at once. The messages name the
// YAML keys.
func (t HotspotThresholds) Validate() error {
	var errs []error
	bad := func(key string, v float64, want string) {
		errs = append(errs, fmt.Errorf("rules: thresholds.b0_only_hotspot.%s = %v, want %s", key, v, want))
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	if !(t.MinB0Departure > 0 && t.MinB0Departure < 1) {
		bad("min_b0_departure", t.MinB0Departure, "a fraction between 0 and 1")
	}
	if !(t.NoiseSigmas >= 0) || !finite(t.NoiseSigmas) {
		bad("noise_sigmas", t.NoiseSigmas, "a number of standard deviations >= 0")
	}
	if !(t.MaxDWIShare >= 0 && t.MaxDWIShare < 1) {
		bad("max_dwi_share", t.MaxDWIShare, "a share 0 <= s < 1")
	}
	if !(t.MinADCShift > 0) || !finite(t.MinADCShift) {
		bad("min_adc_shift", t.MinADCShift, "a positive ADC in mm2/s")
	}
	if !(t.ErrorADCShift >= t.MinADCShift) || !finite(t.ErrorADCShift) {
		bad("error_adc_shift", t.ErrorADCShift, "an ADC in mm2/s at least min_adc_shift")
	}
	if !(t.MinAreaMM2 >= 0) || !finite(t.MinAreaMM2) {
		bad("min_area_mm2", t.MinAreaMM2, "an area >= 0 in mm2")
	}
	if !(t.EdgeMM >= 0 && t.EdgeMM <= hotspotMaxEdgeMM) {
		bad("edge_mm", t.EdgeMM, fmt.Sprintf("0..%d mm", hotspotMaxEdgeMM))
	}
	if !(t.MeasurableSigmas >= 0) || !finite(t.MeasurableSigmas) {
		bad("measurable_sigmas", t.MeasurableSigmas, "a number of noise standard deviations >= 0")
	}
	if !(t.WindowMM > 0 && t.WindowMM <= hotspotMaxWindowMM) {
		bad("window_mm", t.WindowMM, fmt.Sprintf("a width in mm, above 0 and at most %d", hotspotMaxWindowMM))
	}
	return errors.Join(errs...)
}

// Fixed parts of the method, each with its reason.
const (
	// hotspotBlockMM is the side of the blocks the prediction is built
	// from, mm: small against the default window (about 8×8 blocks in
	// it, over 150 with the adjacent slices, for a robust median) and
	// against the scale of coil shading, and large enough that a block
	// median rests on 3×3 voxels at a 3.75 mm pixel. Smaller blocks cost
	// time as the square of the window's blocks (BenchmarkHotspot).
	hotspotBlockMM = 12
	// hotspotBlockFill is the share of a block's voxels that must be
	// reference voxels for the block to have medians: half, so that a
	// block at the edge of the parenchyma is not described by a few
	// voxels of partial volume.
	hotspotBlockFill = 0.5
	// hotspotMinWindowBlocks is the fewest block medians a prediction
	// rests on: nine, a 3×3 of blocks, below which a median is no
	// longer robust to one bad block.
	hotspotMinWindowBlocks = 9
	// hotspotDarkDWI: a voxel whose DWI is below this fraction of its
	// prediction is taken as CSF (free water is dark at b ≈ 1000; the
	// phantom's CSF is a third of white matter, common practice). No
	// b0-only artifact can make the DWI dark, so this cannot hide one;
	// it marks where partial volume with CSF lies.
	hotspotDarkDWI = 0.7
	// hotspotCSFMarginPixels: voxels within this many pixels (in-plane,
	// a square) of a DWI-dark voxel are not flagged: the partial-volume
	// rim around ventricles and sulci.
	hotspotCSFMarginPixels = 1
	// hotspotBrainDWIFraction: tissue whose DWI is below this share of
	// the parenchyma's median DWI is not brain for the edge. 0.3 (tuned
	// on the real QA heads of docs/calibration.md): parenchyma varies
	// by less than a factor 2 on the DWI (grey against white matter,
	// coil shading), CSF at b = 1000 is about a third of white matter
	// (hotspotDarkDWI) and less at higher b, and the suppressed scalp
	// and air are near the noise.
	hotspotBrainDWIFraction = 0.3
	// hotspotCoreMM: a region is an error only when it is at least
	// this thick in-plane somewhere (a square of this side, rounded to
	// whole pixels, at least 3×3, fits inside it on one slice). 9 mm:
	// twice the cortex's thickness (2.5-4.5 mm, common practice), so
	// that a ribbon of cortex with the partial volume of its sulci,
	// which at b ≈ 1500 has the b0-only signature exactly (see
	// MinADCShift), is a warning at most; the b0 artifacts this rule is
	// for cover centimetres (see WindowMM), though a weak one may only
	// pass the tests in a thin band and is then a warning too.
	hotspotCoreMM = 9
	// hotspotMaxFindings caps the findings of one series: beyond five
	// regions the series' b0 is broken throughout, and the last finding
	// says how many more there were.
	hotspotMaxFindings = 5
)

// NewB0OnlyHotspot returns the b0-only-hotspot rule.
func NewB0OnlyHotspot() Rule { return b0OnlyHotspot{} }

type b0OnlyHotspot struct{}

func (b0OnlyHotspot) ID() string { return HotspotID }

// Check runs the method on every computed series of the study. Series
// that could not be computed are left to the rules that report why.
func (b0OnlyHotspot) Check(s *Study, cfg *Config) []Finding {
	if s == nil {
		return nil
	}
	th := hotspotThresholdsOf(cfg)
	var out []Finding
	for _, sa := range s.Series {
		if !sa.Computed() {
			continue
		}
		regions := detectHotspots(sa.Result, th)
		out = append(out, hotspotFindings(s, sa, regions, th)...)
	}
	return out
}

// hotspotThresholdsOf is the configuration's thresholds, or the
// defaults when cfg is nil, leaves them unset (a Config built in code)
// or holds invalid ones (Config.Validate is where those are refused;
// a rule must not fail on them).
func hotspotThresholdsOf(cfg *Config) HotspotThresholds {
	if cfg == nil || cfg.Thresholds.Hotspot == (HotspotThresholds{}) || cfg.Thresholds.Hotspot.Validate() != nil {
		return DefaultHotspotThresholds()
	}
	return cfg.Thresholds.Hotspot
}

// hotspotRegion is one reported region, in the series' grid.
type hotspotRegion struct {
	voxels                 int
	slices                 []int
	row0, col0, row1, col1 int // inclusive
	areaMM2                float64
	b0Ratio, dwiRatio      float64 // medians of b0/b0̂ and dwi/dwî
	adcInside, adcAround   float64 // medians of ADC and of ADĈ, mm²/s
	adcShift               float64 // median of ADC − ADĈ
	// Evidence: the median DWI of the region in noise σ (floorSigma, by
	// floorMethod), and the candidate voxels of the series left out as
	// at the noise floor or as CSF.
	dwiSigmas             float64
	floorSigma            float64
	floorMethod           string
	atFloor, csfDominated int
	members               []int32 // the region's voxels, until the evidence is taken
	thin                  bool    // no core hotspotCoreMM wide: a warning at most
}

// hotspotGeometry is the voxel grid of a result.
type hotspotGeometry struct {
	rows, cols, slices int
	rowMM, colMM       float64 // spacing of adjacent rows, of adjacent columns
}

func (g hotspotGeometry) plane() int { return g.rows * g.cols }

// detectHotspots runs the method (hotspot.go) on one computed series.
func detectHotspots(res *analysis.Result, th HotspotThresholds) []hotspotRegion {
	if res.B0 == nil || len(res.HighB) == 0 || res.ADC == nil || res.Mask == nil || res.Parenchyma == nil {
		return nil
	}
	high := res.HighB[len(res.HighB)-1]
	b0, dwi, adcMap := res.B0, high.Trace, res.ADC
	g := hotspotGeometry{rows: b0.Rows, cols: b0.Cols, slices: b0.Slices, rowMM: 1, colMM: 1}
	if ps := res.Series.Reference.PixelSpacing; ps[0] > 0 && ps[1] > 0 {
		g.rowMM, g.colMM = ps[0], ps[1]
	}
	n := len(b0.Data)
	if n == 0 || len(dwi.Data) != n || len(adcMap.Data) != n || len(res.Mask) != n {
		return nil
	}
	sigma0 := res.Measures.Noise.Sigma
	if !res.Measures.Noise.Valid() {
		sigma0 = 0 // a zeroed background: no noise allowance (relative tests only)
	}
	sigmaDWI := res.Measures.HighBNoise.Sigma
	if !res.Measures.HighBNoise.Valid() {
		sigmaDWI = 0
	}
	// The noise floor of the DWI: a voxel whose DWI (or whose predicted
	// DWI) is within MeasurableSigmas of it cannot show whether the DWI
	// changed, so it is not tested (see Noise floor).
	floorSigma := res.Measures.FloorNoise.Sigma
	if !res.Measures.FloorNoise.Valid() {
		floorSigma = sigmaDWI
	}
	if sigmaDWI == 0 && floorSigma > 0 {
		sigmaDWI = floorSigma // the DWI's noise from its tissue, when the background is zeroed
	}
	floorLevel := float32(th.MeasurableSigmas * floorSigma)
	parenMax := float32(analysis.DefaultAnalyzeConfig().ParenchymaADCMax)
	if high.Directions > 1 {
		// The trace is the geometric mean of the directions: its
		// relative noise is that of one image over √directions.
		sigmaDWI /= math.Sqrt(float64(high.Directions))
	}

	// Candidates: inside the eroded mask, with positive b0 and DWI and
	// a defined ADC. Reference: the candidates in parenchyma.
	edge := int(math.Round(th.EdgeMM / math.Min(g.rowMM, g.colMM)))
	counts := make([]int32, g.plane())
	cand := make([]bool, n)
	hotspotRank(cand, res.Mask, g, edge, (2*edge+1)*(2*edge+1), counts)
	// The brain's edge on the DWI (see Partial volume): the mask is
	// drawn on the b0 and in a real head reaches the scalp, so its edge
	// is not the brain's. Tissue bright on the DWI is the brain (CSF,
	// suppressed scalp fat and air are dark there); eroded by EdgeMM in
	// the same way, it keeps the cortex, the sulci and the CSF around
	// the brain out of the test.
	if level := hotspotBrainLevel(dwi.Data, res.Parenchyma, cand); level > 0 {
		brain := make([]bool, n)
		for i, in := range res.Mask {
			brain[i] = in && dwi.Data[i] >= level
		}
		eroded := make([]bool, n)
		hotspotRank(eroded, brain, g, edge, (2*edge+1)*(2*edge+1), counts)
		for i := range cand {
			cand[i] = cand[i] && eroded[i]
		}
	}
	lb0 := make([]float32, n)
	ldwi := make([]float32, n)
	var atFloor, csfDominated int
	for i := range cand {
		s0, s1, a := b0.Data[i], dwi.Data[i], adcMap.Data[i]
		if cand[i] && s1 < floorLevel {
			atFloor++
		}
		if cand[i] && a >= parenMax && s1 >= floorLevel {
			csfDominated++
		}
		if !cand[i] || !(s0 > 0) || !(s1 > 0) || a != a || math.IsInf(float64(s0)+float64(s1), 0) {
			cand[i] = false
			lb0[i], ldwi[i] = float32(math.NaN()), float32(math.NaN())
			continue
		}
		lb0[i] = float32(math.Log(float64(s0)))
		ldwi[i] = float32(math.Log(float64(s1)))
	}

	p := newHotspotPredictor(g, th.WindowMM)
	p.blockMedians(g, cand, res.Parenchyma, lb0, ldwi, adcMap.Data)
	p.predict(g, cand)
	// The noise allowances of tests 1 and 2 per block, relative to the
	// predicted b0 and DWI.
	noise0 := make([]float32, len(p.pB0))
	noise1 := make([]float32, len(p.pB0))
	for k := range noise0 {
		noise0[k] = float32(th.NoiseSigmas * sigma0 / math.Exp(float64(p.pB0[k])))
		noise1[k] = float32(th.NoiseSigmas * sigmaDWI / math.Exp(float64(p.pDWI[k])))
	}

	// Departures, in place: lb0 becomes β and ldwi δ. DWI-dark voxels
	// (CSF) are marked on the way, and the rim around them.
	mark := make([]bool, n)
	nan := float32(math.NaN())
	logDark := float32(math.Log(hotspotDarkDWI))
	plane, perSlice := g.plane(), p.nbr*p.nbc
	for z := 0; z < g.slices; z++ {
		for j, cell := range p.cell {
			i, k := z*plane+j, z*perSlice+int(cell)
			p0, p1, pa := p.pB0[k], p.pDWI[k], p.pADC[k]
			if !cand[i] || p0 != p0 || p1 != p1 || pa != pa {
				cand[i] = false
				lb0[i], ldwi[i] = nan, nan
				continue
			}
			lb0[i] -= p0
			ldwi[i] -= p1
			// CSF: dark on the DWI, or with the ADC of CSF (partial
			// volume that leaves the DWI unchanged at high b, where a
			// grey-matter and CSF mix looks like a b0-only change).
			mark[i] = ldwi[i] < logDark || adcMap.Data[i] >= parenMax
		}
	}
	rim := make([]bool, n)
	hotspotRank(rim, mark, g, hotspotCSFMarginPixels, 1, counts)
	// The rim reaches the adjacent slices too: partial volume is
	// through-plane as much as in-plane, and slices are thicker than
	// pixels are wide.
	for i := range rim {
		if mark[i] {
			if i >= plane {
				rim[i-plane] = true
			}
			if i+plane < n {
				rim[i+plane] = true
			}
		}
	}
	beta, delta := lb0, ldwi
	dADC := func(i int) float32 {
		return adcMap.Data[i] - p.pADC[(i/plane)*perSlice+int(p.cell[i%plane])]
	}

	// The tests run on the 3×3 in-plane means of β and δ (in place): a
	// third of a voxel's noise, so that the DWI test can be tight
	// (anatomy such as grey matter, whose DWI departs by a third of its
	// b0, fails it) without losing artifact voxels to noise. A b0-only
	// change is smooth on the DWI (δ ≈ 0 everywhere), so the mean costs
	// it nothing; near CSF the mean carries the CSF's dark DWI into its
	// neighbours, which makes the test stricter there. The ADC is not
	// averaged: its per-voxel noise is small against MinADCShift.
	nMean := make([]uint8, n)
	rowSum := make([]float32, plane)
	hotspotBoxMean(beta, nMean, g, rowSum, counts)
	hotspotBoxMean(delta, nMean, g, rowSum, counts)
	var root [10]float32 // √(voxels in the mean), 0..9
	for k := range root {
		root[k] = float32(math.Sqrt(float64(k)))
	}

	flag := mark // the CSF marks are in rim now
	clear(flag)
	minLogUp := math.Log(1 + th.MinB0Departure)
	minLogDown := -math.Log(1 - th.MinB0Departure)
	for z := 0; z < g.slices; z++ {
		for j, cell := range p.cell {
			i, k := z*plane+j, z*perSlice+int(cell)
			if !cand[i] || rim[i] {
				continue
			}
			// Noise floor and CSF (see those sections): the DWI, and
			// the DWI the surroundings predict, must be measurable,
			// and the voxel's ADC that of parenchyma, not of CSF.
			if dwi.Data[i] < floorLevel || float32(math.Exp(float64(p.pDWI[k]))) < floorLevel || adcMap.Data[i] >= parenMax {
				continue
			}
			r := root[nMean[i]]
			flag[i] = hotspotVoxelTest(float64(beta[i]), float64(delta[i]), float64(dADC(i)), th, minLogUp, minLogDown,
				float64(noise0[k]/r), float64(noise1[k]/r))
		}
	}
	around := func(i int) float32 { return p.pADC[(i/plane)*perSlice+int(p.cell[i%plane])] }
	regions := hotspotRegions(flag, g, beta, delta, dADC, around, adcMap.Data, th, minLogUp, minLogDown)
	for k := range regions {
		r := &regions[k]
		r.floorSigma, r.floorMethod = floorSigma, string(res.Measures.FloorNoise.Method)
		if floorSigma > 0 {
			r.dwiSigmas = float64(hotspotMedianAt(r.members, dwi.Data)) / floorSigma
		}
		r.atFloor, r.csfDominated = atFloor, csfDominated
		r.members = nil
	}
	return regions
}

// hotspotBrainLevel is the DWI level above which tissue counts as brain
// for the edge: hotspotBrainDWIFraction of the median DWI of the
// parenchyma candidates; 0 when there are none.
func hotspotBrainLevel(dwi []float32, paren, cand []bool) float32 {
	var s []float32
	for i, in := range paren {
		if in && cand[i] && dwi[i] == dwi[i] {
			s = append(s, dwi[i])
		}
	}
	if len(s) == 0 {
		return 0
	}
	return hotspotBrainDWIFraction * adc.PercentileInPlace(s, 50)
}

// hotspotMedianAt is the median of v over the voxels idx.
func hotspotMedianAt(idx []int32, v []float32) float32 {
	s := make([]float32, 0, len(idx))
	for _, i := range idx {
		s = append(s, v[i])
	}
	return adc.PercentileInPlace(s, 50)
}

// hotspotVoxelTest is tests 1-3 of the method on one voxel (or, with
// zero noise allowances, on a region's medians). be, de are the log
// departures of b0 and DWI, da the ADC departure; noise0 is the b0
// noise allowance relative to the predicted b0 and noise1 the DWI's
// relative to the predicted DWI.
func hotspotVoxelTest(be, de, da float64, th HotspotThresholds, minLogUp, minLogDown, noise0, noise1 float64) bool {
	// 1. the b0 departs, beyond the relative threshold and the noise.
	switch {
	case be > 0 && be < minLogUp, be < 0 && -be < minLogDown, be == 0:
		return false
	}
	if math.Abs(math.Expm1(be)) < noise0 {
		return false
	}
	// 2. the DWI does not depart (or much less).
	if math.Abs(de) > th.MaxDWIShare*math.Abs(be)+noise1 {
		return false
	}
	// 3. the ADC is abnormal, in the sense of the b0 change.
	if (da > 0) != (be > 0) || math.Abs(da) < th.MinADCShift {
		return false
	}
	return true
}

// hotspotPredictor holds the block medians and the block predictions.
type hotspotPredictor struct {
	br, bc          int       // block size in rows and columns
	nbr, nbc, nbz   int       // blocks per column, per row, slices
	wr, wc          int       // window half-size in blocks
	cell            []int32   // per pixel of a slice: its block's index within the slice
	mB0, mDWI, mADC []float32 // block medians
	pB0, pDWI, pADC []float32 // block predictions
	scratch         []float32
}

func newHotspotPredictor(g hotspotGeometry, windowMM float64) *hotspotPredictor {
	p := &hotspotPredictor{
		br: max(1, int(math.Round(hotspotBlockMM/g.rowMM))),
		bc: max(1, int(math.Round(hotspotBlockMM/g.colMM))),
	}
	p.nbr = (g.rows + p.br - 1) / p.br
	p.nbc = (g.cols + p.bc - 1) / p.bc
	p.nbz = g.slices
	p.wr = max(2, int(math.Round(windowMM/2/(float64(p.br)*g.rowMM))))
	p.wc = max(2, int(math.Round(windowMM/2/(float64(p.bc)*g.colMM))))
	nb := p.nbr * p.nbc * p.nbz
	buf := make([]float32, 6*nb)
	p.mB0, p.mDWI, p.mADC = buf[:nb], buf[nb:2*nb], buf[2*nb:3*nb]
	p.pB0, p.pDWI, p.pADC = buf[3*nb:4*nb], buf[4*nb:5*nb], buf[5*nb:]
	p.cell = make([]int32, g.plane())
	for r := range g.rows {
		for c := range g.cols {
			p.cell[r*g.cols+c] = int32((r/p.br)*p.nbc + c/p.bc)
		}
	}
	p.scratch = make([]float32, 0, max(p.br*p.bc, 3*(2*p.wr+1)*(2*p.wc+1)))
	return p
}

// blockMedians fills the block medians of the reference voxels (cand
// and parenchyma); a block with fewer than hotspotBlockFill of its
// voxels in the reference has none (NaN).
func (p *hotspotPredictor) blockMedians(g hotspotGeometry, cand, paren []bool, lb0, ldwi, adcData []float32) {
	nan := float32(math.NaN())
	need := max(1, int(math.Ceil(hotspotBlockFill*float64(p.br*p.bc))))
	plane := g.plane()
	for z := 0; z < p.nbz; z++ {
		for by := 0; by < p.nbr; by++ {
			r0, r1 := by*p.br, min((by+1)*p.br, g.rows)
			for bx := 0; bx < p.nbc; bx++ {
				c0, c1 := bx*p.bc, min((bx+1)*p.bc, g.cols)
				k := (z*p.nbr+by)*p.nbc + bx
				p.mB0[k], p.mDWI[k], p.mADC[k] = nan, nan, nan
				for q, src := range [3][]float32{lb0, ldwi, adcData} {
					s := p.scratch[:0]
					for r := r0; r < r1; r++ {
						base := z*plane + r*g.cols
						for c := c0; c < c1; c++ {
							if i := base + c; cand[i] && paren[i] {
								s = append(s, src[i])
							}
						}
					}
					if len(s) < need {
						break
					}
					v := adc.PercentileInPlace(s, 50)
					switch q {
					case 0:
						p.mB0[k] = v
					case 1:
						p.mDWI[k] = v
					default:
						p.mADC[k] = v
					}
				}
			}
		}
	}
}

// predict fills the block predictions of every block holding a
// candidate: the medians of the block medians in the window (its own
// slice and the adjacent ones), leaving out the block and its eight
// in-plane neighbours. A block whose window holds fewer than
// hotspotMinWindowBlocks medians has no prediction (NaN).
func (p *hotspotPredictor) predict(g hotspotGeometry, cand []bool) {
	nan := float32(math.NaN())
	nb := len(p.pB0)
	wanted := make([]bool, nb)
	plane, perSlice := g.plane(), p.nbr*p.nbc
	for z := 0; z < g.slices; z++ {
		for j, cell := range p.cell {
			if cand[z*plane+j] {
				wanted[z*perSlice+int(cell)] = true
			}
		}
	}
	for k := range nb {
		p.pB0[k], p.pDWI[k], p.pADC[k] = nan, nan, nan
		if !wanted[k] {
			continue
		}
		z := k / (p.nbr * p.nbc)
		by, bx := (k/p.nbc)%p.nbr, k%p.nbc
		for q, src := range [3][]float32{p.mB0, p.mDWI, p.mADC} {
			s := p.scratch[:0]
			for zz := max(0, z-1); zz <= min(p.nbz-1, z+1); zz++ {
				for yy := max(0, by-p.wr); yy <= min(p.nbr-1, by+p.wr); yy++ {
					row := (zz*p.nbr + yy) * p.nbc
					for xx := max(0, bx-p.wc); xx <= min(p.nbc-1, bx+p.wc); xx++ {
						if zz == z && hotspotAbs(yy-by) <= 1 && hotspotAbs(xx-bx) <= 1 {
							continue // the centre and its neighbours
						}
						if v := src[row+xx]; v == v {
							s = append(s, v)
						}
					}
				}
			}
			if len(s) < hotspotMinWindowBlocks {
				break
			}
			v := adc.PercentileInPlace(s, 50)
			switch q {
			case 0:
				p.pB0[k] = v
			case 1:
				p.pDWI[k] = v
			default:
				p.pADC[k] = v
			}
		}
	}
}

func hotspotAbs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// hotspotRank sets dst where at least need voxels of the in-plane
// (2r+1)² square around the voxel are set in src (outside the image
// counts as clear): need = (2r+1)² erodes, need = 1 dilates. A running
// count along each row into counts (one plane), then a running sum down
// each column. dst must not be src.
func hotspotRank(dst, src []bool, g hotspotGeometry, r, need int, counts []int32) {
	if r <= 0 {
		copy(dst, src)
		return
	}
	rows, cols, plane := g.rows, g.cols, g.plane()
	for z := 0; z < g.slices; z++ {
		s := src[z*plane : (z+1)*plane]
		d := dst[z*plane : (z+1)*plane]
		for y := 0; y < rows; y++ {
			line := s[y*cols : (y+1)*cols]
			out := counts[y*cols : (y+1)*cols]
			n := int32(0)
			for x := 0; x < r && x < cols; x++ {
				if line[x] {
					n++
				}
			}
			for x := 0; x < cols; x++ {
				if in := x + r; in < cols && line[in] {
					n++
				}
				if o := x - r - 1; o >= 0 && line[o] {
					n--
				}
				out[x] = n
			}
		}
		for x := 0; x < cols; x++ {
			sum := int32(0)
			for y := 0; y < r && y < rows; y++ {
				sum += counts[y*cols+x]
			}
			for y := 0; y < rows; y++ {
				if in := y + r; in < rows {
					sum += counts[in*cols+x]
				}
				if o := y - r - 1; o >= 0 {
					sum -= counts[o*cols+x]
				}
				d[y*cols+x] = int(sum) >= need
			}
		}
	}
}

// hotspotBoxMean replaces every non-NaN value of v by the mean of the
// non-NaN values in the 3×3 in-plane square around it, and sets n to
// how many there were (0 where v is NaN). Separable and in place, slice
// by slice: running sums along each row into the plane-sized rowSum and
// rowN, then down each column (which reads only those).
func hotspotBoxMean(v []float32, n []uint8, g hotspotGeometry, rowSum []float32, rowN []int32) {
	rows, cols, plane := g.rows, g.cols, g.plane()
	for z := 0; z < g.slices; z++ {
		s := v[z*plane : (z+1)*plane]
		for y := 0; y < rows; y++ {
			line := s[y*cols : (y+1)*cols]
			sums, ns := rowSum[y*cols:(y+1)*cols], rowN[y*cols:(y+1)*cols]
			for x := range line {
				var sum float32
				var k int32
				for xx := max(0, x-1); xx <= min(cols-1, x+1); xx++ {
					if q := line[xx]; q == q {
						sum += q
						k++
					}
				}
				sums[x], ns[x] = sum, k
			}
		}
		dn := n[z*plane : (z+1)*plane]
		for y := 0; y < rows; y++ {
			up, down := max(0, y-1)*cols, min(rows-1, y+1)*cols
			mid := y * cols
			for x := 0; x < cols; x++ {
				i := mid + x
				if s[i] != s[i] {
					dn[i] = 0
					continue
				}
				sum, k := rowSum[mid+x], rowN[mid+x]
				if y > 0 {
					sum, k = sum+rowSum[up+x], k+rowN[up+x]
				}
				if y < rows-1 {
					sum, k = sum+rowSum[down+x], k+rowN[down+x]
				}
				s[i], dn[i] = sum/float32(k), uint8(k)
			}
		}
	}
}

// hotspotRegions groups the flagged voxels into 3D connected regions
// (4-connected in-plane, to the same pixel of the adjacent slices) and
// keeps those that pass the region tests, largest first.
func hotspotRegions(flag []bool, g hotspotGeometry, beta, delta []float32, dADC, around func(int) float32, adcData []float32, th HotspotThresholds, minLogUp, minLogDown float64) []hotspotRegion {
	plane := g.plane()
	pixelMM2 := g.rowMM * g.colMM
	var stack, members []int32
	var out []hotspotRegion
	var scratch []float32
	inReg := make([]bool, len(flag))
	coreR := max(1, int(math.Round(hotspotCoreMM/2/math.Max(g.rowMM, g.colMM))))
	for seed, f := range flag {
		if !f {
			continue
		}
		// Flood fill; a voxel is cleared from flag when reached.
		flag[seed] = false
		stack = append(stack[:0], int32(seed))
		members = members[:0]
		for len(stack) > 0 {
			i := int(stack[len(stack)-1])
			stack = stack[:len(stack)-1]
			members = append(members, int32(i))
			z, rem := i/plane, i%plane
			y, x := rem/g.cols, rem%g.cols
			visit := func(j int) {
				if flag[j] {
					flag[j] = false
					stack = append(stack, int32(j))
				}
			}
			if x > 0 {
				visit(i - 1)
			}
			if x < g.cols-1 {
				visit(i + 1)
			}
			if y > 0 {
				visit(i - g.cols)
			}
			if y < g.rows-1 {
				visit(i + g.cols)
			}
			if z > 0 {
				visit(i - plane)
			}
			if z < g.slices-1 {
				visit(i + plane)
			}
		}
		area := float64(len(members)) * pixelMM2
		if area < th.MinAreaMM2 {
			continue
		}
		// Thickness (see Partial volume): a region without a core at
		// least hotspotCoreMM wide in-plane anywhere is as thin as the
		// cortical ribbon with the partial volume of its sulci, and is
		// never more than a warning.
		thin := !hotspotHasCore(members, inReg, g, coreR)
		median := func(at func(int) float32) float64 {
			scratch = scratch[:0]
			for _, i := range members {
				scratch = append(scratch, at(int(i)))
			}
			return float64(adc.PercentileInPlace(scratch, 50))
		}
		of := func(v []float32) func(int) float32 { return func(i int) float32 { return v[i] } }
		be, de, da := median(of(beta)), median(of(delta)), median(dADC)
		if !hotspotVoxelTest(be, de, da, th, minLogUp, minLogDown, 0, 0) {
			continue
		}
		reg := hotspotRegion{
			voxels: len(members), areaMM2: area,
			row0: g.rows, col0: g.cols, row1: -1, col1: -1,
			b0Ratio: math.Exp(be), dwiRatio: math.Exp(de), adcShift: da,
			adcInside: median(of(adcData)), adcAround: median(around),
			members: slices.Clone(members), thin: thin,
		}
		for _, i := range members {
			z, rem := int(i)/plane, int(i)%plane
			y, x := rem/g.cols, rem%g.cols
			reg.row0, reg.row1 = min(reg.row0, y), max(reg.row1, y)
			reg.col0, reg.col1 = min(reg.col0, x), max(reg.col1, x)
			if !slices.Contains(reg.slices, z) {
				reg.slices = append(reg.slices, z)
			}
		}
		slices.Sort(reg.slices)
		out = append(out, reg)
	}
	slices.SortStableFunc(out, func(a, b hotspotRegion) int { return b.voxels - a.voxels })
	return out
}

// hotspotHasCore reports whether some voxel of members has its whole
// in-plane (2r+1)² square in members. inReg is scratch of the volume's
// size, all false, and is left so.
func hotspotHasCore(members []int32, inReg []bool, g hotspotGeometry, r int) bool {
	for _, i := range members {
		inReg[i] = true
	}
	defer func() {
		for _, i := range members {
			inReg[i] = false
		}
	}()
	plane := g.plane()
	for _, m := range members {
		i := int(m)
		z, rem := i/plane, i%plane
		y, x := rem/g.cols, rem%g.cols
		if y < r || x < r || y+r >= g.rows || x+r >= g.cols {
			continue
		}
		core := true
		for dy := -r; dy <= r && core; dy++ {
			for dx := -r; dx <= r; dx++ {
				if !inReg[z*plane+(y+dy)*g.cols+x+dx] {
					core = false
					break
				}
			}
		}
		if core {
			return true
		}
	}
	return false
}

// hotspotFindings turns the regions of one series into findings, at
// most hotspotMaxFindings.
func hotspotFindings(s *Study, sa *SeriesAudit, regions []hotspotRegion, th HotspotThresholds) []Finding {
	if len(regions) == 0 {
		return nil
	}
	res, ser := sa.Result, sa.Series
	high := res.HighB[len(res.HighB)-1]
	b := high.B - res.B0Value
	g := ser.Reference
	rowMM, colMM := g.PixelSpacing[0], g.PixelSpacing[1]
	spacingNote := ""
	if !(rowMM > 0 && colMM > 0) {
		rowMM, colMM = 1, 1
		spacingNote = " (no Pixel Spacing in the header: millimetres assume 1 mm pixels)"
	}
	var out []Finding
	for k, r := range regions {
		if k == hotspotMaxFindings {
			break
		}
		sev := SeverityWarning
		if math.Abs(r.adcShift) >= th.ErrorADCShift && !r.thin {
			sev = SeverityError
		}
		reg := &Region{
			Slices:    r.slices,
			BoxPixels: [4]int{r.row0, r.col0, r.row1, r.col1},
			BoxMM:     [4]float64{float64(r.row0) * rowMM, float64(r.col0) * colMM, float64(r.row1) * rowMM, float64(r.col1) * colMM},
			AreaMM2:   r.areaMM2,
		}
		for _, z := range r.slices {
			if z < len(ser.Grid) {
				reg.SlicesMM = append(reg.SlicesMM, ser.Grid[z])
			}
		}
		reg.Description = fmt.Sprintf("b0 %s, DWI %s against the surroundings; ADC %s inside, %s around (mm2/s)",
			hotspotPercent(r.b0Ratio), hotspotPercent(r.dwiRatio), hotspotADC(r.adcInside, false), hotspotADC(r.adcAround, false))

		var msg strings.Builder
		fmt.Fprintf(&msg, "The b0 departs from what its surroundings predict while the b = %g DWI does not, so the ADC there cannot be trusted: ", high.B)
		fmt.Fprintf(&msg, "%s, rows %d-%d and columns %d-%d (%.0f-%.0f mm down and %.0f-%.0f mm across from the first pixel%s), %.0f mm2. ",
			hotspotSliceText(r.slices, reg.SlicesMM), r.row0, r.row1, r.col0, r.col1, reg.BoxMM[0], reg.BoxMM[2], reg.BoxMM[1], reg.BoxMM[3], spacingNote, r.areaMM2)
		fmt.Fprintf(&msg, "b0 %s and DWI %s against what the surroundings predict; ADC %s mm2/s inside against %s around (%s",
			hotspotPercent(r.b0Ratio), hotspotPercent(r.dwiRatio), hotspotADC(r.adcInside, false), hotspotADC(r.adcAround, false), hotspotADC(r.adcShift, true))
		if res.Method == analysis.ADCTwoPoint {
			// docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by ln(k)/b.
			fmt.Fprintf(&msg, "; a b0 scaled by %.2f alone shifts it by ln(k)/b = %s at b = %g", r.b0Ratio, hotspotADC(math.Log(r.b0Ratio)/b, true), b)
		}
		msg.WriteString("). ")
		if r.b0Ratio > 1 {
			msg.WriteString("Added signal on the b0 alone (wrap-around, a Nyquist ghost, a spike) raises the ADC; ")
		} else {
			msg.WriteString("Signal lost on the b0 alone (dropout, a spike's stripes) lowers the ADC and can look like restriction; ")
		}
		msg.WriteString("a real lesion would change the DWI too. ")
		if r.floorSigma > 0 {
			fmt.Fprintf(&msg, "Evidence: the region's DWI is %.0f σ above zero (noise σ %.3g, %s), so a change of the DWI would show; ", r.dwiSigmas, r.floorSigma, r.floorMethod)
		} else {
			msg.WriteString("Evidence: no noise estimate for the DWI, so the relative tests alone decided; ")
		}
		fmt.Fprintf(&msg, "voxels of parenchyma only (%d voxels of the series with an ADC of CSF and %d at the DWI noise floor were not tested). ", r.csfDominated, r.atFloor)
		if r.thin {
			fmt.Fprintf(&msg, "The region is nowhere %g mm thick in-plane, as thin as the cortical ribbon, whose partial volume with sulcal CSF gives the same signature at high b; so a warning, not an error. ", float64(hotspotCoreMM))
		}
		msg.WriteString("Check the b0 images of these slices.")
		if k == hotspotMaxFindings-1 && len(regions) > hotspotMaxFindings {
			fmt.Fprintf(&msg, " %d smaller regions of this series are not listed.", len(regions)-hotspotMaxFindings)
		}
		f := NewFinding(sa, HotspotID, sev)
		f.Message, f.Measured, f.Expected, f.Region = msg.String(), r.adcInside, r.adcAround, reg
		if f.StudyUID == "" && s != nil {
			f.StudyUID = s.StudyUID
		}
		out = append(out, f)
	}
	return out
}

// hotspotADC writes an ADC (mm²/s) in units of 1e-3, as the
// tables in docs/references.md#units do; signed for a shift.
func hotspotADC(v float64, signed bool) string {
	if signed {
		return fmt.Sprintf("%+.2fe-3", v*1e3)
	}
	return fmt.Sprintf("%.2fe-3", v*1e3)
}

// hotspotPercent writes a ratio as a signed percentage.
func hotspotPercent(r float64) string { return fmt.Sprintf("%+.0f%%", 100*(r-1)) }

// hotspotSliceText names the slices of a region: grid indices and
// positions along the slice normal.
func hotspotSliceText(idx []int, mm []float64) string {
	if len(idx) == 0 {
		return "no slice"
	}
	first, last := idx[0], idx[len(idx)-1]
	word := "slices"
	if len(idx) == 1 {
		word = "slice"
	}
	where := ""
	if len(mm) == len(idx) {
		where = fmt.Sprintf(" (%.1f", mm[0])
		if len(mm) > 1 {
			where += fmt.Sprintf(" to %.1f", mm[len(mm)-1])
		}
		where += " mm along the normal)"
	}
	if len(idx) == 1 {
		return fmt.Sprintf("%s %d%s", word, first, where)
	}
	if last-first+1 == len(idx) {
		return fmt.Sprintf("%s %d-%d%s", word, first, last, where)
	}
	parts := make([]string, len(idx))
	for i, z := range idx {
		parts[i] = fmt.Sprint(z)
	}
	return fmt.Sprintf("%s %s%s", word, strings.Join(parts, ", "), where)
}
