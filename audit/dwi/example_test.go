package dwi_test

import (
	"fmt"

	"dwiaudit/audit/dwi"
)

// Images of one series, as extraction gives them, in any order, become
// volumes on one slice grid: here a b0 and three orthogonal b = 1000
// s/mm² directions over two axial slices, with the second slice of the
// y direction missing. Geometry follows PS3.3 C.7.6.2 (Image Position and
// Orientation (Patient)); the UIDs are invented under 2.25.
func ExampleAssembleSeries() {
	axial := [6]float64{1, 0, 0, 0, 1, 0}
	var frames []dwi.Frame
	add := func(n int, b float64, dir dwi.Direction, z float64) {
		f := dwi.Frame{
			SOPInstanceUID:    fmt.Sprintf("2.25.77.1.%d", n),
			StudyInstanceUID:  "2.25.77",
			SeriesInstanceUID: "2.25.77.1",
			SeriesNumber:      5,
			Modality:          "MR",
			InstanceNumber:    n,
			BValue:            b,
			HasBValue:         true,
			Directionality:    dwi.DirectionalityNone,
			Geometry: dwi.Geometry{Rows: 2, Columns: 2, PixelSpacing: [2]float64{1, 1},
				Position: [3]float64{0, 0, z}, Orientation: axial, SliceThickness: 5, Known: true},
			RescaleSlope: 1,
			Pixels:       []float32{100, 100, 100, 100},
		}
		if b > 0 {
			f.Directionality = dwi.DirectionalityDirectional
			f.Gradient, f.HasGradient = dir, true
		}
		frames = append(frames, f)
	}
	n := 0
	for _, z := range []float64{5, 0} { // sent top slice first
		for _, v := range []struct {
			b   float64
			dir dwi.Direction
		}{{0, dwi.Direction{}}, {1000, dwi.Direction{1, 0, 0}}, {1000, dwi.Direction{0, 1, 0}}, {1000, dwi.Direction{0, 0, 1}}} {
			n++
			if z == 5 && v.dir == (dwi.Direction{0, 1, 0}) {
				continue // lost on the way
			}
			add(n, v.b, v.dir, z)
		}
	}

	s, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("grid (mm along the normal):", s.Grid)
	for _, v := range s.Volumes {
		present := 0
		for _, f := range v.Slices {
			if f != nil {
				present++
			}
		}
		fmt.Printf("%v: %d of %d slices\n", v, present, len(v.Slices))
	}
	fmt.Println("b-values:", s.Facts.BValues)
	for _, m := range s.Facts.MissingSlices {
		fmt.Printf("missing: b=%g direction %v at %g mm\n", m.BValue, m.Direction, m.Position)
	}
	// Output:
	// grid (mm along the normal): [0 5]
	// b=0 isotropic: 2 of 2 slices
	// b=1000 (0.000,0.000,1.000): 2 of 2 slices
	// b=1000 (0.000,1.000,0.000): 1 of 2 slices
	// b=1000 (1.000,0.000,0.000): 2 of 2 slices
	// b-values: [0 1000]
	// missing: b=1000 direction [0 1 0] at 5 mm
}
