package rules

import (
	"fmt"
	"math"
	"slices"
)

// phantomADCBias is rule phantom-adc-bias (warning): a series matched
// by a phantom profile whose central-region ADC is outside the profile's
// tolerance of its expected value (ice water: 1.10e-3 mm²/s at 0 °C,
// QIBA; ±3.6%, from memory; docs/references.md#phantom-tolerance).
//
// The central region is the sphere of thresholds.phantom_adc_bias
// .roi_radius_mm around the centroid of the tissue mask (the phantom's
// water), in millimetres on the series' grid: the QIBA value holds at
// isocentre, and the phantom's centre is the best stand-in the images
// give (patient coordinates need not put isocentre at 0). The ADC is
// the median over the mask voxels inside the sphere.
//
// Warning, not error: a bias this rule sees is the scanner's diffusion
// weighting, or a phantom not at 0 °C (water's ADC rises about 3.5% per
// °C near 0 °C: the Holz 2000 fit D = D0 (T/Ts - 1)^γ gives
// dD/dT / D = γ/(T - Ts) = 2.063/58.1 K; docs/references.md#holz-2000), and the physicist
// decides which.
type phantomADCBias struct{}

// NewPhantomADCBias returns rule phantom-adc-bias.
func NewPhantomADCBias() Rule { return phantomADCBias{} }

func (phantomADCBias) ID() string { return IDPhantomADCBias }

func (phantomADCBias) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	th := cfg.Thresholds.PhantomADC
	for _, sa := range st.Series {
		p := sa.Phantom
		if p == nil || !sa.Computed() || sa.Result.ADC == nil {
			continue
		}
		adcCentre, n, region := centralADC(sa, th.ROIRadiusMM)
		if n < th.MinVoxels || math.IsNaN(adcCentre) {
			continue
		}
		rel := adcCentre/p.ExpectedADC - 1
		if math.Abs(rel) <= p.Tolerance {
			continue
		}
		dir := "above"
		if rel < 0 {
			dir = "below"
		}
		f := NewFinding(sa, IDPhantomADCBias, SeverityWarning)
		f.Message = fmt.Sprintf("phantom (profile %q): central ADC %s over %d voxels within %g mm of its centre is %.1f%% %s the expected %s (tolerance ±%.1f%%). "+
			"Either the scanner's diffusion weighting is biased, or the phantom was not at its reference temperature (an ice bath that has not settled: water's ADC rises about 3.5%% per °C near 0 °C, Holz 2000).",
			p.Name, fmtADC(adcCentre), n, th.ROIRadiusMM, 100*math.Abs(rel), dir, fmtADC(p.ExpectedADC), 100*p.Tolerance)
		f.Measured = adcCentre
		f.Expected = p.ExpectedADC
		f.Region = region
		out = append(out, f)
	}
	return out
}

// PhantomCentralADC is the ADC a phantom series' judgement rests on:
// the median ADC over the mask voxels within
// thresholds.phantom_adc_bias.roi_radius_mm of the phantom's centre
// (mm²/s) and how many voxels that is. It is NaN, 0 for a series that
// matched no phantom profile, was not computed, or has fewer voxels than
// the rule needs. Reports and drift metrics use it for every phantom
// series, inside tolerance or not.
func PhantomCentralADC(sa *SeriesAudit, cfg *Config) (float64, int) {
	if sa == nil || sa.Phantom == nil || !sa.Computed() || sa.Result.ADC == nil {
		return math.NaN(), 0
	}
	th := cfg.Thresholds.PhantomADC
	adcCentre, n, _ := centralADC(sa, th.ROIRadiusMM)
	if n < th.MinVoxels || math.IsNaN(adcCentre) {
		return math.NaN(), 0
	}
	return adcCentre, n
}

// centralADC is the median ADC of the mask voxels within radius mm of
// the mask's centroid, their number, and the region they span.
func centralADC(sa *SeriesAudit, radius float64) (float64, int, *Region) {
	res, s := sa.Result, sa.Series
	a := res.ADC
	rs, cs := s.Reference.PixelSpacing[0], s.Reference.PixelSpacing[1]
	if rs <= 0 || cs <= 0 || len(res.Mask) != len(a.Data) {
		return math.NaN(), 0, nil
	}
	zmm := func(z int) float64 {
		if z < len(s.Grid) {
			return s.Grid[z]
		}
		return math.NaN()
	}
	var sx, sy, sz float64
	n := 0
	for k, in := range res.Mask {
		if !in {
			continue
		}
		z, r, c := k/(a.Rows*a.Cols), (k/a.Cols)%a.Rows, k%a.Cols
		sx, sy, sz = sx+float64(c)*cs, sy+float64(r)*rs, sz+zmm(z)
		n++
	}
	if n == 0 {
		return math.NaN(), 0, nil
	}
	cx, cy, cz := sx/float64(n), sy/float64(n), sz/float64(n)
	var vals []float64
	reg := &Region{BoxPixels: [4]int{a.Rows, a.Cols, -1, -1}, Description: "central region of the phantom"}
	seen := map[int]bool{}
	for k, in := range res.Mask {
		v := float64(a.Data[k])
		if !in || math.IsNaN(v) {
			continue
		}
		z, r, c := k/(a.Rows*a.Cols), (k/a.Cols)%a.Rows, k%a.Cols
		dx, dy, dz := float64(c)*cs-cx, float64(r)*rs-cy, zmm(z)-cz
		if dx*dx+dy*dy+dz*dz > radius*radius {
			continue
		}
		vals = append(vals, v)
		reg.BoxPixels = [4]int{min(reg.BoxPixels[0], r), min(reg.BoxPixels[1], c), max(reg.BoxPixels[2], r), max(reg.BoxPixels[3], c)}
		if !seen[z] {
			seen[z] = true
			reg.Slices = append(reg.Slices, z)
			reg.SlicesMM = append(reg.SlicesMM, zmm(z))
		}
	}
	if len(vals) == 0 {
		return math.NaN(), 0, nil
	}
	b := reg.BoxPixels
	reg.BoxMM = [4]float64{float64(b[0]) * rs, float64(b[1]) * cs, float64(b[2]) * rs, float64(b[3]) * cs}
	reg.AreaMM2 = float64(len(vals)) * rs * cs
	return median(vals), len(vals), reg
}

// PhantomADCUniformity is the uniformity of the ADC over a phantom's
// water (the tissue mask of a phantom series): 1 − (P95 − P5)/(P95 + P5)
// of the voxel ADCs, the integral-uniformity formula NEMA MS 3 applies
// to signal (from memory, not re-read), with the 5th and 95th
// percentiles for its minimum and maximum so that a few noisy voxels do
// not decide it. 1 is perfectly uniform. NaN for a series that matched
// no phantom profile or was not computed.
func PhantomADCUniformity(sa *SeriesAudit) float64 {
	if sa == nil || sa.Phantom == nil || !sa.Computed() || sa.Result.ADC == nil || len(sa.Result.Mask) != len(sa.Result.ADC.Data) {
		return math.NaN()
	}
	var vals []float64
	for i, in := range sa.Result.Mask {
		if v := float64(sa.Result.ADC.Data[i]); in && !math.IsNaN(v) {
			vals = append(vals, v)
		}
	}
	if len(vals) == 0 {
		return math.NaN()
	}
	slices.Sort(vals)
	at := func(p float64) float64 { return vals[int(math.Round(p/100*float64(len(vals)-1)))] }
	lo, hi := at(5), at(95)
	if !(hi+lo > 0) {
		return math.NaN()
	}
	return 1 - (hi-lo)/(hi+lo)
}
