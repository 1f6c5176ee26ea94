package header

import (
	"math"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// UIH (United Imaging) keeps the diffusion encoding of classic MR images
// in the private block of creator "Image Private Header" in group 0065
// (docs/makers.md has the sources; everything here was read off the
// UIH series of the public slice-timing QA set (dcm_qa_stc) and is from memory otherwise):
//
//   - (0065,xx09) FD: the b-value the scanner reports as applied (929.75
//     for a nominal 1000; the reference .bval lists it), and (0065,xx0A)
//     FD the nominal one. The applied one is used, as Diffusion b-value
//     is elsewhere.
//   - (0065,xx37) FD, three values: the gradient direction in the image
//     axes (rows, columns, slice normal): on the oblique reference series
//     it equals the reference's image-axis vector up to sign.
//   - A multi-slice single frame ("virtual frame", Image Type value 4
//     VFRAME) holds (0065,xx50) DS slices as tiles of a grid, filled row
//     by row, ceil(sqrt(n)) tiles across (the mosaic rule, common
//     practice), and (0065,xx51) SQ one item per slice with its Image
//     Position (Patient); the image itself has none.
const uihCreator = "Image Private Header"

// maxMosaicSlices caps the slices of one mosaic: a few hundred slices is
// far beyond any 2D diffusion acquisition (common practice: 30 to 100);
// more is a broken header.
const maxMosaicSlices = 1024

func uihReader() MakerReader {
	return MakerReader{
		Name:          "uih",
		Manufacturers: []string{"UIH", "UNITED IMAGING"},
		Creators:      []string{uihCreator},
		Read:          readUIH,
		Split:         splitUIH,
	}
}

func readUIH(im *MakerImage) (MakerDiffusion, error) {
	var d MakerDiffusion
	if e, _ := im.Private(uihCreator, 0x0065, 0x09); e != nil {
		v, err := e.Numbers(ValueFD)
		if err != nil || len(v) != 1 || v[0] < 0 {
			return d, im.Fail(e, "b-value %v unreadable: %v", v, err)
		}
		d.BValue, d.HasBValue = v[0], true
	}
	var g [3]float64
	hasG := false
	if e, _ := im.Private(uihCreator, 0x0065, 0x37); e != nil {
		v, err := e.Numbers(ValueFD)
		if err != nil || len(v) != 3 {
			return d, im.Fail(e, "gradient %v unreadable: %v", v, err)
		}
		g = [3]float64(v)
		if _, unit := unitVector(g); unit {
			d.Gradient, d.HasGradient = ImageToPatient(g, im.Frame.Geometry)
			hasG = true
		}
	}
	b, hasB := d.BValue, d.HasBValue
	if im.Frame.HasBValue {
		b, hasB = im.Frame.BValue, true
	}
	d.Directionality = directionalityOf(b, hasB, g, hasG)
	return d, nil
}

func splitUIH(im *MakerImage) (Mosaic, bool, error) {
	e, _ := im.Private(uihCreator, 0x0065, 0x50)
	if e == nil {
		return Mosaic{}, false, nil
	}
	v, err := e.Numbers(ValueDS)
	if err != nil || len(v) != 1 || v[0] != math.Trunc(v[0]) || v[0] < 1 || v[0] > maxMosaicSlices {
		return Mosaic{}, false, im.Fail(e, "slices in the image %v unreadable: %v", v, err)
	}
	n := int(v[0])
	if n == 1 {
		return Mosaic{}, false, nil
	}
	seq, _ := im.Private(uihCreator, 0x0065, 0x51)
	if seq == nil {
		return Mosaic{}, false, im.Fail(e, "%d slices and no slice positions", n)
	}
	items := seq.items()
	if len(items) != n {
		return Mosaic{}, false, im.Fail(seq, "%d slice positions for %d slices", len(items), n)
	}
	m := Mosaic{Slices: n, TilesAcross: int(math.Ceil(math.Sqrt(float64(n))))}
	down := (n + m.TilesAcross - 1) / m.TilesAcross
	g := im.Frame.Geometry
	if g.Rows%down != 0 || g.Columns%m.TilesAcross != 0 {
		return Mosaic{}, false, im.Fail(e, "%d slices do not tile a %dx%d image", n, g.Rows, g.Columns)
	}
	m.TileRows, m.TileColumns = g.Rows/down, g.Columns/m.TilesAcross
	for k, it := range items {
		p := it.floats(tag.ImagePositionPatient, ValueDS, im.bo)
		if len(p) != 3 {
			return Mosaic{}, false, im.Fail(seq, "slice %d has no Image Position (Patient)", k+1)
		}
		m.Positions = append(m.Positions, [3]float64(p))
	}
	return m, true, nil
}
