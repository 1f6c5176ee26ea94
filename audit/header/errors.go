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

// ErrCSA: a Siemens CSA header (the private "CSA Image Header Info" or
// "CSA Series Header Info") breaks its own layout: a length past its
// end, a count past its cap, a wrong check word (csa.go).
var ErrCSA = errors.New("header: malformed Siemens CSA header")

// ErrMosaic: a mosaic image cannot hold the slices its header says it
// holds: the tile grid does not divide the image, or the count is out of
// range (mosaic.go).
var ErrMosaic = errors.New("header: mosaic does not match its image")
