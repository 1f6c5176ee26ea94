package rules

import (
	"fmt"
	"math"
	"slices"

	"dwiaudit/audit/dwi"
)

// scannerADCDisagrees is rule scanner-adc-disagrees (error): a
// scanner-made ADC map attached to the series (Series.Maps) differs
// from the ADC recomputed from the images. The median of the voxel
// ratios scanner/recomputed over the tissue mask, where both are
// positive, must be within thresholds.scanner_adc_disagrees.tolerance
// of 1. The map's values are converted to mm²/s with its Real World
// Value Mapping (PS3.3 C.7.6.16.2.11: value = slope × stored +
// intercept, units from (0040,08EA)) when it has one in units of a
// diffusion coefficient, else with default_units. The radiologist
// reads the scanner's map: off by a factor, it misleads every reading.
type scannerADCDisagrees struct{}

// NewScannerADCDisagrees returns rule scanner-adc-disagrees.
func NewScannerADCDisagrees() Rule { return scannerADCDisagrees{} }

func (scannerADCDisagrees) ID() string { return IDScannerADCDisagrees }

func (scannerADCDisagrees) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	th := cfg.Thresholds.ScannerADC
	defScale, ok := unitScale(th.DefaultUnits)
	if !ok {
		defScale = 1e-6 // Validate reports the bad units; keep the default's meaning
	}
	for _, sa := range st.Series {
		if !sa.Computed() || sa.Result.ADC == nil {
			continue
		}
		for _, m := range sa.Series.Maps {
			if m.Kind != dwi.KindADC {
				continue
			}
			if f, ok := compareMap(sa, m, defScale, th); ok {
				out = append(out, f)
			}
		}
	}
	return out
}

// unitScale is the factor from a UCUM diffusion unit to mm²/s.
func unitScale(units string) (float64, bool) {
	switch units {
	case "mm2/s":
		return 1, true
	case "um2/s", "10-6.mm2/s":
		return 1e-6, true
	}
	return 0, false
}

// mapValue converts the pixels of one scanner map image to mm²/s, and
// says where the units came from.
func mapValue(fr *dwi.Frame, defScale float64, defUnits string) (func(p float32) float64, string) {
	for _, rw := range fr.RealWorld {
		scale, ok := unitScale(rw.Units)
		if !ok {
			continue
		}
		slope, icept := fr.RescaleSlope, fr.RescaleIntercept
		if slope == 0 {
			slope = 1
		}
		// Real World Value Mapping maps stored values (PS3.3
		// C.7.6.16.2.11.1); Pixels hold them after Rescale Slope and
		// Intercept, undone here.
		return func(p float32) float64 {
			stored := (float64(p) - icept) / slope
			return (rw.Slope*stored + rw.Intercept) * scale
		}, fmt.Sprintf("Real World Value Mapping: slope %g, intercept %g, units %s", rw.Slope, rw.Intercept, rw.Units)
	}
	return func(p float32) float64 { return float64(p) * defScale },
		fmt.Sprintf("no Real World Value Mapping in diffusion units; configured default units %s", defUnits)
}

func compareMap(sa *SeriesAudit, m *dwi.Volume, defScale float64, th ScannerADCThresholds) (Finding, bool) {
	res := sa.Result
	n := res.ADC.SliceLen()
	var ratios, scanner, ours []float64
	units := ""
	for z, fr := range m.Slices {
		if fr == nil || len(fr.Pixels) != n || z >= res.ADC.Slices {
			continue
		}
		conv, how := mapValue(fr, defScale, th.DefaultUnits)
		if units == "" {
			units = how
		}
		recomputed := res.ADC.Slice(z)
		for i, p := range fr.Pixels {
			k := z*n + i
			if k >= len(res.Mask) || !res.Mask[k] {
				continue
			}
			a, b := conv(p), float64(recomputed[i])
			if !(a > 0) || !(b > 0) || math.IsInf(a, 0) || math.IsInf(b, 0) {
				continue
			}
			ratios = append(ratios, a/b)
			scanner = append(scanner, a)
			ours = append(ours, b)
		}
	}
	if len(ratios) < th.MinVoxels {
		return Finding{}, false
	}
	r := median(ratios)
	if math.Abs(r-1) <= th.Tolerance {
		return Finding{}, false
	}
	where := "the scanner's ADC map"
	if fr := firstFrame(m); fr != nil && fr.SeriesInstanceUID != sa.Series.SeriesInstanceUID {
		where = fmt.Sprintf("the scanner's ADC map in series %d (%q)", fr.SeriesNumber, fr.SeriesDescription)
	}
	ms, mo := median(scanner), median(ours)
	f := NewFinding(sa, IDScannerADCDisagrees, SeverityError)
	f.Message = fmt.Sprintf("%s reads a median %s in tissue where the ADC recomputed from this series' images is %s: ratio %.2f, outside 1 ± %.0f%% (units from %s). "+
		"Every value a reader takes from the scanner's map is off by that factor; a wrong Real World Value slope or unit, or a map computed with another b-value, is the usual cause.",
		where, fmtADC(ms), fmtADC(mo), r, 100*th.Tolerance, units)
	f.Measured = ms
	f.Expected = mo
	return f, true
}

func firstFrame(v *dwi.Volume) *dwi.Frame {
	for _, fr := range v.Slices {
		if fr != nil {
			return fr
		}
	}
	return nil
}

// median of v (NaN when empty); v is reordered.
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	slices.Sort(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}
