package phantom

import "errors"

// Sentinel errors, tested with errors.Is.
var (
	// ErrInvalidOptions means an Options field is out of range; the message
	// names every field at fault.
	ErrInvalidOptions = errors.New("phantom: invalid options")

	// ErrUnknownCase means Options.Case is not one of Cases().
	ErrUnknownCase = errors.New("phantom: unknown case")

	// ErrUnknownLayout means Options.Layout is not one of Layouts().
	ErrUnknownLayout = errors.New("phantom: unknown layout")

	// ErrOutputNotEmpty means the output folder exists and already holds
	// files: a study written over another would mix their series.
	ErrOutputNotEmpty = errors.New("phantom: output folder is not empty")
)
