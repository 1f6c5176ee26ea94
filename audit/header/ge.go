package header

import (
	"math"

	"dwiaudit/audit/dwi"
)

// GE keeps the diffusion encoding of classic MR images in private
// elements (docs/makers.md has the sources):
//
//   - (0043,xx39) IS, creator "GEMS_PARM_01": the first of four values is
//     the b-value; some software versions add a large power of ten to it
//     (1000001000 for b = 1000).
//   - (0019,xxBB), (0019,xxBC), (0019,xxBD) DS, creator "GEMS_ACQU_01": the
//     gradient direction, in the image axes (along the rows, the columns,
//     the slice normal), not the patient's: on an oblique axial series of
//     the public GE reference data the stored vectors equal the
//     reference's image-axis vectors up to sign, where a patient-axis
//     vector would have been rotated.
//   - a b-value above 0 with a zero vector is the scanner's combined
//     (isotropic, trace) image.
//
// The b0 images of a DTI series carry no Diffusion b-value (0018,9087)
// while the diffusion-weighted ones do; (0043,xx39) gives them b = 0.
const (
	geParmCreator = "GEMS_PARM_01"
	geAcquCreator = "GEMS_ACQU_01"

	// geBValueOffset is the power of ten some GE versions add to the
	// b-value in (0043,xx39) (1000001000 for b = 1000; from a public
	// report of such files, docs/makers.md). No b-value in use comes
	// near it (common practice: clinical and research b-values stay
	// below 10^5 s/mm^2).
	geBValueOffset = 1e9
)

func geReader() MakerReader {
	return MakerReader{
		Name:          "ge",
		Manufacturers: []string{"GE"},
		Creators:      []string{geParmCreator, geAcquCreator},
		Read:          readGE,
	}
}

func readGE(im *MakerImage) (MakerDiffusion, error) {
	var d MakerDiffusion
	if e, _ := im.Private(geParmCreator, 0x0043, 0x39); e != nil {
		v, err := e.Numbers(ValueIS)
		if err != nil || len(v) == 0 {
			return d, im.Fail(e, "b-value (first of the slop integers) unreadable: %v", err)
		}
		d.BValue, d.HasBValue = geBValue(v[0])
		if !d.HasBValue {
			return d, im.Fail(e, "b-value %v is negative", v[0])
		}
	}
	var g [3]float64
	n := 0
	for i, elem := range [3]uint8{0xBB, 0xBC, 0xBD} {
		e, _ := im.Private(geAcquCreator, 0x0019, elem)
		if e == nil {
			break
		}
		v, err := e.Numbers(ValueDS)
		if err != nil || len(v) != 1 {
			return d, im.Fail(e, "gradient component unreadable: %v %v", v, err)
		}
		g[i] = v[0]
		n++
	}
	hasG := false
	if n == 3 {
		if _, unit := unitVector(g); unit {
			d.Gradient, d.HasGradient = ImageToPatient(g, im.Frame.Geometry)
			hasG = true
		}
	}
	b, hasB := d.BValue, d.HasBValue
	if im.Frame.HasBValue {
		b, hasB = im.Frame.BValue, true
	}
	if n == 3 {
		// Without the three components the image says nothing of its
		// direction; with them, a zero vector at b > 0 is the trace.
		d.Directionality = directionalityOf(b, hasB, g, hasG)
	} else if hasB && b <= maxB0 {
		d.Directionality = dwi.DirectionalityNone
	}
	return d, nil
}

// geBValue removes the power-of-ten offset from a (0043,xx39) b-value.
func geBValue(v float64) (float64, bool) {
	if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false
	}
	if v >= geBValueOffset {
		v = math.Mod(v, geBValueOffset)
	}
	return v, true
}
