package record

import (
	"encoding/json"
	"math"
)

// Measures is a series' measures as stored: ADC in mm²/s, SNR as a
// ratio, shares as fractions; a nil pointer is a measure that is
// undefined (not computed, or not finite).
type Measures struct {
	SeriesNumber      int       `json:"series_number"`
	SeriesDescription string    `json:"series_description"`
	Protocol          string    `json:"protocol"` // the protocol or phantom profile matched; "" when none
	BValues           []float64 `json:"bvalues"`
	// TissueADCMedian and CSFADC are tissue measures: nil for a phantom
	// series (its measures are the Phantom ones) and CSFADC nil where
	// the series has too little CSF or its CSF signal is at the noise
	// floor, CSFADCNote saying which.
	TissueADCMedian        *float64 `json:"tissue_adc_median"`
	CSFADC                 *float64 `json:"csf_adc"`
	CSFADCNote             string   `json:"csf_adc_note,omitempty"`
	B0SNR                  *float64 `json:"b0_snr"`
	HighBTissueSNR         *float64 `json:"high_b_tissue_snr"`
	FractionAboveFreeWater *float64 `json:"fraction_above_free_water"`
	FractionNegative       *float64 `json:"fraction_negative"`
	CannotCompute          string   `json:"cannot_compute,omitempty"`
	// PhantomADC is the central-region ADC of a phantom series and
	// PhantomExpectedADC its profile's value (mm²/s); absent otherwise.
	PhantomADC         *float64 `json:"phantom_adc,omitempty"`
	PhantomExpectedADC *float64 `json:"phantom_expected_adc,omitempty"`
	// PhantomUniformity is the ADC uniformity of a phantom's water
	// (rules.PhantomADCUniformity, 1 perfectly uniform); absent
	// otherwise.
	PhantomUniformity *float64 `json:"phantom_uniformity,omitempty"`
	// Volumes is the series' gradient table; absent in audits stored
	// before it was kept.
	Volumes []Volume `json:"volumes,omitempty"`
	// Derived lists the study's series of derived maps the audit does
	// not use (FA, colour FA, tensor b0), kept with every audited series
	// of the study so that the study page can name them.
	Derived []Derived `json:"derived,omitempty"`
}

// Derived is a series of derived maps, listed and not audited.
type Derived struct {
	SeriesUID    string `json:"series_uid"`
	SeriesNumber int    `json:"series_number"`
	Kind         string `json:"kind"` // "FA map", "colour FA map", "tensor b0", ...
	Images       int    `json:"images"`
}

// Volume is one row of a series' gradient table, as `dwiaudit check
// --format json` prints it and the study page shows it.
type Volume struct {
	// BValue is the nominal b-value (0, 1000), BValueMeasured the mean of
	// what the images carry, s/mm².
	BValue         float64 `json:"bvalue"`
	BValueMeasured float64 `json:"bvalue_measured"`
	// Kind is "b0", "direction", "trace" or "isotropic" (dwi.Weighting).
	Kind string `json:"kind"`
	// Direction is the unit gradient direction in patient axes; null
	// for a kind without one.
	Direction *[3]float64 `json:"direction"`
	// Images counts the images, repeats included; Slices the slice
	// positions they cover.
	Images int `json:"images"`
	Slices int `json:"slices"`
}

// Finite returns a pointer to v, or nil when v is NaN or infinite (JSON
// cannot hold those; the reader sees an undefined measure).
func Finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// DecodeMeasures reads stored measures; empty or "null" gives ok false.
func DecodeMeasures(raw json.RawMessage) (m Measures, ok bool, err error) {
	if len(raw) == 0 || string(raw) == "null" {
		return Measures{}, false, nil
	}
	if err := json.Unmarshal(raw, &m); err != nil {
		return Measures{}, false, err
	}
	return m, true, nil
}
