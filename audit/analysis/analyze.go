package analysis

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/dwi"
)

// Sentinel errors of Analyze. A series that cannot be computed (no b0,
// compressed pixels, one b-value) is not an error: it is a finding,
// reported in Result.CannotCompute.
var (
	// errInvalidConfig: an AnalyzeConfig field is out of range; the
	// message names every field at fault.
	errInvalidConfig = errors.New("audit: invalid analysis configuration")
	// errNoSeries: Analyze was given a nil series.
	errNoSeries = errors.New("audit: no series")
)

// AnalyzeConfig tunes Analyze. DefaultAnalyzeConfig gives the audit's
// values; each field says where its default comes from.
type AnalyzeConfig struct {
	// ParenchymaADCMax (mm²/s) splits the tissue mask: voxels whose ADC
	// is below it are parenchyma, the rest CSF and partial volume.
	// Default 1.6e-3 (inference): every range of Helenius et al. (AJNR
	// 2002;23:194; docs/references.md#helenius-2002) ends by 1.09e-3 and docs/references.md#parenchyma-range widens the
	// parenchyma median to 1.1e-3 for age and field; 1.6e-3 is half as
	// much again, room for ageing white matter and oedema, and still
	// nearer parenchyma than free water at 37 C (3.04e-3, Holz 2000;
	// docs/references.md#holz-2000), so voxels that are mostly CSF go to CSF.
	ParenchymaADCMax float64
	// CSFPercentile is the percentile of the ADC of the whole tissue mask
	// reported as the CSF ADC: a high percentile, because partial volume
	// pulls CSF down (docs/references.md#csf-reference). Default 95: CSF
	// (ventricles, sulci, subarachnoid space) is more than 5% of the
	// intracranial volume in adults (common practice), so the 95th
	// percentile lies inside CSF.
	CSFPercentile float64
	// FreeWaterCeiling (mm²/s) is the ADC no tissue exceeds at body
	// temperature; the fraction of the mask above it is a measure.
	// Default 3.4e-3 (docs/references.md#free-water-ceiling).
	FreeWaterCeiling float64
	// SignalFloor: signals at or below it give no ADC (adc.TwoPoint).
	// Default 0: only a signal whose logarithm is undefined is left out,
	// so that low-SNR tissue shows its Rician bias in the measures
	// instead of disappearing from them.
	SignalFloor float32
	// ReferenceBMax (s/mm²) is the largest b-value accepted as the
	// reference (b0) image. Default 200: perfusion (IVIM) acts below
	// about 200 s/mm², which is why body protocols use b = 50 instead of
	// b = 0 (Eur Radiol 2010, doi 10.1007/s00330-010-2017-y; docs/references.md#eur-radiol-2010-ivim);
	// a series whose lowest b-value is above that has no b0.
	ReferenceBMax float64
	// MeasurableSigmas: a diffusion-weighted signal below this many noise
	// σ (Measures.FloorNoise) is at the noise floor, and the ADC computed
	// from it is a lower bound, not a value: magnitude images are biased
	// up there (Rician bias, Gudbjartsson & Patz, MRM 1995;34:910), so
	// the signal reads high and the ADC low. Default 3: the SNR below
	// which docs/references.md#rician-floor flags tissue (after Gudbjartsson & Patz's 2-3);
	// at 3σ the Rician mean sqrt(A²+σ²) is 5% above the signal A.
	MeasurableSigmas float64
	// MinCSFShare is the least share of the mask's voxels with an ADC
	// that must be CSF, told by their bright b0 (csfB0Factor), for a
	// CSF ADC to exist: the CSF ADC is the CSFPercentile-th percentile
	// of the mask, which lies in CSF only when CSF is about as large a
	// share as the percentile leaves above it. Default 0.04 (tuned on
	// the real heads of docs/calibration.md, which hold 2-6%, and the
	// synthetic brain, which holds more): below it the percentile lands
	// in partial volume and reads 1.6-2.1e-3 on clean scans.
	MinCSFShare float64
	// Mask tunes the tissue mask (adc.TissueMask).
	Mask adc.MaskOptions
}

