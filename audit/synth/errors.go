package synth

import "errors"

// Sentinel errors, tested with errors.Is.
var (
	// ErrInvalidSeries means a Series field is out of range (negative or
	// oversized matrix or slice count, a malformed UID, a negative or
	// non-finite b-value).
	ErrInvalidSeries = errors.New("synth: invalid series")

	// ErrUnsupportedTransferSyntax means the Series asks for a transfer
	// syntax other than Explicit or Implicit VR Little Endian.
	ErrUnsupportedTransferSyntax = errors.New("synth: unsupported transfer syntax")
)
