package header

import (
	"regexp"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/dwi"
)

// Canon (formerly Toshiba) classic MR images fill Diffusion b-value
// (0018,9087) and Diffusion Gradient Orientation (0018,9089) on recent
// software (the public Canon reference series do), but not always on all
// images (docs/makers.md has the sources):
//
//   - Some versions write the encoding only as text in Image Comments
//     (0020,4000), "b=1500(0.445,0.000,0.895)". The components are read
//     in the order a public report of such files gives, [Y, X, -Z] of
//     the patient axes (from memory; not checked on data here: which
//     images share a direction, and so the direction count, does not
//     depend on it).
//   - b0 images may carry no b-value at all. They count as b0 where the
//     image itself says it has no diffusion weighting: Image Comments
//     "b=0", a zero Diffusion Gradient Orientation, or Diffusion
//     Directionality NONE (PS3.3 C.8.13.5.9: "NONE" is no diffusion
//     weighting), or an image that says it is a diffusion acquisition
//     (Acquisition Contrast (0008,9209) or a value of Image Type
//     DIFFUSION, PS3.3 C.8.13.1.1.1): on older systems "the
//     DiffusionBValue (0018,9087) tag may be omitted for images where
//     the b-value is equal to zero" (the NA-MIC page, docs/makers.md).
//     An image with none of that evidence keeps no b-value, and
//     assembly reports it.
func canonReader() MakerReader {
	return MakerReader{
		Name:          "canon",
		Manufacturers: []string{"CANON", "TOSHIBA"},
		Read:          readCanon,
	}
}

// canonComment matches the diffusion text of a Canon Image Comments
// value: a b-value and, optionally, a parenthesised vector.
var canonComment = regexp.MustCompile(`(?i)\bb\s*=\s*([0-9]+(?:\.[0-9]*)?)\s*(?:\(\s*([-+0-9.eE]+)\s*,\s*([-+0-9.eE]+)\s*,\s*([-+0-9.eE]+)\s*\))?`)

func readCanon(im *MakerImage) (MakerDiffusion, error) {
	var d MakerDiffusion
	f := im.Frame
	if m := canonComment.FindStringSubmatch(im.Text(tag.ImageComments)); m != nil {
		if b, err := strconv.ParseFloat(m[1], 64); err == nil {
			d.BValue, d.HasBValue = b, true
		}
		if m[2] != "" {
			var c [3]float64
			ok := true
			for i := range c {
				v, err := strconv.ParseFloat(m[2+i], 64)
				c[i], ok = v, ok && err == nil
			}
			if ok {
				g := [3]float64{c[1], c[0], -c[2]}
				if _, unit := unitVector(g); unit {
					d.Gradient, d.HasGradient = g, true
				}
			}
		}
	}
	if !d.HasBValue && !f.HasBValue && f.Kind == dwi.KindAcquired {
		zeroGradient := f.HasGradient && f.Gradient == [3]float64{}
		if zeroGradient || f.Directionality == dwi.DirectionalityNone || diffusionContrast(f) {
			d.BValue, d.HasBValue = 0, true
		}
	}
	b, hasB := d.BValue, d.HasBValue
	if f.HasBValue {
		b, hasB = f.BValue, true
	}
	g, hasG := d.Gradient, d.HasGradient
	if f.HasGradient && f.Gradient != [3]float64{} {
		g, hasG = f.Gradient, true
	}
	if hasB && (b <= maxB0 || hasG) {
		// Without a direction a b > 0 image could be a trace or a
		// direction whose vector was not written: say nothing.
		d.Directionality = directionalityOf(b, hasB, g, hasG)
	}
	return d, nil
}

// diffusionContrast says whether f says it is a diffusion acquisition:
// Acquisition Contrast DIFFUSION (PS3.3 C.8.13.3.1.2) or an Image Type
// value DIFFUSION.
func diffusionContrast(f *dwi.Frame) bool {
	if strings.EqualFold(f.AcquisitionContrast, "DIFFUSION") {
		return true
	}
	for _, v := range f.ImageType {
		if strings.EqualFold(v, "DIFFUSION") {
			return true
		}
	}
	return false
}
