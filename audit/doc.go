// Package audit is the audit engine of dwiaudit: it turns DICOM files
// (AuditFiles, for `dwiaudit check`) or images already read (AuditFrames,
// for the pipeline of a running node) into per-series measures and
// findings.
//
// The data flow, one direction:
//
//	files --(audit/header: identity)--> grouped by study
//	      --(audit/header: ExtractFile)--> frames with pixels
//	      --(audit/dwi: AssembleStudy)--> volumes on a slice grid, facts
//	      --(audit/analysis: Analyze)--> traces, ADC, eADC, masks, measures
//	      --(rules: every enabled Rule)--> findings
//
// The engine matches each series to a protocol and a phantom profile of
// the configuration, runs every enabled rule on the whole study (a rule
// that panics costs only its own check: the series get an audit-failed
// finding naming it and the other rules run), turns what could not be
// audited (unreadable files, a series that cannot be assembled or
// computed) into audit-failed findings, applies the configured severity
// overrides and orders the findings. Rules do no I/O; the engine does
// the reading.
//
// Memory: AuditFiles reads the headers of every file first, then one
// study at a time with its pixels, so that only one study's pixels and
// maps are held at once.
//
// The auditor checks acquisitions; it does not diagnose. Clinical
// decisions rest with the radiologist and local policy.
package audit
