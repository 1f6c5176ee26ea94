package dwi

import (
	"errors"
	"fmt"
	"math"
)

// Tolerances say how far header values may differ and still count as the
// same b-value, slice, orientation, pixel spacing or gradient direction.
type Tolerances struct {
	// BValue (s/mm^2) and BValueRelative (a fraction of b) together give
	// the b-value tolerance at b: max(BValue, BValueRelative*b). Sorted
	// b-values whose neighbours are at most that far apart form one
	// volume, whose nominal b-value is their mean.
	BValue, BValueRelative float64
	// SlicePosition (mm) is how far apart two images may lie, along the
	// slice normal or within the plane, and still be the same slice.
	SlicePosition float64
	// Orientation is the largest difference between corresponding Image
	// Orientation (Patient) direction cosines of the same geometry.
	Orientation float64
	// Spacing (mm) is the largest difference between pixel spacings of
	// the same geometry.
	Spacing float64
	// Direction (degrees) is the largest angle between two diffusion
	// gradient directions counted as one direction.
	Direction float64
	// B0Max (s/mm²) is the largest b-value that is a reference (b0)
	// weighting: its images need no gradient direction, and several of
	// them on one slice are repeats.
	B0Max float64
}

// DefaultTolerances returns the tolerances the audit uses unless
// configured otherwise:
//
//   - b-value: max(5 s/mm^2, 2% of b). Stored b-values differ slightly
//     from the nominal (a nominal 900 seen as 895-905, docs/references.md#bvalue-tolerance, common
//     practice); 2% at b = 900 is 18, three times that spread. The
//     absolute floor of 5 stays below half the smallest step between
//     nominal b-values in use, 10 s/mm^2 at the low end of IVIM protocols
//     (0, 10, 20, 30, ...; common practice), and 2% stays far below the
//     relative step between high b-values in use (800/1000, 1400/1500:
//     7% or more; common practice).
//   - slice position: 0.1 mm, a tenth of the thinnest clinical slices
//     (common practice) and far above the rounding of a DS position
//     (PS3.5 6.2: up to 16 characters, so micrometres or better).
//   - orientation: 0.001 per direction cosine, about 0.06 degrees: at
//     most a quarter pixel at the edge of a 250 mm field of view.
//   - pixel spacing: 0.001 mm, the same quarter pixel over 256 pixels.
//   - gradient direction: 1 degree: gradient directions are stored as FD
//     (PS3.3 C.8.13.5.9), differences from rounding are far smaller, and
//     even 256-direction schemes keep directions several degrees apart
//     (common practice).
//   - b0: b-values up to 50 s/mm² are the reference weighting (common
//     practice: body protocols use b 50 as their b0 to suppress
//     perfusion, docs/references.md#ivim). Only values within the b-value tolerance of
//     0 (5 s/mm²: a scanner's "b0" stored as 0.002 or 5) are shown as
//     0; a b 50 stays 50, since the ADC is computed against it.
func DefaultTolerances() Tolerances {
	return Tolerances{
		BValue:         5,
		BValueRelative: 0.02,
		SlicePosition:  0.1,
		Orientation:    1e-3,
		Spacing:        1e-3,
		Direction:      1,
		B0Max:          50,
	}
}

// Validate reports every tolerance that is negative or not a number.
func (t Tolerances) Validate() error {
	var errs []error
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"BValue", t.BValue}, {"BValueRelative", t.BValueRelative}, {"SlicePosition", t.SlicePosition},
		{"Orientation", t.Orientation}, {"Spacing", t.Spacing}, {"Direction", t.Direction}, {"B0Max", t.B0Max},
	} {
		if f.v < 0 || math.IsNaN(f.v) || math.IsInf(f.v, 0) {
			errs = append(errs, fmt.Errorf("%w: tolerance %s = %v", ErrInvalidOptions, f.name, f.v))
		}
	}
	return errors.Join(errs...)
}

// bTolerance is the b-value tolerance at b.
func (t Tolerances) bTolerance(b float64) float64 {
	return max(t.BValue, t.BValueRelative*math.Abs(b))
}
