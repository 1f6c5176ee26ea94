package phantom

import (
	"math"
	"slices"
)

// Truth is what a study holds, voxel by voxel, on the DWI slice grid:
// voxel i = (slice*Rows + row)*Cols + col, row and column as in the
// images (PS3.3 C.7.6.2.1.1: columns along +x, rows along +y, slices
// along +z, the slice normal).
type Truth struct {
	Rows, Cols, Slices int
	PixelSpacing       float64   // mm, square pixels
	SliceThickness     float64   // mm, gapless
	SliceZ             []float64 // patient z of each DWI slice, mm (the Image Position's third value)

	Labels []uint8      // LabelBackground ... LabelSolid
	ADC    []float32    // true ADC (mean diffusivity, trace/3), mm^2/s
	Tensor [][3]float32 // diagonal diffusion tensor Dxx, Dyy, Dzz in patient axes, mm^2/s (all equal unless Options.Anisotropic)
	S0     []float32    // noiseless b0 signal of the tissue (no artifact), stored-pixel units

	// B0 is the noiseless b0 as written, planted artifact included, at the
	// b0's own slice positions B0SliceZ (which differ from SliceZ only in
	// the slice-positions-differ case); nil when the study has no b = 0.
	B0       []float32
	B0SliceZ []float64

	// AppliedB and HeaderB are the b-values of the images, ascending, in
	// pairs: the diffusion weighting actually applied to the pixels and
	// the b-value written in the header. They differ only in the
	// bvalue-header-wrong case and when Options.AppliedBScale is not 1.
	AppliedB, HeaderB []float64
	Directions        [][3]float64 // gradient directions of every non-zero b-value, patient axes

	SNR   float64 // as used (+Inf for noiseless)
	Sigma float64 // noise standard deviation per channel, stored-pixel units (0 for noiseless)

	// WaterADC is the true ADC of the ice-water phantom's water, mm^2/s;
	// 0 for the brain.
	WaterADC float64

	// ADCMapSlope is the Real World Value Mapping slope written on the
	// scanner ADC map, and ADCMapTrueSlope what it should have been
	// (both mm^2/s per stored unit); 0 when the study has no ADC map.
	ADCMapSlope, ADCMapTrueSlope float64

	// Planted lists the defects of the case; empty for a clean study.
	Planted []PlantedDefect
}

// PlantedDefect is one defect Write planted.
type PlantedDefect struct {
	Kind   Case
	Slices []int  // DWI slice indices affected; nil when the whole study is
	BBox   Box    // pixels affected (union over Slices); zero when not local
	Detail string // what was done, in words
}

// Box is a pixel rectangle, rows Row0 <= r < Row1 and columns
// Col0 <= c < Col1.
type Box struct{ Row0, Col0, Row1, Col1 int }

// Empty reports whether b contains no pixel.
func (b Box) Empty() bool { return b.Row1 <= b.Row0 || b.Col1 <= b.Col0 }

// Index is the voxel index of (row, col, slice).
func (t *Truth) Index(row, col, slice int) int {
	return (slice*t.Rows+row)*t.Cols + col
}

// Signal is the noiseless signal of voxel i at b-value b (applied) along
// unit gradient g, from S0 and Tensor; the zero g is the isotropic trace
// weighting S0 exp(-b ADC).
func (t *Truth) Signal(i int, b float64, g [3]float64) float64 {
	d := [3]float64{float64(t.Tensor[i][0]), float64(t.Tensor[i][1]), float64(t.Tensor[i][2])}
	return signal(float64(t.S0[i]), b, d, g)
}

// LabelCount counts the voxels with label l.
func (t *Truth) LabelCount(l uint8) int {
	n := 0
	for _, v := range t.Labels {
		if v == l {
			n++
		}
	}
	return n
}

// MedianADC is the median true ADC of the voxels labelled l, NaN when
// there are none.
func (t *Truth) MedianADC(l uint8) float64 {
	var v []float64
	for i, lab := range t.Labels {
		if lab == l {
			v = append(v, float64(t.ADC[i]))
		}
	}
	if len(v) == 0 {
		return math.NaN()
	}
	return median(v)
}

func median(v []float64) float64 {
	c := slices.Clone(v)
	slices.Sort(c)
	n := len(c)
	if n%2 == 1 {
		return c[n/2]
	}
	return (c[n/2-1] + c[n/2]) / 2
}
