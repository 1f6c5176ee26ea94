package header

import (
	"testing"

	"dwiaudit/audit/dwi"
)

// philipsImage is a Philips classic DWI image with only the private
// encoding, as the public Philips reference series without standard
// attributes write it (docs/makers.md): (2001,xx03) FL b-value and
// (2001,xx04) CS label of "Philips Imaging DD 001", (2005,xxB0-B2) FL
// gradient of "Philips MR Imaging DD 001" (here in block 0x10 and 0x11:
// the block is found through the creator, PS3.5 7.8.1).
func philipsImage(b float32, label string, g [3]float32, slice float64) img {
	return img{plain: true, slice: slice, extra: []el{
		txt(0x20010010, "LO", "Philips Imaging DD 001"),
		{tag: 0x20011003, vr: "FL", f32: []float32{b}},
		txt(0x20011004, "CS", label),
		txt(0x20050010, "LO", "Philips MR Imaging DD 002"),
		txt(0x20050011, "LO", "Philips MR Imaging DD 001"),
		{tag: 0x200511B0, vr: "FL", f32: []float32{g[0]}},
		{tag: 0x200511B1, vr: "FL", f32: []float32{g[1]}},
		{tag: 0x200511B2, vr: "FL", f32: []float32{g[2]}},
	}}
}

func philipsSeries(name string, images ...img) testSeries {
	s := newSeries(name, images...)
	s.manufacturer = "Philips Medical Systems"
	return s
}

func TestPhilipsReader(t *testing.T) {
	for _, tt := range []struct {
		name     string
		m        img
		wantB    float64
		dir      dwi.Directionality
		gradient *[3]float64
	}{
		{"label I at b = 0 is the b0", philipsImage(0, "I", [3]float32{}, 0), 0, dwi.DirectionalityNone, nil},
		{"label I at b > 0 is the scanner's trace", philipsImage(1000, "I", [3]float32{}, 0), 1000, dwi.DirectionalityIsotropic, nil},
		// The gradient is in patient axes: the Vanderbilt reference
		// series stores the same numbers in (0018,9089) (docs/makers.md).
		{"label O is one direction, in patient axes as stored", philipsImage(1000, "O", [3]float32{0, 0.6, 0.8}, 0), 1000, dwi.DirectionalityDirectional, &[3]float64{0, 0.6, 0.8}},
	} {
		for _, ts := range []string{tsExplicitLE, tsImplicitLE} {
			t.Run(tt.name+" in "+ts, func(t *testing.T) {
				s := philipsSeries("ph", tt.m)
				s.orientation = [6]float64{0, 1, 0, 1, 0, 0} // not used: patient axes are not converted
				f := extractOne(t, s.classic(t, ts)[0], ExtractOptions{})[0]
				if !f.HasBValue || f.BValue != tt.wantB || f.BValueSource != "maker:philips" || f.Directionality != tt.dir {
					t.Errorf("b %v (%v) from %q, %v; want %v from maker:philips, %v", f.BValue, f.HasBValue, f.BValueSource, f.Directionality, tt.wantB, tt.dir)
				}
				if tt.gradient != nil && (!f.HasGradient || !near3(f.Gradient, *tt.gradient, 1e-6)) {
					t.Errorf("gradient %v (%v), want %v", f.Gradient, f.HasGradient, *tt.gradient)
				}
				if tt.gradient == nil && f.HasGradient {
					t.Errorf("gradient %v, want none", f.Gradient)
				}
			})
		}
	}
	t.Run("a non-diffusion image's 0 with an empty label gives nothing", func(t *testing.T) {
		// The public Philips fMRI series: (2001,xx03) FL 0, (2001,xx04)
		// empty.
		m := philipsImage(0, "", [3]float32{}, 0)
		m.extra[2] = el{tag: 0x20011004, vr: "CS", raw: []byte{}}
		f := extractOne(t, philipsSeries("phfmri", m).classic(t, tsExplicitLE)[0], ExtractOptions{})[0]
		if f.HasBValue || f.Directionality != dwi.DirectionalityUnknown {
			t.Errorf("b %v from %q, %v; want none", f.BValue, f.BValueSource, f.Directionality)
		}
	})
	t.Run("a standard b-value wins over the private one", func(t *testing.T) {
		m := philipsImage(1000, "O", [3]float32{1, 0, 0}, 0)
		m.extra = append(m.extra, fd(tBValue, 995))
		f := extractOne(t, philipsSeries("phstd", m).classic(t, tsExplicitLE)[0], ExtractOptions{})[0]
		if f.BValue != 995 || f.BValueSource != "standard" || f.Gradient != [3]float64{1, 0, 0} {
			t.Errorf("b %v from %q gradient %v, want the standard 995 and the private direction", f.BValue, f.BValueSource, f.Gradient)
		}
	})
	t.Run("a standard NONE on a trace image gives way to the label", func(t *testing.T) {
		// The Vanderbilt reference series writes Directionality NONE
		// and a zero (0018,9089) on its b = 2000 trace images.
		m := philipsImage(2000, "I", [3]float32{}, 0)
		m.extra = append(m.extra, fd(tBValue, 2000), txt(tDirectionality, "CS", "NONE"))
		f := extractOne(t, philipsSeries("phnone", m).classic(t, tsExplicitLE)[0], ExtractOptions{})[0]
		if f.Directionality != dwi.DirectionalityIsotropic {
			t.Errorf("directionality %v, want ISOTROPIC", f.Directionality)
		}
	})
	t.Run("an Enhanced MR file with the private encoding in its per-frame groups", func(t *testing.T) {
		// Where Philips Enhanced MR files keep it (from memory; no such
		// public file without the standard attributes was at hand).
		s := philipsSeries("phenh", philipsImage(0, "I", [3]float32{}, 0), philipsImage(1000, "O", [3]float32{0, 1, 0}, 0))
		frames := extractOne(t, s.enhanced(t, tsExplicitLE), ExtractOptions{})
		if len(frames) != 2 || !frames[0].HasBValue || frames[0].BValue != 0 || frames[0].Directionality != dwi.DirectionalityNone ||
			frames[1].BValue != 1000 || frames[1].BValueSource != "maker:philips" || frames[1].Gradient != [3]float64{0, 1, 0} {
			t.Errorf("frames %+v", frames)
		}
	})
	t.Run("a series with only private encoding assembles with its trace apart", func(t *testing.T) {
		var images []img
		for sl := range 2 {
			images = append(images, philipsImage(0, "I", [3]float32{}, float64(sl)), philipsImage(1000, "I", [3]float32{}, float64(sl)),
				philipsImage(1000, "O", [3]float32{1, 0, 0}, float64(sl)), philipsImage(1000, "O", [3]float32{0, 1, 0}, float64(sl)),
				philipsImage(1000, "O", [3]float32{0, 0, 1}, float64(sl)))
		}
		var frames []dwi.Frame
		for _, data := range philipsSeries("phdti", images...).classic(t, tsExplicitLE) {
			frames = append(frames, extractOne(t, data, ExtractOptions{})...)
		}
		s, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		iso := 0
		for _, v := range s.Volumes {
			if v.Isotropic && v.BValue > 0 {
				iso++
			}
		}
		if len(s.Facts.BValues) != 2 || len(s.Facts.Directions[s.Facts.BValues[1]]) != 3 || iso != 1 || len(s.Volumes) != 5 {
			t.Errorf("%d volumes (%d trace), facts %+v; want b0, trace and 3 directions", len(s.Volumes), iso, s.Facts)
		}
	})
}
