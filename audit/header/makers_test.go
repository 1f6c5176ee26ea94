package header

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/dwi"
)

// acmeReader is a maker reader for an invented scanner maker, ACME, that
// keeps its diffusion encoding in the private block of creator "ACME
// DIFFUSION 1" in group 0019 (PS3.5 7.8.1): the b-value as IS at offset
// 0C, the gradient in image axes (row, column, normal) as FD at offset
// 0D, and, for a mosaic, the number of slices as US at offset 0E (the
// positions of the tiles follow from the mosaic's own position here;
// a real maker's rule is its reader's business).
func acmeReader() MakerReader {
	return MakerReader{
		Name:          "acme",
		Manufacturers: []string{"ACME"},
		Creators:      []string{"ACME DIFFUSION 1"},
		Read: func(im *MakerImage) (MakerDiffusion, error) {
			var d MakerDiffusion
			if e, _ := im.Private("ACME DIFFUSION 1", 0x0019, 0x0C); e != nil {
				v, err := e.Numbers(ValueIS)
				if err != nil || len(v) != 1 {
					return d, im.Fail(e, "b-value %v: %v", v, err)
				}
				d.BValue, d.HasBValue = v[0], true
				if v[0] == 0 {
					d.Directionality = dwi.DirectionalityNone
				}
			}
			if e, _ := im.Private("ACME DIFFUSION 1", 0x0019, 0x0D); e != nil {
				v, err := e.Numbers(ValueFD)
				if err != nil || len(v) != 3 {
					return d, im.Fail(e, "gradient %v: %v", v, err)
				}
				d.Gradient, d.HasGradient = ImageToPatient([3]float64(v), im.Frame.Geometry)
				d.Directionality = dwi.DirectionalityDirectional
			}
			return d, nil
		},
		Split: func(im *MakerImage) (Mosaic, bool, error) {
			e, _ := im.Private("ACME DIFFUSION 1", 0x0019, 0x0E)
			if e == nil {
				return Mosaic{}, false, nil
			}
			v, err := e.Numbers(ValueUS)
			if err != nil || len(v) != 1 || v[0] < 1 {
				return Mosaic{}, false, im.Fail(e, "slices in mosaic %v: %v", v, err)
			}
			n := int(v[0])
			across := int(math.Ceil(math.Sqrt(float64(n))))
			g := im.Frame.Geometry
			m := Mosaic{Slices: n, TilesAcross: across, TileRows: g.Rows / across, TileColumns: g.Columns / across}
			for k := range n {
				p := g.Position
				p[2] += float64(k) * 4
				m.Positions = append(m.Positions, p)
			}
			return m, true, nil
		},
	}
}

// acmeImage is one ACME image without any standard diffusion attribute.
func acmeImage(extra ...el) img {
	return img{plain: true, extra: append([]el{txt(0x00190010, "LO", "ACME DIFFUSION 1")}, extra...)}
}

func acmeSeries(name string, images ...img) testSeries {
	s := newSeries(name, images...)
	s.manufacturer = "ACME Imaging"
	return s
}

func extractOne(t *testing.T, data []byte, opt ExtractOptions) []dwi.Frame {
	t.Helper()
	frames, err := Extract(data, opt)
	if err != nil {
		t.Fatal(err)
	}
	return frames
}

