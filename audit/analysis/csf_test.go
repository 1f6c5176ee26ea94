package analysis

import (
	"math"
	"strings"
	"testing"

	"dwiaudit/audit/adc"
)

// csfResult is a computed result of n voxels, all in the mask: a share
// csf of them CSF (b0 2000, ADC 3.0e-3 mm²/s, near free water at 37 °C,
// Holz 2000 via docs/references.md#holz-2000) whose highest-b signal is dw, the rest
// parenchyma (b0 600, ADC 0.7e-3, Helenius 2002 via docs/references.md#helenius-2002) with
// signal 300: the synthetic brain's values.
func csfResult(n int, csf float64, dw float32) *Result {
	res := &Result{
		HighB:      []BImage{{B: 1000, Trace: adc.NewVolume3(1, n, 1)}},
		ADC:        adc.NewVolume3(1, n, 1),
		B0:         adc.NewVolume3(1, n, 1),
		Mask:       make([]bool, n),
		Parenchyma: make([]bool, n),
	}
	k := int(math.Round(csf * float64(n)))
	for i := range n {
		res.Mask[i], res.Parenchyma[i] = true, i >= k
		res.B0.Data[i], res.ADC.Data[i], res.HighB[0].Trace.Data[i] = 600, 0.7e-3, 300
		if i < k {
			res.B0.Data[i], res.ADC.Data[i], res.HighB[0].Trace.Data[i] = 2000, 3.0e-3, dw
		}
	}
	return res
}

// TestCSFMeasureSitsOnBothSidesOfItsThresholds: the CSF ADC exists only
// with enough CSF (MinCSFShare) and with its diffusion-weighted signal
// at least MeasurableSigmas noise σ (the Rician floor, Gudbjartsson &
// Patz, MRM 1995;34:910); otherwise it is NaN with the reason.
func TestCSFMeasureSitsOnBothSidesOfItsThresholds(t *testing.T) {
	cfg := DefaultAnalyzeConfig()
	const sigma = 10.0
	cases := []struct {
		name     string
		share    float64
		dwSigmas float64
		defined  bool
		note     string
	}{
		{"CSF signal just above the floor gives a CSF ADC", 0.10, cfg.MeasurableSigmas * 1.1, true, ""},
		{"CSF signal just below the floor gives none, with a note", 0.10, cfg.MeasurableSigmas * 0.9, false, "CSF ADC not measurable at b = 1000: signal at the noise floor"},
		{"a CSF share just above the minimum gives a CSF ADC", cfg.MinCSFShare * 1.2, 10, true, ""},
		{"a CSF share just below the minimum gives none", cfg.MinCSFShare * 0.8, 10, false, "of the tissue mask is CSF"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res := csfResult(1000, c.share, float32(c.dwSigmas*sigma))
			m := undefinedMeasures()
			m.ADCVoxels = 1000
			m.FloorNoise = adc.NoiseEstimate{Sigma: sigma, Method: adc.NoiseBackgroundRayleigh}
			csfMeasure(&m, res, cfg, 3.0e-3)
			if got := !math.IsNaN(m.CSFADC); got != c.defined {
				t.Fatalf("CSF ADC %v (note %q), want defined %v", m.CSFADC, m.CSFNote, c.defined)
			}
			if !strings.Contains(m.CSFNote, c.note) || (c.note == "") != (m.CSFNote == "") {
				t.Errorf("note %q, want one containing %q", m.CSFNote, c.note)
			}
			if strings.Contains(c.note, "noise floor") && m.CSFADCLowerBound != 3.0e-3 {
				t.Errorf("lower bound %v, want the percentile 3.0e-3", m.CSFADCLowerBound)
			}
		})
	}
	t.Run("without a noise estimate the CSF ADC is not claimed measurable", func(t *testing.T) {
		res := csfResult(1000, 0.1, 100)
		m := undefinedMeasures()
		m.ADCVoxels = 1000
		csfMeasure(&m, res, cfg, 3.0e-3)
		if !math.IsNaN(m.CSFADC) || !strings.Contains(m.CSFNote, "no noise estimate") {
			t.Errorf("CSF ADC %v note %q", m.CSFADC, m.CSFNote)
		}
	})
}
