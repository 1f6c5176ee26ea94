package header

import (
	"testing"

	"dwiaudit/audit/dwi"
)

// geImage is a GE classic DWI image as the public GE reference series
// write them (docs/makers.md): (0043,xx39) of GEMS_PARM_01 holds the
// b-value first, (0019,xxBB/BC/BD) of GEMS_ACQU_01 the gradient in image
// axes; b0 images carry no Diffusion b-value (0018,9087), the others do.
// (0021,xx5A) of GEMS_RELA_01 is 16 (DTI) and (0043,xx30) 14 (T2) or 16
// (diffusion), as in those series.
func geImage(slopInts []string, g [3]float64, slice float64, standardB *float64) img {
	kind := uint16(16)
	if slopInts[0] == "0" {
		kind = 14
	}
	extra := []el{
		txt(0x00190010, "LO", "GEMS_ACQU_01"),
		ds(0x001910BB, g[0]), ds(0x001910BC, g[1]), ds(0x001910BD, g[2]),
		txt(0x00210010, "LO", "GEMS_RELA_01"),
		{tag: 0x0021105A, vr: "SL", u32: []uint32{16}},
		txt(0x00430010, "LO", "GEMS_PARM_01"),
		{tag: 0x00431030, vr: "SS", u16: []uint16{kind}},
		txt(0x00431039, "IS", slopInts...),
	}
	if standardB != nil {
		extra = append(extra, fd(tBValue, *standardB))
	}
	return img{plain: true, slice: slice, extra: extra}
}

func geSeries(name string, images ...img) testSeries {
	s := newSeries(name, images...)
	s.manufacturer = "GE MEDICAL SYSTEMS"
	return s
}

func TestGEReader(t *testing.T) {
	b1000 := 1000.0
	x := [3]float64{1, 0, 0}
	for _, tt := range []struct {
		name     string
		m        img
		wantB    float64
		source   string
		dir      dwi.Directionality
		gradient *[3]float64
	}{
		{"a b0 without (0018,9087) is b0 from (0043,xx39)", geImage([]string{"0", "8", "0", "0"}, [3]float64{}, 0, nil),
			0, "maker:ge", dwi.DirectionalityNone, nil},
		{"a weighted image keeps its standard b-value and gains its direction", geImage([]string{"1000", "8", "0", "0"}, x, 0, &b1000),
			1000, "standard", dwi.DirectionalityDirectional, &[3]float64{0, 1, 0}},
		// A public report of GE files gives "1000001000\8\0\0" for
		// b = 1000 (docs/makers.md).
		{"the power-of-ten offset of some versions is removed", geImage([]string{"1000001000", "8", "0", "0"}, x, 0, nil),
			1000, "maker:ge", dwi.DirectionalityDirectional, &[3]float64{0, 1, 0}},
		// A b-value with a zero vector is GE's combined (isotropic)
		// image (public report, docs/makers.md).
		{"a b-value with a zero vector is the trace", geImage([]string{"1000", "8", "0", "0"}, [3]float64{}, 0, &b1000),
			1000, "standard", dwi.DirectionalityIsotropic, nil},
	} {
		for _, ts := range []string{tsExplicitLE, tsImplicitLE} {
			t.Run(tt.name+" in "+ts, func(t *testing.T) {
				s := geSeries("ge", tt.m)
				// Rows along +y, columns along +x (PS3.3 C.7.6.2.1.1):
				// the image-axis vector (1,0,0) is patient (0,1,0).
				s.orientation = [6]float64{0, 1, 0, 1, 0, 0}
				f := extractOne(t, s.classic(t, ts)[0], ExtractOptions{})[0]
				if !f.HasBValue || f.BValue != tt.wantB || f.BValueSource != tt.source || f.Directionality != tt.dir {
					t.Errorf("b %v (%v) from %q, %v; want %v from %q, %v", f.BValue, f.HasBValue, f.BValueSource, f.Directionality, tt.wantB, tt.source, tt.dir)
				}
				if tt.gradient != nil && (!f.HasGradient || !near3(f.Gradient, *tt.gradient, 1e-12)) {
					t.Errorf("gradient %v (%v), want %v", f.Gradient, f.HasGradient, *tt.gradient)
				}
				if tt.gradient == nil && f.HasGradient {
					t.Errorf("gradient %v, want none", f.Gradient)
				}
			})
		}
	}
	t.Run("a DTI series assembles into its b0 and directions", func(t *testing.T) {
		var images []img
		dirs := [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {0.6, 0.8, 0}}
		for sl := range 3 {
			images = append(images, geImage([]string{"0", "8", "0", "0"}, [3]float64{}, float64(sl), nil))
			for _, d := range dirs {
				images = append(images, geImage([]string{"1000", "8", "0", "0"}, d, float64(sl), &b1000))
			}
		}
		var frames []dwi.Frame
		for _, data := range geSeries("gedti", images...).classic(t, tsExplicitLE) {
			frames = append(frames, extractOne(t, data, ExtractOptions{})...)
		}
		s, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Facts.BValues) != 2 || s.Facts.BValues[0] != 0 || len(s.Facts.Directions[s.Facts.BValues[1]]) != 4 || len(s.Facts.NoBValue) != 0 || len(s.Facts.Duplicates) != 0 {
			t.Errorf("facts %+v, want b 0 and 1000 with 4 directions", s.Facts)
		}
	})
	t.Run("a GE image of no diffusion acquisition gets no b-value from its 0", func(t *testing.T) {
		// The public GE fMRI and T1 series: (0043,xx39) "0\...", kind 0,
		// diffusion direction 0.
		m := img{plain: true, extra: []el{
			txt(0x00210010, "LO", "GEMS_RELA_01"), {tag: 0x0021105A, vr: "SL", u32: []uint32{0}},
			txt(0x00430010, "LO", "GEMS_PARM_01"), {tag: 0x00431030, vr: "SS", u16: []uint16{0}},
			txt(0x00431039, "IS", "0", "1342177280", "0", "0"),
		}}
		for _, ts := range []string{tsExplicitLE, tsImplicitLE} {
			if f := extractOne(t, geSeries("gefmri", m).classic(t, ts)[0], ExtractOptions{})[0]; f.HasBValue || f.Directionality != dwi.DirectionalityUnknown {
				t.Errorf("%s: b %v from %q, %v; want none", ts, f.BValue, f.BValueSource, f.Directionality)
			}
		}
	})
	t.Run("another maker's image with the GE creators is not read", func(t *testing.T) {
		s := geSeries("notge", geImage([]string{"0", "8", "0", "0"}, [3]float64{}, 0, nil))
		s.manufacturer = "Synthetic"
		if f := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{})[0]; f.HasBValue {
			t.Errorf("b %v from %q, want none", f.BValue, f.BValueSource)
		}
	})
}
