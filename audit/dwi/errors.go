package dwi

import (
	"errors"
	"fmt"
)

// Sentinel errors of package dwi. Every error ExtractFile, Extract,
// AssembleSeries and AssembleStudy return for input they could read wraps
// one of them; I/O errors are returned as they are.
var (
	// ErrNotDICOM: no valid Part 10 envelope (preamble, "DICM", file
	// meta; PS3.10 7.1).
	ErrNotDICOM = errors.New("dwi: not a DICOM Part 10 file")

	// ErrUnsupportedTransferSyntax: the file meta names a transfer syntax
	// the data-set parser does not know; the data set is not parsed (the
	// parser would panic on it).
	ErrUnsupportedTransferSyntax = errors.New("dwi: transfer syntax not supported")

	// ErrMalformed: the data set breaks its own encoding (a length past
	// its container, a truncated element, a parser failure or panic) or
	// contradicts itself in a way that leaves the images undefined (a
	// per-frame functional group count that is not the Number of Frames).
	ErrMalformed = errors.New("dwi: malformed data set")

	// ErrPixelData: the pixel data cannot be the images the header
	// describes: its length is not Rows x Columns x Number of Frames x
	// Bits Allocated / 8, the element is cut short by the end of the
	// file, it is missing, or its encoding is one the audit does not
	// read (more than one sample per pixel, Bits Allocated not 8, 16 or
	// 32).
	ErrPixelData = errors.New("dwi: pixel data does not match the header")

	// ErrMissingGeometry: an image that must be placed in a volume lacks
	// Image Position or Image Orientation (Patient) (or their Plane
	// Position and Plane Orientation functional groups), or its
	// orientation is not two unit vectors at right angles.
	ErrMissingGeometry = errors.New("dwi: image geometry missing")

	// ErrPrivateSource: a configured private source applies to the image
	// (its private creator is present) but its element is missing or
	// cannot be read the configured way. See PrivateSourceError.
	ErrPrivateSource = errors.New("dwi: private source unreadable")

	// ErrInvalidOptions: ExtractOptions or Tolerances that cannot work
	// (a private source in an even group, a negative tolerance).
	ErrInvalidOptions = errors.New("dwi: invalid options")

	// ErrNoImages: assembly was given no image it could place.
	ErrNoImages = errors.New("dwi: no images")

	// ErrMixedSeries: AssembleSeries was given images of more than one
	// series, or AssembleStudy images of more than one study.
	ErrMixedSeries = errors.New("dwi: images of more than one series or study")
)

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

func (e *PrivateSourceError) Unwrap() error { return ErrPrivateSource }

// SeriesError is the failure of one series of a study: AssembleStudy
// keeps going with the others and lists it in Study.Failed.
type SeriesError struct {
	SeriesInstanceUID string
	SeriesNumber      int
	Err               error
}

func (e *SeriesError) Error() string {
	return fmt.Sprintf("series %d (%s): %v", e.SeriesNumber, e.SeriesInstanceUID, e.Err)
}

func (e *SeriesError) Unwrap() error { return e.Err }