func TestMakerReaderFillsWhatTheStandardAttributesLeaveUnknown(t *testing.T) {
	acme := ExtractOptions{Makers: []MakerReader{acmeReader()}}
	rowColNormal := [3]float64{0.6, 0.8, 0} // in image axes

	t.Run("an ACME image gives its private b-value and its gradient in patient axes", func(t *testing.T) {
		s := acmeSeries("acme1", acmeImage(txt(0x0019100C, "IS", "1000"), fd(0x0019100D, rowColNormal[:]...)))
		// Coronal: rows run along +x, columns along -z (PS3.3
		// C.7.6.2.1.1 LPS); the normal, row x column, is +y.
		s.orientation = [6]float64{1, 0, 0, 0, 0, -1}
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], acme)[0]
		// 0.6 along the row (+x) and 0.8 along the column (-z).
		want := [3]float64{0.6, 0, -0.8}
		if !f.HasBValue || f.BValue != 1000 || f.BValueSource != "maker:acme" {
			t.Errorf("b %v (%v) from %q, want 1000 from maker:acme", f.BValue, f.HasBValue, f.BValueSource)
		}
		if !f.HasGradient || !near3(f.Gradient, want, 1e-12) || f.Directionality != dwi.DirectionalityDirectional {
			t.Errorf("gradient %v (%v) %v, want %v DIRECTIONAL", f.Gradient, f.HasGradient, f.Directionality, want)
		}
	})
	t.Run("implicit VR private elements (UN bytes) are read as well", func(t *testing.T) {
		s := acmeSeries("acme2", acmeImage(txt(0x0019100C, "IS", "0")))
		f := extractOne(t, s.classic(t, tsImplicitLE)[0], acme)[0]
		if !f.HasBValue || f.BValue != 0 || f.Directionality != dwi.DirectionalityNone {
			t.Errorf("b %v (%v) %v, want a b0", f.BValue, f.HasBValue, f.Directionality)
		}
	})
	t.Run("a standard b-value and gradient win over the maker's", func(t *testing.T) {
		m := img{b: 500, dir: [3]float64{0, 0, 1}, extra: []el{txt(0x00190010, "LO", "ACME DIFFUSION 1"),
			txt(0x0019100C, "IS", "1000"), fd(0x0019100D, rowColNormal[:]...)}}
		f := extractOne(t, acmeSeries("acme3", m).classic(t, tsExplicitLE)[0], acme)[0]
		if f.BValue != 500 || f.BValueSource != "standard" || f.Gradient != [3]float64{0, 0, 1} {
			t.Errorf("b %v from %q gradient %v, want the standard 500 along z", f.BValue, f.BValueSource, f.Gradient)
		}
	})
	t.Run("a configured private source wins over the maker reader", func(t *testing.T) {
		s := acmeSeries("acme4", acmeImage(txt(0x0019100C, "IS", "1000"), txt(0x0019100F, "IS", "800")))
		opt := acme
		opt.PrivateSources = []PrivateSource{{Name: "site", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0F, Read: ValueIS}}
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], opt)[0]
		if f.BValue != 800 || f.BValueSource != "private:site" {
			t.Errorf("b %v from %q, want 800 from private:site", f.BValue, f.BValueSource)
		}
	})
	t.Run("another maker's image is not read, though it carries the creator", func(t *testing.T) {
		s := acmeSeries("acme5", acmeImage(txt(0x0019100C, "IS", "1000")))
		s.manufacturer = "Synthetic"
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], acme)[0]
		if f.HasBValue {
			t.Errorf("b %v from %q, want none", f.BValue, f.BValueSource)
		}
	})
	t.Run("an image without the creator is not read", func(t *testing.T) {
		s := acmeSeries("acme6", img{plain: true, extra: []el{txt(0x00190011, "LO", "OTHER 1"), txt(0x0019110C, "IS", "1000")}})
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], acme)[0]
		if f.HasBValue {
			t.Errorf("b %v from %q, want none", f.BValue, f.BValueSource)
		}
	})
	t.Run("the creator's block is found wherever it is reserved", func(t *testing.T) {
		// PS3.5 7.8.1: the block number varies; here block 0x42.
		s := acmeSeries("acme7", img{plain: true, extra: []el{txt(0x00190042, "LO", "ACME DIFFUSION 1"), txt(0x0019420C, "IS", "1500")}})
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], acme)[0]
		if f.BValue != 1500 {
			t.Errorf("b %v (%v), want 1500", f.BValue, f.HasBValue)
		}
	})
	t.Run("an unreadable private element is an error naming the reader and the element", func(t *testing.T) {
		s := acmeSeries("acme8", acmeImage(txt(0x0019100C, "IS", "1000", "2000")))
		_, err := Extract(s.classic(t, tsExplicitLE)[0], acme)
		var pe *PrivateSourceError
		if !errors.As(err, &pe) || pe.Source != "maker:acme" || pe.Tag != "(0019,100C)" || !errors.Is(err, ErrPrivateSource) {
			t.Errorf("error %v, want a PrivateSourceError of maker:acme at (0019,100C)", err)
		}
	})
	t.Run("an unreadable private element does not fail an image whose standard b-value is known", func(t *testing.T) {
		// A standard b-value and no direction: the reader is run, and
		// fails on the two-valued b-value.
		m := img{plain: true, extra: []el{fd(tBValue, 500), txt(0x00190010, "LO", "ACME DIFFUSION 1"), txt(0x0019100C, "IS", "1000", "2000")}}
		f := extractOne(t, acmeSeries("acme8b", m).classic(t, tsExplicitLE)[0], acme)[0]
		if f.BValue != 500 || f.BValueSource != "standard" {
			t.Errorf("b %v from %q, want the standard 500", f.BValue, f.BValueSource)
		}
	})
	t.Run("an empty list of makers turns them off", func(t *testing.T) {
		s := acmeSeries("acme9", acmeImage(txt(0x0019100C, "IS", "1000")))
		f := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{Makers: []MakerReader{}})[0]
		if f.HasBValue {
			t.Errorf("b %v from %q, want none", f.BValue, f.BValueSource)
		}
	})
	t.Run("in an enhanced file the per-frame private elements are read", func(t *testing.T) {
		s := acmeSeries("acme10",
			img{plain: true, slice: 0, extra: []el{sq(0x00191001, []el{txt(0x00190010, "LO", "ACME DIFFUSION 1"), txt(0x0019100C, "IS", "0")})}},
			img{plain: true, slice: 0, extra: []el{sq(0x00191001, []el{txt(0x00190010, "LO", "ACME DIFFUSION 1"), txt(0x0019100C, "IS", "1000")})}})
		frames := extractOne(t, s.enhanced(t, tsExplicitLE), acme)
		if len(frames) != 2 || frames[0].BValue != 0 || frames[1].BValue != 1000 || frames[1].BValueSource != "maker:acme" {
			t.Errorf("frames %+v, want b 0 and 1000 from maker:acme", frames)
		}
	})
}

