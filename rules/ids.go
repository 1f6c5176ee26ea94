package rules

// Rule IDs: the names findings carry and the configuration's rules:
// section uses (DESIGN.md, our own words). b0-only-hotspot's ID lives
// with its rule (hotspot.go).
const (
	IDMissingB0           = "missing-b0"
	IDBValueMismatch      = "bvalue-mismatch"
	IDADCOutOfRange       = "adc-out-of-range"
	IDIncompleteSeries    = "incomplete-series"
	IDGeometryMismatch    = "geometry-mismatch"
	IDLowSNR              = "low-snr"
	IDScannerADCDisagrees = "scanner-adc-disagrees"
	IDPhantomADCBias      = "phantom-adc-bias"
	IDUnknownDirections   = "unknown-directions"
	// IDAuditFailed is not a Rule: the pipeline (and Run, for a rule
	// that panics) emits it for a series it could not audit.
	IDAuditFailed = "audit-failed"
)
