package synth

import "errors"

// Sentinel errors, tested with errors.Is.
var (
	// errInvalidSeries means a Series field is out of range (negative or
	// oversized matrix or slice count, a malformed UID, a negative or
	// non-finite b-value).
	errInvalidSeries = errors.New("synth: invalid series")

	// errUnsupportedTransferSyntax means the Series asks for a transfer
	// syntax other than Explicit or Implicit VR Little Endian.
	errUnsupportedTransferSyntax = errors.New("synth: unsupported transfer syntax")
)