// DefaultAnalyzeConfig returns the audit's settings (see the fields).
func DefaultAnalyzeConfig() AnalyzeConfig {
	return AnalyzeConfig{
		ParenchymaADCMax: 1.6e-3,
		CSFPercentile:    95,
		FreeWaterCeiling: 3.4e-3,
		SignalFloor:      0,
		ReferenceBMax:    200,
		MeasurableSigmas: 3,
		MinCSFShare:      0.04,
		Mask:             adc.DefaultMaskOptions(),
	}
}

// Validate reports every problem with c at once.
func (c AnalyzeConfig) Validate() error {
	var errs []error
	bad := func(field string, v any, want string) {
		errs = append(errs, fmt.Errorf("%w: %s = %v, want %s", errInvalidConfig, field, v, want))
	}
	positive := func(v float64) bool { return v > 0 && !math.IsInf(v, 0) }
	if !positive(c.ParenchymaADCMax) {
		bad("ParenchymaADCMax", c.ParenchymaADCMax, "a positive ADC in mm²/s")
	}
	if !(c.CSFPercentile > 0 && c.CSFPercentile <= 100) {
		bad("CSFPercentile", c.CSFPercentile, "0 < p <= 100")
	}
	if !positive(c.FreeWaterCeiling) {
		bad("FreeWaterCeiling", c.FreeWaterCeiling, "a positive ADC in mm²/s")
	}
	if c.SignalFloor < 0 || c.SignalFloor != c.SignalFloor || math.IsInf(float64(c.SignalFloor), 0) {
		bad("SignalFloor", c.SignalFloor, "a signal >= 0")
	}
	if !(c.ReferenceBMax >= 0) || math.IsInf(c.ReferenceBMax, 0) {
		bad("ReferenceBMax", c.ReferenceBMax, "a b-value >= 0 in s/mm²")
	}
	if !(c.MeasurableSigmas >= 0) || math.IsInf(c.MeasurableSigmas, 0) {
		bad("MeasurableSigmas", c.MeasurableSigmas, "a number of noise σ >= 0")
	}
	if !(c.MinCSFShare >= 0 && c.MinCSFShare < 1) {
		bad("MinCSFShare", c.MinCSFShare, "a share 0 <= s < 1")
	}
	if err := c.Mask.Validate(); err != nil {
		errs = append(errs, fmt.Errorf("%w: Mask: %w", errInvalidConfig, err))
	}
	return errors.Join(errs...)
}

// TraceSource says where a trace image came from.
type TraceSource int

const (
	// TraceIsotropic: the scanner's isotropic (trace) image, or the b0.
	TraceIsotropic TraceSource = iota
	// TraceGeometricMean: the geometric mean of the directional images
	// (adc.GeometricMean).
	TraceGeometricMean
)

func (t TraceSource) String() string {
	switch t {
	case TraceIsotropic:
		return "isotropic image"
	case TraceGeometricMean:
		return "geometric mean of directions"
	}
	return fmt.Sprintf("TraceSource(%d)", int(t))
}

// BImage is the trace-weighted volume of one b-value.
type BImage struct {
	B          float64 // nominal b-value, s/mm²
	Trace      *adc.Volume3
	Source     TraceSource
	Directions int // directional volumes at this b-value (whether used or not)
}

// ADCMethod says how the ADC map was computed.
type ADCMethod int

const (
	ADCNone     ADCMethod = iota // not computed
	ADCTwoPoint                  // ln(S0/Sb)/b, two b-values (adc.TwoPoint)
	ADCWLS                       // weighted log-linear least squares, more b-values (adc.FitWLS)
)

func (m ADCMethod) String() string {
	switch m {
	case ADCNone:
		return "none"
	case ADCTwoPoint:
		return "two-point"
	case ADCWLS:
		return "weighted least squares"
	}
	return fmt.Sprintf("ADCMethod(%d)", int(m))
}

