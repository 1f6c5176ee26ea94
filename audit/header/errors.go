package header

import "errors"

// Sentinel errors of package header. Every error ReadFile returns for a
// file it could open wraps one of them.
var (
	// ErrNotPart10: the file has no valid Part 10 envelope (preamble,
	// "DICM", file meta; PS3.10 7.1).
	ErrNotPart10 = errors.New("header: not a DICOM Part 10 file")

	// ErrUnknownTransferSyntax: the file meta names a transfer syntax the
	// data-set library does not know, so the data set is not parsed.
	ErrUnknownTransferSyntax = errors.New("header: transfer syntax unknown to the data-set parser")

	// ErrMalformed: the data set breaks its own encoding: a length past
	// the end of its container, a truncated element, sequences nested
	// deeper than maxDepth, or the parser failed or panicked.
	ErrMalformed = errors.New("header: malformed data set")
)
