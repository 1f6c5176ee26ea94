package report

import "errors"

// Sentinel errors. Callers test for them with errors.Is; they come
// wrapped with detail.
var (
	// ErrBadDay means a day is not a calendar date YYYY-MM-DD.
	ErrBadDay = errors.New("report: day is not YYYY-MM-DD")

	// ErrBadRange means a compliance range is empty or reversed, or
	// longer than maxComplianceDays.
	ErrBadRange = errors.New("report: invalid date range")

	// errBadFormat means a format name is not one of text, csv, json,
	// html.
	errBadFormat = errors.New("report: unknown format")

	// errBadPatientIDMode means a patient ID mode is not masked, full or
	// hidden.
	errBadPatientIDMode = errors.New("report: unknown patient ID mode")

	// errBadRecord means a stored audit or frozen list could not be
	// decoded.
	errBadRecord = errors.New("report: unreadable record")
)