func TestMakerReaderSplitsAMosaic(t *testing.T) {
	// An 8x8 image holding 4 slices of 4x4, 2 tiles across.
	s := acmeSeries("mosaic", acmeImage(txt(0x0019100C, "IS", "1000"), us(0x0019100E, 4)))
	opt := ExtractOptions{Makers: []MakerReader{acmeReader()}, LoadPixels: true}
	frames := extractOne(t, s.classic(t, tsExplicitLE)[0], opt)
	if len(frames) != 4 {
		t.Fatalf("%d frames, want the 4 slices of the mosaic", len(frames))
	}
	pos := s.position(s.images[0])
	for k, f := range frames {
		r0, c0 := k/2*4, k%2*4
		var want []float32
		for r := range 4 {
			for c := range 4 {
				want = append(want, float32(s.pixel(0, r0+r, c0+c)))
			}
		}
		wantPos := pos
		wantPos[2] += float64(k) * 4
		if f.Tile != k+1 || f.Geometry.Rows != 4 || f.Geometry.Columns != 4 || f.Geometry.Position != wantPos ||
			f.BValue != 1000 || !strings.HasSuffix(f.ID(), "/"+string(rune('1'+k))) {
			t.Errorf("slice %d: tile %d, %dx%d at %v, b %v, id %s", k, f.Tile, f.Geometry.Rows, f.Geometry.Columns, f.Geometry.Position, f.BValue, f.ID())
		}
		if !slices.Equal(f.Pixels, want) {
			t.Errorf("slice %d pixels %v, want %v", k, f.Pixels, want)
		}
	}
	t.Run("a layout that does not fit the image is malformed", func(t *testing.T) {
		s := acmeSeries("mosaic2", acmeImage(us(0x0019100E, 4)))
		r := acmeReader()
		split := r.Split
		r.Split = func(im *MakerImage) (Mosaic, bool, error) {
			m, ok, err := split(im)
			m.TileRows = 5 // two rows of 5 in 8 rows
			return m, ok, err
		}
		_, err := Extract(s.classic(t, tsExplicitLE)[0], ExtractOptions{Makers: []MakerReader{r}})
		if !errors.Is(err, ErrMalformed) {
			t.Errorf("error %v, want ErrMalformed", err)
		}
	})
}

func TestMakerReaderValidate(t *testing.T) {
	err := (ExtractOptions{Makers: []MakerReader{{}}}).validate()
	for _, want := range []string{"Name is empty", "neither a manufacturer nor a private creator", "neither Read nor Split"} {
		if !errors.Is(err, ErrInvalidOptions) || !strings.Contains(err.Error(), want) {
			t.Errorf("error %v, want ErrInvalidOptions saying %q", err, want)
		}
	}
	if err := (ExtractOptions{Makers: []MakerReader{acmeReader()}}).validate(); err != nil {
		t.Errorf("acme reader: %v", err)
	}
	if err := (ExtractOptions{Makers: DefaultMakers()}).validate(); err != nil {
		t.Errorf("built-in readers: %v", err)
	}
}

func TestImageToPatient(t *testing.T) {
	// PS3.3 C.7.6.2.1.1: the row and column direction cosines give the
	// patient direction of the image axes; the normal is row x column.
	sagittal := dwi.Geometry{Known: true, Orientation: [6]float64{0, 1, 0, 0, 0, -1}} // rows +y, columns -z, normal -x
	for _, tt := range []struct {
		name string
		v    [3]float64
		want [3]float64
	}{
		{"along the rows", [3]float64{1, 0, 0}, [3]float64{0, 1, 0}},
		{"along the columns", [3]float64{0, 1, 0}, [3]float64{0, 0, -1}},
		{"along the normal", [3]float64{0, 0, 1}, [3]float64{-1, 0, 0}},
	} {
		t.Run(tt.name+" of a sagittal image", func(t *testing.T) {
			got, ok := ImageToPatient(tt.v, sagittal)
			if !ok || !near3(got, tt.want, 1e-12) {
				t.Errorf("ImageToPatient(%v) = %v, %v; want %v", tt.v, got, ok, tt.want)
			}
		})
	}
	if _, ok := ImageToPatient([3]float64{1, 0, 0}, dwi.Geometry{}); ok {
		t.Error("an image without orientation gave a patient direction")
	}
}

func near3(a, b [3]float64, tol float64) bool {
	for i := range a {
		if math.Abs(a[i]-b[i]) > tol {
			return false
		}
	}
	return true
}
