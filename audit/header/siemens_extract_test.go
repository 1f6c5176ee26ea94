package header

import (
	"errors"
	"testing"

	"dwiaudit/audit/dwi"
)

// siemensCSA is a CSA image header of a mosaic of n slices with b-value
// b (as text), gradient g (3 values as text, or none) and slice normal
// sn (3 values as text).
func siemensCSA(b string, n string, g, sn []string) []byte {
	pad := func(v []string) []string { return append(append([]string{}, v...), make([]string, 6-len(v))...) }
	tags := []csaTag{
		{name: "EchoLinePosition", vm: 1, vr: "IS", items: pad([]string{"32"})},
		{name: CSAMosaicImages, vm: 1, vr: "US", items: pad([]string{n})},
		{name: CSABValue, vm: 1, vr: "IS", items: pad([]string{b})},
		{name: CSASliceNormal, vm: 3, vr: "FD", items: pad(sn)},
	}
	if g != nil {
		tags = append(tags, csaTag{name: CSAGradient, vm: 3, vr: "FD", items: pad(g)},
			csaTag{name: CSADirectionality, vm: 1, vr: "CS", items: pad([]string{"DIRECTIONAL"})})
	}
	return csaBytes(CSA2, tags)
}

// siemensMosaic is one synthetic Siemens mosaic image: Image Type
// MOSAIC and a CSA image header in the block of creator "SIEMENS CSA
// HEADER", reserved at block 11 to show that the block is found through
// the creator (PS3.5 7.8.1).
func siemensMosaic(csa []byte) img {
	return img{plain: true, imageType: []string{"ORIGINAL", "PRIMARY", "M", "ND", "MOSAIC"},
		extra: []el{txt(0x00290011, "LO", SiemensCSACreator), raw(0x00291110, "OB", csa)}}
}

