package preview

import (
	"image/color"
	"math"
)

// viridisAnchor is one entry of the published viridis table: its index
// (0..255) and its sRGB components in 0..1.
type viridisAnchor struct {
	i       int
	r, g, b float64
}

// viridisAnchors are every 8th entry, and the last, of viridis: a
// perceptually uniform colour scale (lightness L* rises steadily, and
// it reads the same to the common colour-vision deficiencies) designed
// by Stéfan van der Walt and Nathaniel J. Smith in 2015 and released
// under CC0 (public domain). Values copied from the 256-entry table as
// published with matplotlib (lib/matplotlib/_cm_listed.py,
// _viridis_data), 6 decimals as there.
var viridisAnchors = [...]viridisAnchor{
	{0, 0.267004, 0.004874, 0.329415},
	{8, 0.277018, 0.050344, 0.375715},
	{16, 0.282327, 0.094955, 0.417331},
	{24, 0.282884, 0.135920, 0.453427},
	{32, 0.278826, 0.175490, 0.483397},
	{40, 0.270595, 0.214069, 0.507052},
	{48, 0.258965, 0.251537, 0.524736},
	{56, 0.244972, 0.287675, 0.537260},
	{64, 0.229739, 0.322361, 0.545706},
	{72, 0.214298, 0.355619, 0.551184},
	{80, 0.199430, 0.387607, 0.554642},
	{88, 0.185556, 0.418570, 0.556753},
	{96, 0.172719, 0.448791, 0.557885},
	{104, 0.160665, 0.478540, 0.558115},
	{112, 0.149039, 0.508051, 0.557250},
	{120, 0.137770, 0.537492, 0.554906},
	{128, 0.127568, 0.566949, 0.550556},
	{136, 0.120565, 0.596422, 0.543611},
	{144, 0.120638, 0.625828, 0.533488},
	{152, 0.132268, 0.655014, 0.519661},
	{160, 0.157851, 0.683765, 0.501686},
	{168, 0.196571, 0.711827, 0.479221},
	{176, 0.246070, 0.738910, 0.452024},
	{184, 0.304148, 0.764704, 0.419943},
	{192, 0.369214, 0.788888, 0.382914},
	{200, 0.440137, 0.811138, 0.340967},
	{208, 0.515992, 0.831158, 0.294279},
	{216, 0.595839, 0.848717, 0.243329},
	{224, 0.678489, 0.863742, 0.189503},
	{232, 0.762373, 0.876424, 0.137064},
	{240, 0.845561, 0.887322, 0.099702},
	{248, 0.926106, 0.897330, 0.104071},
	{255, 0.993248, 0.906157, 0.143936},
}

// Viridis is the 256-entry viridis lookup table in 8-bit sRGB: the
// anchors exactly, the entries between them by cubic Hermite
// interpolation with tangents from the neighbouring anchors. Checked
// against the whole published table while writing it: no component
// differs by more than 1 in 255.
type Viridis [256]color.RGBA

// newViridis builds the table.
func newViridis() *Viridis {
	var v Viridis
	a := viridisAnchors[:]
	last := len(a) - 1
	slope := func(j, k int) [3]float64 {
		d := float64(a[k].i - a[j].i)
		return [3]float64{(a[k].r - a[j].r) / d, (a[k].g - a[j].g) / d, (a[k].b - a[j].b) / d}
	}
	for j := 0; j < last; j++ {
		p1, p2 := a[j], a[j+1]
		h := float64(p2.i - p1.i)
		// Tangents (per index) by central differences over the
		// neighbouring anchors, one-sided at the ends.
		m1 := slope(max(j-1, 0), j+1)
		m2 := slope(j, min(j+2, last))
		c1 := [3]float64{p1.r, p1.g, p1.b}
		c2 := [3]float64{p2.r, p2.g, p2.b}
		for i := p1.i; i <= p2.i; i++ {
			t := float64(i-p1.i) / h
			t2, t3 := t*t, t*t*t
			var rgb [3]uint8
			for k := range 3 {
				x := (2*t3-3*t2+1)*c1[k] + (t3-2*t2+t)*h*m1[k] + (-2*t3+3*t2)*c2[k] + (t3-t2)*h*m2[k]
				rgb[k] = unit8(x)
			}
			v[i] = color.RGBA{rgb[0], rgb[1], rgb[2], 255}
		}
	}
	return &v
}

// unit8 turns 0..1 into 0..255, rounded, clipped.
func unit8(x float64) uint8 {
	return uint8(math.Round(255 * min(max(x, 0), 1)))
}

// At returns the colour of t in 0..1 (clipped; NaN gives the first).
func (v *Viridis) At(t float64) color.RGBA {
	if !(t > 0) {
		return v[0]
	}
	if t >= 1 {
		return v[255]
	}
	return v[int(math.Round(t*255))]
}
