// Package rules holds the checks dwiaudit runs on every diffusion series:
// each is a Rule, a pure function of an assembled, computed study (Study)
// and the configuration (Config: protocol expectations, physiological
// ranges, phantom profiles, per-rule settings) that returns Findings.
// Rules do no I/O; the pipeline in package audit runs them, stores their
// findings and recovers from a rule that panics.
//
// The auditor checks acquisitions; it does not diagnose. A finding says
// that an ADC map may not be trustworthy and why; clinical decisions rest
// with the radiologist and local policy.
package rules