// Result is the computation on one series. The volumes share the series'
// slice grid (Series.Grid): slice z of every volume lies at Grid[z], and
// voxels of slices a volume lacks are NaN.
type Result struct {
	Series *dwi.Series
	// B0 is the reference (lowest b-value) trace volume; B0Value its
	// b-value (0, or for example 50 in a body protocol).
	B0      *adc.Volume3
	B0Value float64
	// HighB holds the trace volume of every b-value above the
	// reference, ascending.
	HighB []BImage
	// ADC in mm²/s and EADC (Sb/S0 at the highest b-value), NaN where
	// undefined.
	ADC, EADC *adc.Volume3
	Method    ADCMethod
	// Mask is the tissue mask on the b0 (adc.TissueMask); Parenchyma the
	// part of it with ADC below AnalyzeConfig.ParenchymaADCMax.
	Mask, Parenchyma []bool
	Measures         Measures
	// CannotCompute says why nothing was computed (compressed pixel
	// data, no b0, a single b-value, images of different sizes); the
	// volumes are then nil. Empty when the computation ran.
	CannotCompute string
}

// Measures are the per-series numbers the rules judge. NaN where a
// measure is undefined (no noise estimate, an empty region).
type Measures struct {
	// ParenchymaMedianADC is the median ADC of Parenchyma, mm²/s
	// (docs/references.md#parenchyma-range: 0.6-1.1e-3 expected in brain).
	ParenchymaMedianADC float64
	// CSFADC is the AnalyzeConfig.CSFPercentile-th percentile of the ADC
	// inside the mask, mm²/s (docs/references.md#csf-reference: about 3e-3 expected). It exists
	// only when the mask holds enough CSF (AnalyzeConfig.MinCSFShare)
	// and the diffusion-weighted signal of the voxels it rests on (those
	// at or above the percentile) is measurable: their median at least
	// AnalyzeConfig.MeasurableSigmas times FloorNoise. Otherwise it is
	// NaN and CSFNote says why.
	CSFADC float64
	// CSFNote says why CSFADC is undefined ("" when it is defined, or
	// when nothing was computed).
	CSFNote string
	// CSFADCLowerBound is the percentile CSFADC would be when the CSF's
	// diffusion-weighted signal is at the noise floor: the Rician bias
	// lifts that signal, so the true CSF ADC is at least this (mm²/s).
	// NaN otherwise.
	CSFADCLowerBound float64
	// CSFShare is the share of the mask voxels with an ADC that are CSF
	// by their b0 (see AnalyzeConfig.MinCSFShare); CSFDWSignalSigmas the median
	// highest-b trace signal of the voxels at or above the CSF
	// percentile, in units of FloorNoise.Sigma (NaN without a noise
	// estimate).
	CSFShare, CSFDWSignalSigmas float64
	// FloorNoise is the noise σ the noise floor of the highest-b images
	// is judged against: HighBNoise when the background gave one, else
	// an estimate from the tissue of those images (adc.NoiseFromLaplacian),
	// for scanners that zero the background.
	FloorNoise adc.NoiseEstimate
	// FractionAboveFreeWater and FractionNegative are shares of the mask
	// voxels with a defined ADC: ADC > FreeWaterCeiling, ADC < 0.
	FractionAboveFreeWater, FractionNegative float64
	// B0SNR is the median b0 signal of Parenchyma over the b0 noise σ
	// (Noise): the SNR of the tissue, in the sense of NEMA MS 1-2008
	// (mean ROI signal over background noise, from memory), with the
	// median so that a few artifact voxels do not move it.
	B0SNR float64
	// HighBTissueSNR is the median highest-b trace signal of Parenchyma
	// over HighBNoise.Sigma: the SNR of one diffusion-weighted image in
	// tissue, which is what decides the Rician bias (Gudbjartsson & Patz,
	// MRM 1995;34:910; docs/references.md#rician-floor: flag below about 3).
	HighBTissueSNR float64
	// TissueVoxels and ParenchymaVoxels count Mask and Parenchyma;
	// ADCVoxels the mask voxels with a defined ADC.
	TissueVoxels, ParenchymaVoxels, ADCVoxels int
	// Noise is the b0 noise estimate; HighBNoise that of the highest
	// b-value's acquired images (the directional images when there are
	// any, since each is a plain magnitude image; otherwise the trace,
	// whose background is not Rayleigh and gives σ about 10% low).
	Noise, HighBNoise adc.NoiseEstimate
	// HighB is the highest b-value, s/mm².
	HighB float64
}

// bGroup is the acquired volumes of one nominal b-value.
type bGroup struct {
	b           float64
	isotropic   []*dwi.Volume
	directional []*dwi.Volume
}

