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
// But every GE image has (0043,xx39), fMRI and T1 included, with a first
// value of 0: a b-value of 0 is taken only from an image that says it is
// a diffusion acquisition, by (from a public comment of the maker's staff,
// docs/makers.md):
//
//   - (0021,xx5A) SL, creator "GEMS_RELA_01", "diffusion direction" of
//     the series: 0 for none, non-zero (16 for DTI) for a diffusion
//     series;
//   - (0043,xx30) SS, creator "GEMS_PARM_01", the image's kind: 14 the
//     T2 (b0) images, 16 the diffusion images, 18 FA, 19 the trace.
//
// On the public GE reference data the DTI series have 16 and 14/16,
// its fMRI and T1 series 0 and 0.
const (
	geParmCreator = "GEMS_PARM_01"
	geAcquCreator = "GEMS_ACQU_01"
	geRelaCreator = "GEMS_RELA_01"

	geKindT2        = 14
	geKindDiffusion = 16
	geKindFA        = 18
	geKindTrace     = 19

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

// geDiffusion says what the image says of itself: whether it is part of
// a diffusion acquisition, and its kind ((0043,xx30), 0 when absent).
func geDiffusion(im *MakerImage) (diffusion bool, kind int) {
	if e, _ := im.Private(geParmCreator, 0x0043, 0x30); e != nil {
		if v, err := e.Numbers(ValueSS); err == nil && len(v) == 1 {
			kind = int(v[0])
		}
	}
	switch kind {
	case geKindT2, geKindDiffusion, geKindFA, geKindTrace:
		return true, kind
	}
	if e, _ := im.Private(geRelaCreator, 0x0021, 0x5A); e != nil {
		if v, err := e.Numbers(ValueSL); err == nil && len(v) == 1 && v[0] != 0 {
			return true, kind
		}
	}
	return im.Frame.HasBValue, kind
}

func readGE(im *MakerImage) (MakerDiffusion, error) {
	var d MakerDiffusion
	diffusion, kind := geDiffusion(im)
	if e, _ := im.Private(geParmCreator, 0x0043, 0x39); e != nil {
		v, err := e.Numbers(ValueIS)
		if err != nil || len(v) == 0 {
			return d, im.Fail(e, "b-value (first of the slop integers) unreadable: %v", err)
		}
		d.BValue, d.HasBValue = geBValue(v[0])
		if !d.HasBValue {
			return d, im.Fail(e, "b-value %v is negative", v[0])
		}
		if d.BValue <= maxB0 && !diffusion {
			// Not a diffusion image: its 0 says nothing.
			return MakerDiffusion{}, nil
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
	switch {
	case kind == geKindTrace && hasB && b > maxB0:
		d.Directionality, d.HasGradient = dwi.DirectionalityIsotropic, false
	case n == 3:
		// Without the three components the image says nothing of its
		// direction; with them, a zero vector at b > 0 is the trace.
		d.Directionality = directionalityOf(b, hasB, g, hasG)
	case hasB && b <= maxB0:
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
