package header

import (
	"strings"

	"dwiaudit/audit/dwi"
)

// Philips keeps the diffusion encoding in private elements (docs/makers.md
// has the sources), in classic images at the top level and in Enhanced
// MR files in the frame's functional groups:
//
//   - (2001,xx03) FL, creator "Philips Imaging DD 001": the b-value.
//   - (2001,xx04) CS, same creator: a direction label. "I" is the
//     scanner's isotropic (trace) image, or the b0 when the b-value is 0;
//     "O" (oblique), "M", "P", "S" (measurement, phase, slice axes) are
//     one direction each. Images of other acquisitions carry (2001,xx03)
//     = 0 with an empty label; they get nothing from this reader.
//   - (2005,xxB0), (2005,xxB1), (2005,xxB2) FL, creator "Philips MR
//     Imaging DD 001": the gradient direction, right-left, anterior-
//     posterior, feet-head: patient axes, the same numbers as Diffusion
//     Gradient Orientation (0018,9089) where the scanner fills both (so
//     LPS, PS3.3 C.7.6.2.1.1).
const (
	philipsImagingCreator = "Philips Imaging DD 001"
	philipsMRCreator      = "Philips MR Imaging DD 001"
)

func philipsReader() MakerReader {
	return MakerReader{
		Name:          "philips",
		Manufacturers: []string{"PHILIPS"},
		Creators:      []string{philipsImagingCreator, philipsMRCreator},
		Read:          readPhilips,
	}
}

func readPhilips(im *MakerImage) (MakerDiffusion, error) {
	var d MakerDiffusion
	if e, _ := im.Private(philipsImagingCreator, 0x2001, 0x03); e != nil {
		v, err := e.Numbers(ValueFL)
		if err != nil || len(v) != 1 || v[0] < 0 {
			return d, im.Fail(e, "b-value %v unreadable: %v", v, err)
		}
		d.BValue, d.HasBValue = v[0], true
	}
	var g [3]float64
	n := 0
	for i, elem := range [3]uint8{0xB0, 0xB1, 0xB2} {
		e, _ := im.Private(philipsMRCreator, 0x2005, elem)
		if e == nil {
			break
		}
		v, err := e.Numbers(ValueFL)
		if err != nil || len(v) != 1 {
			return d, im.Fail(e, "gradient component unreadable: %v %v", v, err)
		}
		g[i] = v[0]
		n++
	}
	if n == 3 {
		if _, unit := unitVector(g); unit {
			d.Gradient, d.HasGradient = g, true
		}
	}
	b, hasB := d.BValue, d.HasBValue
	if im.Frame.HasBValue {
		b, hasB = im.Frame.BValue, true
	}
	label := ""
	if e, _ := im.Private(philipsImagingCreator, 0x2001, 0x04); e != nil {
		label = strings.ToUpper(strings.TrimSpace(strings.Join(e.Strings(), `\`)))
	}
	if label == "" && !(d.HasBValue && d.BValue > maxB0) {
		// Non-diffusion Philips images carry (2001,xx03) = 0 with an
		// empty label (the public Philips fMRI, T1 and perfusion
		// series): that 0 says nothing.
		return MakerDiffusion{}, nil
	}
	switch {
	case !hasB:
	case b <= maxB0:
		d.Directionality = dwi.DirectionalityNone
	case label == "I":
		d.Directionality = dwi.DirectionalityIsotropic
		d.HasGradient = false
	case label != "" || n == 3:
		d.Directionality = directionalityOf(b, true, g, n == 3)
	}
	return d, nil
}
