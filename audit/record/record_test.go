package record_test

import (
	"encoding/json"
	"math"
	"testing"

	"dwiaudit/audit/record"
)

func TestMeasuresRoundTripAndUndefinedValuesReadAsNil(t *testing.T) {
	in := record.Measures{
		SeriesNumber: 2, Protocol: "brain", BValues: []float64{0, 1000},
		TissueADCMedian: record.Finite(0.00079), CSFADC: record.Finite(math.NaN()), B0SNR: record.Finite(math.Inf(1)),
	}
	raw, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	got, ok, err := record.DecodeMeasures(raw)
	if err != nil || !ok {
		t.Fatalf("DecodeMeasures = %v, %v", ok, err)
	}
	if got.TissueADCMedian == nil || *got.TissueADCMedian != 0.00079 || got.CSFADC != nil || got.B0SNR != nil || got.PhantomADC != nil {
		t.Errorf("decoded %+v: want tissue 0.00079 and nil for NaN, infinity and the absent phantom ADC", got)
	}
	for _, empty := range []string{"", "null"} {
		if _, ok, err := record.DecodeMeasures(json.RawMessage(empty)); ok || err != nil {
			t.Errorf("DecodeMeasures(%q) = %v, %v; want not ok, no error", empty, ok, err)
		}
	}
	if _, _, err := record.DecodeMeasures(json.RawMessage(`{"b0_snr":"high"}`)); err == nil {
		t.Error("a measure of the wrong type decoded without error")
	}
}
