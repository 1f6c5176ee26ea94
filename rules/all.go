package rules

// All returns every rule, in the order their findings are reported:
// what was acquired first (b0, b-values, directions, completeness,
// geometry), then what was computed (ADC range, b0-only hotspots, SNR,
// the scanner's map, phantoms). A fresh slice each call; the caller chooses which to
// run (Run skips those the configuration disables).
func All() []Rule {
	return []Rule{
		NewMissingB0(),
		NewBValueMismatch(),
		NewUnknownDirections(),
		NewIncompleteSeries(),
		NewGeometryMismatch(),
		NewADCOutOfRange(),
		NewB0OnlyHotspot(),
		NewLowSNR(),
		NewScannerADCDisagrees(),
		NewPhantomADCBias(),
	}
}