// Analyze computes the trace images, ADC, eADC, tissue mask and measures
// of an assembled series:
//
//   - the reference is the lowest b-value, if at most ReferenceBMax;
//   - the trace of each b-value is its isotropic image when the series
//     has one (the scanner's trace), otherwise the geometric mean of its
//     directional images (adc.GeometricMean); a slice missing from any
//     direction is NaN in the trace;
//   - ADC is two-point with two b-values and the S²-weighted log-linear
//     fit with more (adc.TwoPoint, adc.FitWLS); eADC is at the highest
//     b-value;
//   - the mask is adc.TissueMask on the b0, and its noise estimate is
//     the b0 noise; with two or more b0 repeats the noise comes from
//     their difference inside the mask instead (NEMA MS 1-2008
//     difference method, from memory), which also sees noise a masked or
//     filtered background hides;
//   - parenchyma is the mask below ParenchymaADCMax; the measures follow
//     (see Measures).
//
// Scanner-derived maps (Series.Maps) are not used. A series that cannot
// be computed returns a Result with CannotCompute set and a nil error;
// errors are for a nil series and an invalid cfg.
func Analyze(s *dwi.Series, cfg AnalyzeConfig) (*Result, error) {
	if s == nil {
		return nil, errNoSeries
	}
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	res := &Result{Series: s, Measures: undefinedMeasures()}
	groups := groupByB(s.Volumes)
	rows, cols, nslices, reason := shape(s, groups)
	switch {
	case reason != "":
		res.CannotCompute = reason
		return res, nil
	case len(groups) == 0:
		res.CannotCompute = "no acquired diffusion images"
		return res, nil
	case groups[0].b > cfg.ReferenceBMax:
		res.CannotCompute = fmt.Sprintf("no b0: the lowest b-value is %g s/mm², above the %g accepted as a reference", groups[0].b, cfg.ReferenceBMax)
		if n := len(s.Facts.B0Unmatched); n > 0 {
			res.CannotCompute += fmt.Sprintf("; the b0 of %d other series of the study does not match this series' slices or geometry", n)
		}
		return res, nil
	case len(groups) < 2:
		res.CannotCompute = fmt.Sprintf("one b-value only (%g s/mm²): ADC needs two", groups[0].b)
		return res, nil
	}

	ref := groups[0]
	res.B0, _ = trace(ref, rows, cols, nslices)
	res.B0Value = ref.b
	for _, g := range groups[1:] {
		v, src := trace(g, rows, cols, nslices)
		res.HighB = append(res.HighB, BImage{B: g.b, Trace: v, Source: src, Directions: len(g.directional)})
	}
	high := res.HighB[len(res.HighB)-1]

	mask, noise := adc.TissueMask(*res.B0, cfg.Mask)
	if len(ref.isotropic) >= 2 {
		a, _ := trace(bGroup{b: ref.b, isotropic: ref.isotropic[:1]}, rows, cols, nslices)
		b, _ := trace(bGroup{b: ref.b, isotropic: ref.isotropic[1:2]}, rows, cols, nslices)
		if d := adc.NoiseFromDifference(a.Data, b.Data, mask); d.Valid() {
			noise = d
		}
	}
	res.Mask = mask

	res.ADC = adc.NewVolume3(rows, cols, nslices)
	if len(groups) == 2 {
		res.Method = ADCTwoPoint
		adc.TwoPoint(res.ADC.Data, res.B0.Data, high.Trace.Data, high.B-ref.b, cfg.SignalFloor)
	} else {
		res.Method = ADCWLS
		signals := [][]float32{res.B0.Data}
		bs := []float64{ref.b}
		for _, h := range res.HighB {
			signals = append(signals, h.Trace.Data)
			bs = append(bs, h.B)
		}
		adc.FitWLS(res.ADC.Data, nil, signals, bs, cfg.SignalFloor)
	}
	res.EADC = adc.NewVolume3(rows, cols, nslices)
	adc.EADC(res.EADC.Data, res.B0.Data, high.Trace.Data)

	res.Parenchyma = make([]bool, len(mask))
	for i, in := range mask {
		v := float64(res.ADC.Data[i])
		res.Parenchyma[i] = in && v < cfg.ParenchymaADCMax // NaN compares false
	}
	hi := highNoise(groups[len(groups)-1], high, rows, cols)
	floor := hi
	if !floor.Valid() {
		floor = tissueNoise(groups[len(groups)-1], high, mask, rows, cols)
	}
	res.Measures = measure(res, cfg, noise, hi, floor)
	return res, nil
}