func TestSiemensReaderExtractsMosaicsAndClassicImages(t *testing.T) {
	up := []string{"0", "0", "1"}
	for _, ts := range []string{tsExplicitLE, tsImplicitLE} {
		t.Run("a b1000 mosaic becomes its slices with their own positions and pixels ("+ts+")", func(t *testing.T) {
			// 8x8 image, 4 slices: a 2x2 grid of 4x4 tiles.
			s := newSeries("siemens1", siemensMosaic(siemensCSA("1000", "4", []string{"0.6", "-0.8", "0"}, up)))
			frames := extractOne(t, s.classic(t, ts)[0], ExtractOptions{LoadPixels: true})
			if len(frames) != 4 {
				t.Fatalf("%d frames, want 4 slices", len(frames))
			}
			for k, f := range frames {
				if f.Tile != k+1 || f.Geometry.Rows != 4 || f.Geometry.Columns != 4 {
					t.Fatalf("slice %d: tile %d, %dx%d", k, f.Tile, f.Geometry.Rows, f.Geometry.Columns)
				}
				if !f.HasBValue || f.BValue != 1000 || f.BValueSource != "maker:siemens" {
					t.Errorf("slice %d: b %v %v from %q", k, f.BValue, f.HasBValue, f.BValueSource)
				}
				if !f.HasGradient || !near3(f.Gradient, [3]float64{0.6, -0.8, 0}, 1e-12) || f.Directionality != dwi.DirectionalityDirectional {
					t.Errorf("slice %d: gradient %v %v, %v", k, f.Gradient, f.HasGradient, f.Directionality)
				}
				// Corner moved by (8-4)/2 rows of 1.5 mm along the
				// column cosine (+y) and (8-4)/2 columns of 1.5 mm along
				// the row cosine (+x); slices 4 mm apart (Slice
				// Thickness) along the normal (+z).
				want := [3]float64{s.origin[0] + 3, s.origin[1] + 3, s.origin[2] + 4*float64(k)}
				if !near3(f.Geometry.Position, want, 1e-12) {
					t.Errorf("slice %d at %v, want %v", k, f.Geometry.Position, want)
				}
				r0, c0 := (k/2)*4, (k%2)*4
				for r := range 4 {
					for c := range 4 {
						if got, want := f.Pixels[r*4+c], float32(s.pixel(0, r0+r, c0+c)); got != want {
							t.Fatalf("slice %d pixel (%d,%d) = %v, want mosaic pixel (%d,%d) = %v", k, r, c, got, r0+r, c0+c, want)
						}
					}
				}
			}
		})
	}
	t.Run("a reversed CSA slice normal reverses the slice order", func(t *testing.T) {
		s := newSeries("siemens2", siemensMosaic(siemensCSA("1000", "3", []string{"1", "0", "0"}, []string{"0", "0", "-1"})))
		frames := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{})
		if len(frames) != 3 || frames[2].Geometry.Position[2] != s.origin[2]-8 {
			t.Fatalf("%d slices, the last at %v; want 3, the last 8 mm below", len(frames), frames[len(frames)-1].Geometry.Position)
		}
	})
	t.Run("a b0 mosaic is b0 with no direction", func(t *testing.T) {
		s := newSeries("siemens3", siemensMosaic(siemensCSA("0", "4", nil, up)))
		for _, f := range extractOne(t, s.classic(t, tsImplicitLE)[0], ExtractOptions{}) {
			if !f.HasBValue || f.BValue != 0 || f.HasGradient || f.Directionality != dwi.DirectionalityNone {
				t.Fatalf("b %v %v, gradient %v, %v", f.BValue, f.HasBValue, f.HasGradient, f.Directionality)
			}
		}
	})
	t.Run("a classic image with only the SIEMENS MR HEADER elements gives b-value and direction", func(t *testing.T) {
		m := img{plain: true, extra: []el{txt(0x00190010, "LO", SiemensMRCreator), txt(0x0019100C, "IS", "700"),
			txt(0x0019100D, "CS", "DIRECTIONAL"), fd(0x0019100E, 0, 0.6, 0.8)}}
		for _, ts := range []string{tsExplicitLE, tsImplicitLE} {
			frames := extractOne(t, newSeries("siemens4", m).classic(t, ts)[0], ExtractOptions{})
			f := frames[0]
			if len(frames) != 1 || f.BValue != 700 || !f.HasGradient || !near3(f.Gradient, [3]float64{0, 0.6, 0.8}, 1e-12) || f.Directionality != dwi.DirectionalityDirectional {
				t.Errorf("%s: %d frames, b %v, gradient %v %v, %v", ts, len(frames), f.BValue, f.Gradient, f.HasGradient, f.Directionality)
			}
		}
	})
	t.Run("the standard b-value wins over the CSA header", func(t *testing.T) {
		m := img{b: 500, dir: [3]float64{0, 0, 1}, extra: []el{txt(0x00290010, "LO", SiemensCSACreator),
			raw(0x00291010, "OB", siemensCSA("1000", "1", []string{"1", "0", "0"}, up))}}
		f := extractOne(t, newSeries("siemens5", m).classic(t, tsExplicitLE)[0], ExtractOptions{})[0]
		if f.BValue != 500 || f.BValueSource != "standard" || f.Gradient != [3]float64{0, 0, 1} {
			t.Errorf("b %v from %q, gradient %v; want the standard 500 along z", f.BValue, f.BValueSource, f.Gradient)
		}
	})
	t.Run("with the maker readers off a mosaic stays one image", func(t *testing.T) {
		s := newSeries("siemens6", siemensMosaic(siemensCSA("1000", "4", []string{"1", "0", "0"}, up)))
		frames := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{Makers: []MakerReader{}})
		if len(frames) != 1 || frames[0].HasBValue {
			t.Errorf("%d frames, b %v", len(frames), frames[0].HasBValue)
		}
	})
	bad := []struct {
		name string
		m    img
		want []error
	}{
		{"a mosaic the grid does not divide", siemensMosaic(siemensCSA("1000", "9", []string{"1", "0", "0"}, up)), []error{ErrMalformed, ErrMosaic}},
		{"a mosaic without NumberOfImagesInMosaic", siemensMosaic(siemensCSA("1000", "", []string{"1", "0", "0"}, up)), []error{ErrMalformed, ErrMosaic}},
		{"a truncated CSA header", siemensMosaic(siemensCSA("1000", "4", nil, up)[:40]), []error{ErrCSA, ErrPrivateSource}},
	}
	for _, c := range bad {
		t.Run(c.name+" is an error, not a false image", func(t *testing.T) {
			_, err := Extract(newSeries("siemens7", c.m).classic(t, tsExplicitLE)[0], ExtractOptions{})
			for _, w := range c.want {
				if !errors.Is(err, w) {
					t.Errorf("error %v, want %v", err, w)
				}
			}
		})
	}
}
