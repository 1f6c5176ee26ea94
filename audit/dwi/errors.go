package dwi

import (
	"errors"
	"fmt"
)

// Sentinel errors of package dwi. Every error AssembleSeries and
// AssembleStudy return wraps one of them. (Reading files is
// audit/header's, with its own errors.)
var (
	// ErrMissingGeometry: an image that must be placed in a volume lacks
	// Image Position or Image Orientation (Patient) (or their Plane
	// Position and Plane Orientation functional groups), or its
	// orientation is not two unit vectors at right angles.
	ErrMissingGeometry = errors.New("dwi: image geometry missing")

	// ErrInvalidOptions: Tolerances that cannot work (a negative
	// tolerance).
	ErrInvalidOptions = errors.New("dwi: invalid options")

	// ErrNoImages: assembly was given no image it could place.
	ErrNoImages = errors.New("dwi: no images")

	// ErrMixedSeries: AssembleSeries was given images of more than one
	// series, or AssembleStudy images of more than one study.
	ErrMixedSeries = errors.New("dwi: images of more than one series or study")
)

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
