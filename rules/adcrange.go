package rules

import (
	"fmt"
	"math"
	"strings"

	"dwiaudit/audit/analysis"
)

// adcOutOfRange is rule adc-out-of-range: the computed ADC of a tissue
// series is outside what physiology allows.
//
//   - Parenchyma (error): the median ADC of the parenchyma is outside
//     the protocol's range (brain 0.6-1.1e-3 mm²/s, docs/references.md#parenchyma-range). A whole
//     series off means the weighting or scaling is wrong, not a lesion:
//     a lesion moves a small part of the parenchyma, not its median.
//   - CSF (error, head protocols): the CSF ADC is far from free water at
//     37 °C (3.0e-3, Holz 2000): CSF is close to free water, so the
//     header b-value does not match the applied weighting, or the pixel
//     scaling is wrong (docs/references.md#csf-reference). Judged only when the mask holds
//     enough CSF for the percentile the analysis takes to lie in it
//     (thresholds.adc_out_of_range.min_csf_share).
//   - Above free water (warning): too many tissue voxels faster than free
//     water at body temperature, which no tissue is (docs/references.md#free-water-ceiling).
//   - Negative (warning): too many tissue voxels with DWI brighter than
//     b0, beyond what noise gives.
//
// Phantom series are not judged here (phantom-adc-bias judges them);
// unmatched series get the two fractions only.
type adcOutOfRange struct{}

// NewADCOutOfRange returns rule adc-out-of-range.
func NewADCOutOfRange() Rule { return adcOutOfRange{} }

func (adcOutOfRange) ID() string { return IDADCOutOfRange }

func (adcOutOfRange) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	th := cfg.Thresholds.ADCOutOfRange
	for _, sa := range st.Series {
		if sa.Phantom != nil || !sa.Computed() {
			continue
		}
		e := expectFor(sa, cfg)
		m := sa.Result.Measures
		if p := e.protocol; p != nil {
			r := p.ParenchymaADC
			if r[1] > 0 && !math.IsNaN(m.ParenchymaMedianADC) && (m.ParenchymaMedianADC < r[0] || m.ParenchymaMedianADC > r[1]) {
				f := NewFinding(sa, IDADCOutOfRange, SeverityError)
				f.Message = fmt.Sprintf("parenchyma median ADC %s is outside the range of %s (%.2f-%s): "+
					"the ADC of the whole series is off, not of a region, as when the header b-value is not the weighting applied or b0 and DWI are scaled differently.",
					fmtADC(m.ParenchymaMedianADC), e.name, r[0]*1e3, fmtADC(r[1]))
				f.Measured = m.ParenchymaMedianADC
				f.Expected = []float64{r[0], r[1]}
				out = append(out, f)
			}
			if p.Head {
				if f, ok := csfFarFromFreeWater(sa, m, th, cfg.Thresholds.LowSNR.MinHighBSNR); ok {
					out = append(out, f)
				}
			}
		}
		ceiling := analysis.DefaultAnalyzeConfig().FreeWaterCeiling
		if v := m.FractionAboveFreeWater; !math.IsNaN(v) && v > th.MaxFractionAboveFreeWater {
			f := NewFinding(sa, IDADCOutOfRange, SeverityWarning)
			f.Message = fmt.Sprintf("%.1f%% of tissue voxels have an ADC above the free-water ceiling (%s by default), faster than water at body temperature, which no tissue is (limit %.1f%%): "+
				"the header b-value is probably above the weighting applied, or the b0 is brighter than it should be.",
				100*v, fmtADC(ceiling), 100*th.MaxFractionAboveFreeWater)
			f.Measured = v
			f.Expected = th.MaxFractionAboveFreeWater
			out = append(out, f)
		}
		if v := m.FractionNegative; !math.IsNaN(v) && v > th.MaxFractionNegative {
			f := NewFinding(sa, IDADCOutOfRange, SeverityWarning)
			f.Message = fmt.Sprintf("%.1f%% of tissue voxels have a negative ADC, the diffusion-weighted image brighter than the b0, more than noise explains (limit %.1f%%): "+
				"b0 and DWI may be swapped, mislabelled or scaled differently.", 100*v, 100*th.MaxFractionNegative)
			f.Measured = v
			f.Expected = th.MaxFractionNegative
			out = append(out, f)
		}
	}
	return out
}

