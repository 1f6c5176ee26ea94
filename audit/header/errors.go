package header

import (
	"errors"
	"fmt"
)

// Sentinel errors of package header. Every error ReadFile, ExtractFile and
// Extract return for a file they could open wraps one of them; I/O errors
// are returned as they are.
var (
	// ErrNotPart10: the file has no valid Part 10 envelope (preamble,
	// "DICM", file meta; PS3.10 7.1).
	ErrNotPart10 = errors.New("header: not a DICOM Part 10 file")

	// ErrUnknownTransferSyntax: the file meta names a transfer syntax the
	// data-set library does not know, so the data set is not parsed.
	ErrUnknownTransferSyntax = errors.New("header: transfer syntax unknown to the data-set parser")

	// ErrMalformed: the data set breaks its own encoding: a length past
	// the end of its container, a truncated element, sequences nested
	// deeper than maxDepth, or the parser failed or panicked; or it
	// contradicts itself in a way that leaves the images undefined (a
	// per-frame functional group count that is not the Number of Frames).
	ErrMalformed = errors.New("header: malformed data set")

	// ErrPixelData: the pixel data cannot be the images the header
	// describes: its length is not Rows x Columns x Number of Frames x
	// Bits Allocated / 8, the element is cut short by the end of the
	// file, it is missing, or its encoding is one the audit does not
	// read (more than one sample per pixel, Bits Allocated not 8, 16 or
	// 32).
	ErrPixelData = errors.New("header: pixel data does not match the header")

	// ErrPrivateSource: a configured private source applies to the image
	// (its private creator is present) but its element is missing or
	// cannot be read the configured way. See PrivateSourceError.
	ErrPrivateSource = errors.New("header: private source unreadable")

	// ErrInvalidOptions: ExtractOptions that cannot work (a private
	// source in an even group, an unknown value kind).
	ErrInvalidOptions = errors.New("header: invalid options")
)

// ErrCSA: a Siemens CSA header (the private "CSA Image Header Info" or
// "CSA Series Header Info") breaks its own layout: a length past its
// end, a count past its cap, a wrong check word (csa.go).
var ErrCSA = errors.New("header: malformed Siemens CSA header")

// ErrMosaic: a mosaic image cannot hold the slices its header says it
// holds: the tile grid does not divide the image, or the count is out of
// range (mosaic.go).
var ErrMosaic = errors.New("header: mosaic does not match its image")

// PrivateSourceError says why a private source that applies to an image
// gave no value.
type PrivateSourceError struct {
	Source string // PrivateSource.Name
	Tag    string // the element it points at, "(gggg,xxee)"
	Reason string
}

func (e *PrivateSourceError) Error() string {
	return fmt.Sprintf("%v: source %q, element %s: %s", ErrPrivateSource, e.Source, e.Tag, e.Reason)
}

// Unwrap returns ErrPrivateSource.
func (e *PrivateSourceError) Unwrap() error { return ErrPrivateSource }