// undefinedMeasures is the Measures of a series not computed.
func undefinedMeasures() Measures {
	nan := math.NaN()
	undefined := adc.NoiseEstimate{Sigma: nan}
	return Measures{
		ParenchymaMedianADC: nan, CSFADC: nan, CSFADCLowerBound: nan, CSFShare: nan, CSFDWSignalSigmas: nan,
		FractionAboveFreeWater: nan, FractionNegative: nan,
		B0SNR: nan, HighBTissueSNR: nan, Noise: undefined, HighBNoise: undefined, FloorNoise: undefined, HighB: nan,
	}
}

// groupByB collects the acquired volumes by nominal b-value, ascending.
// Assembly gives every volume of one b-value cluster the same nominal
// value, so equality groups them.
func groupByB(vols []*dwi.Volume) []bGroup {
	var groups []bGroup
	for _, v := range vols {
		if v == nil || v.Kind != dwi.KindAcquired {
			continue
		}
		i := slices.IndexFunc(groups, func(g bGroup) bool { return g.b == v.BValue })
		if i < 0 {
			groups = append(groups, bGroup{b: v.BValue})
			i = len(groups) - 1
		}
		if v.Isotropic || v.Direction == (dwi.Direction{}) {
			groups[i].isotropic = append(groups[i].isotropic, v)
		} else {
			groups[i].directional = append(groups[i].directional, v)
		}
	}
	slices.SortFunc(groups, func(a, b bGroup) int {
		switch {
		case a.b < b.b:
			return -1
		case a.b > b.b:
			return 1
		}
		return 0
	})
	return groups
}

// undecodedReason says why a series with compressed pixel data the audit
// does not decode cannot be computed: the header reader's reason, which
// names the transfer syntax (dwi.Frame.Undecoded).
func undecodedReason(groups []bGroup) string {
	for _, g := range groups {
		for _, v := range append(slices.Clip(g.isotropic), g.directional...) {
			for _, f := range v.Slices {
				if f != nil && f.Encapsulated && f.Undecoded != "" {
					return f.Undecoded
				}
			}
		}
	}
	return "compressed (encapsulated) pixel data in a transfer syntax the audit does not decode"
}

// shape finds the size of the series' volumes, or why they cannot be
// computed: compressed pixel data, pixels not loaded, images of
// different sizes.
func shape(s *dwi.Series, groups []bGroup) (rows, cols, nslices int, reason string) {
	if s.Facts.Encapsulated {
		return 0, 0, 0, undecodedReason(groups)
	}
	rows, cols = s.Reference.Rows, s.Reference.Columns
	nslices = len(s.Grid)
	for _, g := range groups {
		for _, v := range append(slices.Clip(g.isotropic), g.directional...) {
			nslices = max(nslices, len(v.Slices))
			for _, f := range v.Slices {
				if f == nil {
					continue
				}
				switch {
				case f.Encapsulated:
					return 0, 0, 0, undecodedReason(groups)
				case rows == 0 && cols == 0:
					rows, cols = f.Geometry.Rows, f.Geometry.Columns
				}
				switch {
				case f.Pixels == nil:
					return 0, 0, 0, fmt.Sprintf("pixel data not loaded (%s)", frameName(f))
				case f.Geometry.Rows != rows || f.Geometry.Columns != cols || len(f.Pixels) != rows*cols:
					return 0, 0, 0, fmt.Sprintf("image %s is %d×%d with %d pixels, the series %d×%d",
						frameName(f), f.Geometry.Rows, f.Geometry.Columns, len(f.Pixels), rows, cols)
				}
			}
		}
	}
	return rows, cols, nslices, ""
}

// frameName names an image in a reason without patient data.
func frameName(f *dwi.Frame) string {
	if f.FrameNumber > 0 {
		return fmt.Sprintf("%s frame %d", f.SOPInstanceUID, f.FrameNumber)
	}
	return f.SOPInstanceUID
}