// csfFarFromFreeWater judges the CSF ADC; minHighBSNR is low-snr's
// limit, below which the noise floor is named as a cause too.
//
// Where the CSF's diffusion-weighted signal is at the noise floor
// (analysis.Measures.CSFNote; Gudbjartsson & Patz, MRM 1995;34:910) the
// ADC there is a lower bound, not a value: the series gets an info note
// instead of an error, unless the lower bound itself is above free water
// beyond the tolerance, which the floor cannot explain (it only lowers
// the ADC).
func csfFarFromFreeWater(sa *SeriesAudit, m analysis.Measures, th ADCRangeThresholds, minHighBSNR float64) (Finding, bool) {
	if m.ADCVoxels == 0 {
		return Finding{}, false
	}
	share := float64(m.ADCVoxels-m.ParenchymaVoxels) / float64(m.ADCVoxels)
	if share < th.MinCSFShare {
		return Finding{}, false // the percentile would not lie in CSF
	}
	if math.IsNaN(m.CSFADC) {
		lb := m.CSFADCLowerBound
		if !math.IsNaN(lb) && lb/th.FreeWaterADC-1 > th.CSFTolerance {
			f := NewFinding(sa, IDADCOutOfRange, SeverityError)
			f.Message = fmt.Sprintf("CSF ADC is at least %s, %.0f%% above free water at 37 °C (%s, Holz 2000; tolerance ±%.0f%%), although its signal at b = %g is at the noise floor, which only lowers the ADC (Rician bias, Gudbjartsson & Patz 1995): "+
				"the weighting applied was stronger than the header b-value says (ADC scales as b_applied/b_header), or the pixel scaling of b0 and DWI differs.",
				fmtADC(lb), 100*(lb/th.FreeWaterADC-1), fmtADC(th.FreeWaterADC), 100*th.CSFTolerance, m.HighB)
			f.Measured = lb
			f.Expected = th.FreeWaterADC
			return f, true
		}
		if strings.HasPrefix(m.CSFNote, "CSF ADC not measurable") {
			f := NewFinding(sa, IDADCOutOfRange, SeverityInfo)
			f.Message = m.CSFNote + ": the CSF check against free water was not made."
			f.Measured = m.CSFDWSignalSigmas
			f.Expected = analysis.DefaultAnalyzeConfig().MeasurableSigmas
			return f, true
		}
		return Finding{}, false
	}
	rel := m.CSFADC/th.FreeWaterADC - 1
	if math.Abs(rel) <= th.CSFTolerance {
		return Finding{}, false
	}
	dir, cause := "below", "the weighting applied was weaker than the header b-value says (ADC scales as b_applied/b_header), or the pixel scaling of b0 and DWI differs"
	if rel > 0 {
		dir, cause = "above", "the weighting applied was stronger than the header b-value says (ADC scales as b_applied/b_header), or the pixel scaling of b0 and DWI differs"
	}
	if rel < 0 && m.HighBTissueSNR < minHighBSNR {
		cause += "; or, with the high-b signal near the noise floor here (see low-snr), the Rician bias lifts the dark CSF signal at high b and lowers its ADC"
	}
	evidence := ""
	if s := m.CSFDWSignalSigmas; s > 0 {
		evidence = fmt.Sprintf(" Its diffusion-weighted signal at b = %g is %.1f σ above zero (noise: %s), above the noise floor, so the value is measured, not a lower bound.", m.HighB, s, m.FloorNoise.Method)
	}
	f := NewFinding(sa, IDADCOutOfRange, SeverityError)
	f.Message = fmt.Sprintf("CSF ADC %s is %.0f%% %s free water at 37 °C (%s, Holz 2000; tolerance ±%.0f%%): "+
		"CSF diffuses almost like free water, so %s.%s",
		fmtADC(m.CSFADC), 100*math.Abs(rel), dir, fmtADC(th.FreeWaterADC), 100*th.CSFTolerance, cause, evidence)
	f.Measured = m.CSFADC
	f.Expected = th.FreeWaterADC
	return f, true
}
