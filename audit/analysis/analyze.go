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
	// 2002;23:194; DOMAIN.md) ends by 1.09e-3 and DOMAIN.md widens the
	// parenchyma median to 1.1e-3 for age and field; 1.6e-3 is half as
	// much again, room for ageing white matter and oedema, and still
	// nearer parenchyma than free water at 37 C (3.04e-3, Holz 2000;
	// DOMAIN.md), so voxels that are mostly CSF go to CSF.
	ParenchymaADCMax float64
	// CSFPercentile is the percentile of the ADC of the whole tissue mask
	// reported as the CSF ADC: a high percentile, because partial volume
	// pulls CSF down (DOMAIN.md, Physiological sanity). Default 95: CSF
	// (ventricles, sulci, subarachnoid space) is more than 5% of the
	// intracranial volume in adults (common practice), so the 95th
	// percentile lies inside CSF.
	CSFPercentile float64
	// FreeWaterCeiling (mm²/s) is the ADC no tissue exceeds at body
	// temperature; the fraction of the mask above it is a measure.
	// Default 3.4e-3 (DOMAIN.md, Physiological sanity).
	FreeWaterCeiling float64
	// SignalFloor: signals at or below it give no ADC (adc.TwoPoint).
	// Default 0: only a signal whose logarithm is undefined is left out,
	// so that low-SNR tissue shows its Rician bias in the measures
	// instead of disappearing from them.
	SignalFloor float32
	// ReferenceBMax (s/mm²) is the largest b-value accepted as the
	// reference (b0) image. Default 200: perfusion (IVIM) acts below
	// about 200 s/mm², which is why body protocols use b = 50 instead of
	// b = 0 (Eur Radiol 2010, doi 10.1007/s00330-010-2017-y; DOMAIN.md);
	// a series whose lowest b-value is above that has no b0.
	ReferenceBMax float64
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
	// (DOMAIN.md: 0.6-1.1e-3 expected in brain).
	ParenchymaMedianADC float64
	// CSFADC is the AnalyzeConfig.CSFPercentile-th percentile of the ADC
	// inside the mask, mm²/s (DOMAIN.md: about 3e-3 expected).
	CSFADC float64
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
	// MRM 1995;34:910; DOMAIN.md: flag below about 3).
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
	res.Measures = measure(res, cfg, noise, highNoise(groups[len(groups)-1], high, rows, cols))
	return res, nil
}

// undefinedMeasures is the Measures of a series not computed.
func undefinedMeasures() Measures {
	nan := math.NaN()
	undefined := adc.NoiseEstimate{Sigma: nan}
	return Measures{
		ParenchymaMedianADC: nan, CSFADC: nan, FractionAboveFreeWater: nan, FractionNegative: nan,
		B0SNR: nan, HighBTissueSNR: nan, Noise: undefined, HighBNoise: undefined, HighB: nan,
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

// measure computes the Measures of a computed Result.
func measure(res *Result, cfg AnalyzeConfig, noise, hiNoise adc.NoiseEstimate) Measures {
	m := undefinedMeasures()
	m.Noise, m.HighBNoise = noise, hiNoise
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
		m.CSFADC = float64(adc.PercentileInPlace(scratch, cfg.CSFPercentile))
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
