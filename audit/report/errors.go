package report

import "errors"

// Sentinel errors. Callers test for them with errors.Is; they come
// wrapped with detail.
var (
	// ErrBadDay means a day is not a calendar date YYYY-MM-DD.
	ErrBadDay = errors.New("report: day is not YYYY-MM-DD")

	// ErrBadRange means a compliance range is empty or reversed, or
	// longer than MaxComplianceDays.
	ErrBadRange = errors.New("report: invalid date range")

	// ErrBadFormat means a format name is not one of text, csv, json,
	// html.
	ErrBadFormat = errors.New("report: unknown format")

	// ErrBadPatientIDMode means a patient ID mode is not masked, full or
	// hidden.
	ErrBadPatientIDMode = errors.New("report: unknown patient ID mode")

	// ErrBadRecord means a stored audit or frozen list could not be
	// decoded.
	ErrBadRecord = errors.New("report: unreadable record")
)
