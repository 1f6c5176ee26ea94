package header

import (
	"testing"

	"dwiaudit/audit/dwi"
)

func TestCanonReader(t *testing.T) {
	for _, tt := range []struct {
		name     string
		extra    []el
		wantB    float64
		hasB     bool
		dir      dwi.Directionality
		gradient *[3]float64
	}{
		// Image Comments "b=1500(0.445,0.000,0.895)" with components in
		// the order [Y, X, -Z] (a public report, docs/makers.md).
		{"Image Comments give b and direction", []el{txt(0x00204000, "LT", "b=1500(0.600,0.000,0.800)")},
			1500, true, dwi.DirectionalityDirectional, &[3]float64{0, 0.6, -0.8}},
		{"Image Comments b=0 is a b0", []el{txt(0x00204000, "LT", "b=0")}, 0, true, dwi.DirectionalityNone, nil},
		// PS3.3 C.8.13.5.9: NONE is no diffusion weighting.
		{"Directionality NONE without a b-value is a b0", []el{txt(tDirectionality, "CS", "NONE")}, 0, true, dwi.DirectionalityNone, nil},
		{"a zero gradient without a b-value is a b0", []el{fd(tGradient, 0, 0, 0)}, 0, true, dwi.DirectionalityNone, nil},
		{"an image of a diffusion acquisition without a b-value is a b0", nil, 0, true, dwi.DirectionalityNone, nil}, // Image Type ORIGINAL\PRIMARY\DIFFUSION\NONE
		{"an image with no evidence keeps no b-value", nil, 0, false, dwi.DirectionalityUnknown, nil},
	} {
		t.Run(tt.name, func(t *testing.T) {
			m := img{plain: true, extra: tt.extra, imageType: []string{"ORIGINAL", "PRIMARY", "M", "SE"}}
			if tt.name == "an image of a diffusion acquisition without a b-value is a b0" {
				m.imageType = nil // the encoder's ORIGINAL\PRIMARY\DIFFUSION\NONE
			}
			s := newSeries("canon", m)
			s.manufacturer = "TOSHIBA"
			f := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{})[0]
			if f.HasBValue != tt.hasB || f.BValue != tt.wantB || f.Directionality != tt.dir || (tt.hasB && f.BValueSource != "maker:canon") {
				t.Errorf("b %v (%v) from %q, %v; want %v (%v) from maker:canon, %v", f.BValue, f.HasBValue, f.BValueSource, f.Directionality, tt.wantB, tt.hasB, tt.dir)
			}
			if tt.gradient != nil && (!f.HasGradient || !near3(f.Gradient, *tt.gradient, 1e-12)) {
				t.Errorf("gradient %v (%v), want %v", f.Gradient, f.HasGradient, *tt.gradient)
			}
		})
	}
	t.Run("a series whose b0 images carry no b-value is not missing its b0", func(t *testing.T) {
		var images []img
		for sl := range 2 {
			images = append(images, img{b: 0, noB: true, slice: float64(sl)}) // Directionality NONE only
			for _, d := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} {
				images = append(images, img{b: 1000, dir: d, slice: float64(sl)})
			}
		}
		s := newSeries("canondti", images...)
		s.manufacturer = "CANON_MEC"
		var frames []dwi.Frame
		for _, data := range s.classic(t, tsExplicitLE) {
			frames = append(frames, extractOne(t, data, ExtractOptions{})...)
		}
		as, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(as.Facts.BValues) != 2 || as.Facts.BValues[0] != 0 || len(as.Facts.NoBValue) != 0 {
			t.Errorf("facts %+v, want b 0 and 1000", as.Facts)
		}
	})
}