// trace builds the trace volume of one b-value: a copy of its first
// isotropic volume, or the geometric mean of its directional volumes.
// Slices a volume lacks are NaN.
func trace(g bGroup, rows, cols, nslices int) (*adc.Volume3, TraceSource) {
	out := adc.NewVolume3(rows, cols, nslices)
	nan := float32(math.NaN())
	if len(g.isotropic) > 0 {
		v := g.isotropic[0]
		for z := range nslices {
			dst := out.Slice(z)
			if z < len(v.Slices) && v.Slices[z] != nil {
				copy(dst, v.Slices[z].Pixels)
			} else {
				fillNaN(dst, nan)
			}
		}
		return out, TraceIsotropic
	}
	dirs := make([][]float32, len(g.directional))
	for z := range nslices {
		dst := out.Slice(z)
		complete := true
		for k, v := range g.directional {
			if z >= len(v.Slices) || v.Slices[z] == nil {
				complete = false
				break
			}
			dirs[k] = v.Slices[z].Pixels
		}
		if !complete {
			fillNaN(dst, nan)
			continue
		}
		adc.GeometricMean(dst, dirs...)
	}
	return out, TraceGeometricMean
}

func fillNaN(dst []float32, nan float32) {
	for i := range dst {
		dst[i] = nan
	}
}

// highNoise estimates the noise of the highest b-value's acquired
// images from their background (adc.BackgroundNoiseImages): the
// directional images when there are any, otherwise the trace.
func highNoise(g bGroup, high BImage, rows, cols int) adc.NoiseEstimate {
	if len(g.directional) == 0 {
		return adc.BackgroundNoise(*high.Trace)
	}
	var images [][]float32
	for _, v := range g.directional {
		for _, f := range v.Slices {
			if f != nil {
				images = append(images, f.Pixels)
			}
		}
	}
	return adc.BackgroundNoiseImages(rows, cols, images...)
}

// tissueNoiseVolumes caps the directional volumes tissueNoise reads:
// six give some hundred thousand pixels in a head, far more than the
// estimate needs, at a fraction of the cost of 80 directions.
const tissueNoiseVolumes = 6

// tissueNoise estimates the noise of the highest b-value's images from
// their tissue (adc.NoiseFromLaplacian, mask eroded by the 3×3 the
// estimator needs): the directional images when there are any, else the
// trace.
func tissueNoise(g bGroup, high BImage, mask []bool, rows, cols int) adc.NoiseEstimate {
	plane := rows * cols
	var images [][]float32
	var masks [][]bool
	add := func(z int, img []float32) {
		if (z+1)*plane <= len(mask) && len(img) == plane {
			images, masks = append(images, img), append(masks, mask[z*plane:(z+1)*plane])
		}
	}
	if len(g.directional) == 0 {
		for z := range high.Trace.Slices {
			add(z, high.Trace.Slice(z))
		}
	} else {
		for _, v := range g.directional[:min(len(g.directional), tissueNoiseVolumes)] {
			for z, f := range v.Slices {
				if f != nil {
					add(z, f.Pixels)
				}
			}
		}
	}
	return adc.NoiseFromLaplacian(rows, cols, images, masks)
}

