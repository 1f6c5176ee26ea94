package preview

import (
	"errors"
	"fmt"
)

// Sentinel errors of package preview.
var (
	// ErrNoMaps: the series has no computed maps to draw (the
	// computation did not run; the error says why).
	ErrNoMaps = errors.New("preview: no computed maps")
	// errSliceRange: the slice asked for is not on the series' slice
	// grid. Render returns a *SliceRangeError that wraps it.
	errSliceRange = errors.New("preview: slice out of range")
)

// SliceRangeError says which slice was asked for and which exist.
type SliceRangeError struct {
	Slice  int // asked for
	Slices int // valid slices are 0..Slices-1
}

func (e *SliceRangeError) Error() string {
	if e.Slices == 0 {
		return fmt.Sprintf("%v: slice %d asked for, the series has no slices", errSliceRange, e.Slice)
	}
	return fmt.Sprintf("%v: slice %d asked for, valid slices are 0..%d", errSliceRange, e.Slice, e.Slices-1)
}

func (e *SliceRangeError) Unwrap() error { return errSliceRange }
