package rules

import (
	"fmt"
	"math"
)

// lowSNR is rule low-snr: the images are too noisy for the ADC.
//
//   - b0 SNR (warning): the median parenchyma b0 signal over the noise σ
//     below thresholds.low_snr.min_b0_snr; the voxel ADC scatters widely
//     (the message gives the spread, (1/b)·sqrt(1/SNR0² + 1/SNRb²), the
//     propagation of noise through ln(S0/Sb)/b).
//   - High-b tissue SNR (error): tissue at the highest b-value near the
//     noise floor (below min_high_b_snr, about 3; docs/references.md#rician-floor). Magnitude
//     images are biased up there (Gudbjartsson & Patz, MRM 1995;34:910),
//     so the ADC is biased low, which looks like restriction.
//
// Phantom series are judged too: a noisy phantom measurement is as
// untrustworthy as a noisy patient one.
type lowSNR struct{}

// NewLowSNR returns rule low-snr.
func NewLowSNR() Rule { return lowSNR{} }

func (lowSNR) ID() string { return IDLowSNR }

func (lowSNR) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	th := cfg.Thresholds.LowSNR
	for _, sa := range st.Series {
		if !sa.Computed() {
			continue
		}
		m := sa.Result.Measures
		b := m.HighB - sa.Result.B0Value
		if v := m.B0SNR; !math.IsNaN(v) && v < th.MinB0SNR {
			f := NewFinding(sa, IDLowSNR, SeverityWarning)
			spread := ""
			if hb := m.HighBTissueSNR; hb > 0 && v > 0 && b > 0 {
				s := math.Sqrt(1/(v*v)+1/(hb*hb)) / b
				spread = fmt.Sprintf(": at this SNR a tissue voxel's ADC scatters by about ±%s (noise through ln(S0/Sb)/b at b = %g)", fmtADC(s), b)
			}
			f.Message = fmt.Sprintf("b0 SNR %.1f (median parenchyma signal over the background noise σ) is below %g%s, so voxel ADC values and the tissue mask are unreliable.",
				v, th.MinB0SNR, spread)
			f.Measured = v
			f.Expected = th.MinB0SNR
			out = append(out, f)
		}
		if v := m.HighBTissueSNR; !math.IsNaN(v) && v < th.MinHighBSNR {
			f := NewFinding(sa, IDLowSNR, SeverityError)
			f.Message = fmt.Sprintf("tissue signal at b = %g s/mm² is only %.1f times the noise σ (limit %g): near the noise floor magnitude images are biased up (Rician noise, Gudbjartsson & Patz 1995), "+
				"so the diffusion-weighted signal reads too high and the ADC too low, which mimics restriction.",
				m.HighB, v, th.MinHighBSNR)
			f.Measured = v
			f.Expected = th.MinHighBSNR
			out = append(out, f)
		}
	}
	return out
}
