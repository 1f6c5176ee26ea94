// Package rules holds the checks dwiaudit runs on every diffusion series:
// each is a Rule, a pure function of an assembled, computed study (Study)
// and the configuration (Config: protocol expectations, physiological
// ranges, phantom profiles, per-rule settings) that returns Findings.
// Rules do no I/O.
//
// The parts:
//   - rule.go: the Rule interface, Finding, Severity, SeriesAudit, Study;
//   - config.go and validate.go: Config, its shipped defaults
//     (DefaultConfig, each value with its source), Validate, matching a
//     series to a protocol or phantom profile, Enabled and Apply;
//   - run.go: NewSeriesAudit (phantom profiles matched first), Run (the
//     enabled rules, a panicking rule turned into audit-failed findings,
//     severity overrides applied), NewFinding and AuditFailed;
//   - expect.go: what a series is held to, its protocol's values or, when
//     no protocol matches, defaults from physics alone;
//   - one file per rule: missingb0.go (missing-b0), bvalue.go
//     (bvalue-mismatch), directions.go (unknown-directions), incomplete.go (incomplete-series), geometry.go
//     (geometry-mismatch), adcrange.go (adc-out-of-range), hotspot.go
//     (b0-only-hotspot), lowsnr.go (low-snr), scanneradc.go
//     (scanner-adc-disagrees), phantomadc.go (phantom-adc-bias); all.go
//     lists them.
//
// Rules on the acquisition (b0, b-values, slices, geometry) judge every
// assembled series; rules on the computation judge only series whose
// maps exist (SeriesAudit.Computed). A series matched by a phantom
// profile is judged by the phantom rule, never by tissue ranges. The
// pipeline in package audit builds the Study, runs the rules and stores
// their findings; it emits audit-failed (AuditFailed) for series it
// could not read or compute.
//
// The auditor checks acquisitions; it does not diagnose. A finding says
// that an ADC map may not be trustworthy and why; clinical decisions rest
// with the radiologist and local policy.
package rules
