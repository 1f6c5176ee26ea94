package header

import (
	"errors"
	"strings"
	"testing"

	"dwiaudit/audit/dwi"
)

func TestPrivateSourceOffsetAndGradient(t *testing.T) {
	// An invented scanner: b-value as IS at (0019,xx0C) with 1e9 added,
	// gradient as three DS at (0019,xx0D), image axes.
	src := PrivateSource{Name: "site", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0C, Read: ValueIS, Offset: 1e9,
		Gradient: &GradientSource{Element: []uint8{0x0D}, Read: ValueDS, ImageAxes: true}}
	image := func(extra ...el) []byte {
		s := newSeries("site", img{plain: true, extra: append([]el{txt(0x00190010, "LO", "ACME DIFFUSION 1")}, extra...)})
		s.orientation = [6]float64{0, 1, 0, 1, 0, 0} // rows +y, columns +x, normal -z
		return s.classic(t, tsImplicitLE)[0]
	}
	t.Run("the offset is removed and the image-axis gradient turned to patient axes", func(t *testing.T) {
		f := extractOne(t, image(txt(0x0019100C, "IS", "1000001000"), ds(0x0019100D, 0, 0, 1)), ExtractOptions{PrivateSources: []PrivateSource{src}})[0]
		// Along the normal, row x column = (0,1,0) x (1,0,0) = (0,0,-1)
		// (PS3.3 C.7.6.2.1.1).
		if f.BValue != 1000 || f.BValueSource != "private:site" || !f.HasGradient || !near3(f.Gradient, [3]float64{0, 0, -1}, 1e-12) || f.Directionality != dwi.DirectionalityDirectional {
			t.Errorf("b %v from %q, gradient %v (%v) %v", f.BValue, f.BValueSource, f.Gradient, f.HasGradient, f.Directionality)
		}
	})
	t.Run("three one-value elements in patient axes", func(t *testing.T) {
		s := src
		s.Offset = 0
		s.Gradient = &GradientSource{Element: []uint8{0x10, 0x11, 0x12}, Read: ValueDS}
		f := extractOne(t, image(txt(0x0019100C, "IS", "500"), ds(0x00191010, 0.6), ds(0x00191011, 0), ds(0x00191012, 0.8)), ExtractOptions{PrivateSources: []PrivateSource{s}})[0]
		if f.BValue != 500 || !near3(f.Gradient, [3]float64{0.6, 0, 0.8}, 1e-12) {
			t.Errorf("b %v gradient %v, want 500 along (0.6, 0, 0.8)", f.BValue, f.Gradient)
		}
	})
	t.Run("a missing gradient element is an error naming it", func(t *testing.T) {
		_, err := Extract(image(txt(0x0019100C, "IS", "1000001000")), ExtractOptions{PrivateSources: []PrivateSource{src}})
		var pe *PrivateSourceError
		if !errors.As(err, &pe) || pe.Tag != "(0019,100D)" {
			t.Errorf("error %v, want a PrivateSourceError at (0019,100D)", err)
		}
	})
	t.Run("a bad gradient source is refused", func(t *testing.T) {
		s := src
		s.Gradient = &GradientSource{Element: []uint8{1, 2}, Group: 0x0018}
		err := s.Validate()
		for _, want := range []string{"Gradient.Group 0018", "Gradient.Element has 2", "Gradient.Read"} {
			if !errors.Is(err, ErrInvalidOptions) || !strings.Contains(err.Error(), want) {
				t.Errorf("error %v, want one saying %q", err, want)
			}
		}
	})
}