// measure computes the Measures of a computed Result.
func measure(res *Result, cfg AnalyzeConfig, noise, hiNoise, floor adc.NoiseEstimate) Measures {
	m := undefinedMeasures()
	m.Noise, m.HighBNoise, m.FloorNoise = noise, hiNoise, floor
	high := res.HighB[len(res.HighB)-1]
	m.HighB = high.B

	// One scratch buffer, reused by every order statistic.
	scratch := make([]float32, 0, len(res.Mask))
	var above, negative int
	for i, in := range res.Mask {
		if !in {
			continue
		}
		m.TissueVoxels++
		v := res.ADC.Data[i]
		if v != v {
			continue
		}
		m.ADCVoxels++
		if float64(v) > cfg.FreeWaterCeiling {
			above++
		}
		if v < 0 {
			negative++
		}
		scratch = append(scratch, v)
	}
	if m.ADCVoxels > 0 {
		m.FractionAboveFreeWater = float64(above) / float64(m.ADCVoxels)
		m.FractionNegative = float64(negative) / float64(m.ADCVoxels)
		csfMeasure(&m, res, cfg, float64(adc.PercentileInPlace(scratch, cfg.CSFPercentile)))
	}

	gather := func(src []float32) []float32 {
		scratch = scratch[:0]
		for i, in := range res.Parenchyma {
			if in {
				scratch = append(scratch, src[i])
			}
		}
		return scratch
	}
	for _, in := range res.Parenchyma {
		if in {
			m.ParenchymaVoxels++
		}
	}
	if m.ParenchymaVoxels == 0 {
		return m
	}
	m.ParenchymaMedianADC = float64(adc.PercentileInPlace(gather(res.ADC.Data), 50))
	if noise.Valid() {
		m.B0SNR = float64(adc.PercentileInPlace(gather(res.B0.Data), 50)) / noise.Sigma
	}
	if hiNoise.Valid() {
		m.HighBTissueSNR = float64(adc.PercentileInPlace(gather(high.Trace.Data), 50)) / hiNoise.Sigma
	}
	return m
}

// csfMeasure decides whether the CSF ADC exists (Measures.CSFADC): the
// mask must hold enough CSF, and the diffusion-weighted signal of the
// voxels the percentile p rests on must be above the noise floor;
// otherwise CSFADC is NaN and CSFNote says why.
func csfMeasure(m *Measures, res *Result, cfg AnalyzeConfig, p float64) {
	high := res.HighB[len(res.HighB)-1]
	// CSF is told by its b0, not its ADC (which is what is judged): its
	// long T2 makes it the brightest tissue of the b0, and a voxel at
	// csfB0Factor times the parenchyma's median b0 is mostly CSF.
	var pb []float32
	for i, in := range res.Parenchyma {
		if v := res.B0.Data[i]; in && v == v {
			pb = append(pb, v)
		}
	}
	level := float32(math.Inf(1))
	if len(pb) > 0 {
		level = csfB0Factor * adc.PercentileInPlace(pb, 50)
	}
	csf := 0
	var dw []float32
	for i, in := range res.Mask {
		v := float64(res.ADC.Data[i])
		if !in || v != v {
			continue
		}
		if res.B0.Data[i] >= level {
			csf++
		}
		if v >= p {
			dw = append(dw, high.Trace.Data[i])
		}
	}
	m.CSFShare = float64(csf) / float64(m.ADCVoxels)
	if m.CSFShare < cfg.MinCSFShare {
		m.CSFNote = fmt.Sprintf("CSF ADC not measured: %.1f%% of the tissue mask is CSF (b0 at least %g times the parenchyma's), fewer than the %.0f%% its percentile needs to lie in CSF",
			100*m.CSFShare, csfB0Factor, 100*cfg.MinCSFShare)
		return
	}
	if !m.FloorNoise.Valid() {
		m.CSFNote = fmt.Sprintf("CSF ADC not measurable at b = %g: no noise estimate (%s), so whether its signal is above the noise floor is unknown", high.B, m.FloorNoise.Method)
		return
	}
	sig := float64(adc.PercentileInPlace(dw, 50)) / m.FloorNoise.Sigma
	m.CSFDWSignalSigmas = sig
	if !(sig >= cfg.MeasurableSigmas) {
		m.CSFNote = fmt.Sprintf("CSF ADC not measurable at b = %g: signal at the noise floor (median CSF signal %.1f σ, below %g σ; Rician bias makes %s mm²/s a lower bound)",
			high.B, sig, cfg.MeasurableSigmas, fmtADC(p))
		m.CSFADCLowerBound = p
		return
	}
	m.CSFADC = p
}

// csfB0Factor: a mask voxel whose b0 is at least this many times the
// parenchyma's median b0 counts as CSF for MinCSFShare. 2.5: CSF's b0
// is about three times white matter's at the echo times of DWI, and
// the synthetic brain's 2000 against 600-800 (common practice; the
// phantom's values); grey matter (about 1.3 times) and partial volume
// below three quarters CSF stay under it.
const csfB0Factor = 2.5

// fmtADC writes an ADC in units of 1e-3 mm²/s.
func fmtADC(v float64) string { return fmt.Sprintf("%.2fe-3", v*1e3) }
