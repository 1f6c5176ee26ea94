package header

import (
	"encoding/binary"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/dwi"
)

// el is an element as the parser leaves it: private elements of an
// implicit VR data set come as bytes (VR UN).
func rawEl(t testing.TB, group, element uint16, value any) *dicom.Element {
	t.Helper()
	v, err := dicom.NewValue(value)
	if err != nil {
		t.Fatal(err)
	}
	return &dicom.Element{Tag: tag.Tag{Group: group, Element: element}, RawValueRepresentation: "UN", Value: v}
}

func fdBytes(v ...float64) []byte {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
	}
	return b
}

func TestReadSiemensFindsBlocksByTheirCreator(t *testing.T) {
	csa := csaBytes(CSA2, siemensTags("1000"))
	b0 := csaBytes(CSA2, siemensTags("0"))
	cases := []struct {
		name    string
		elems   func(t testing.TB) []*dicom.Element
		found   bool
		b       float64
		source  string
		grad    []float64
		mosaic  int
		wantErr error
	}{
		{
			name: "the CSA header in block 10 is read",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{rawEl(t, 0x29, 0x10, []byte("SIEMENS CSA HEADER")), rawEl(t, 0x29, 0x1010, csa)}
			},
			found: true, b: 1000, source: "csa", grad: []float64{0.6, -0.8, 0}, mosaic: 30,
		},
		{
			name: "a CSA header in another reserved block is found through its creator (PS3.5 7.8.1)",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{
					rawEl(t, 0x29, 0x10, []byte("OTHER MAKER ")),
					rawEl(t, 0x29, 0x12, []byte("SIEMENS CSA HEADER")),
					rawEl(t, 0x29, 0x1010, b0), // the other creator's element: not read
					rawEl(t, 0x29, 0x1210, csa),
				}
			},
			found: true, b: 1000, source: "csa", grad: []float64{0.6, -0.8, 0}, mosaic: 30,
		},
		{
			name: "(0029,1010) without the Siemens creator is not read",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{rawEl(t, 0x29, 0x10, []byte("OTHER MAKER ")), rawEl(t, 0x29, 0x1010, csa)}
			},
		},
		{
			name: "the MR header gives b-value and direction where there is no CSA header",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{
					rawEl(t, 0x19, 0x11, []byte("SIEMENS MR HEADER ")),
					rawEl(t, 0x19, 0x110C, []byte("700 ")),
					rawEl(t, 0x19, 0x110D, []byte("DIRECTIONAL ")),
					rawEl(t, 0x19, 0x110E, fdBytes(0, 0.6, 0.8)),
				}
			},
			found: true, b: 700, source: "mr-header", grad: []float64{0, 0.6, 0.8},
		},
		{
			name: "MR header values parsed by VR (explicit VR) are read too",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{
					rawEl(t, 0x19, 0x10, []string{"SIEMENS MR HEADER"}),
					rawEl(t, 0x19, 0x100C, []string{"1500"}),
					rawEl(t, 0x19, 0x100E, []float64{1, 0, 0}),
				}
			},
			found: true, b: 1500, source: "mr-header", grad: []float64{1, 0, 0},
		},
		{
			name: "the CSA header wins over the MR header",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{
					rawEl(t, 0x19, 0x10, []byte("SIEMENS MR HEADER")),
					rawEl(t, 0x19, 0x100C, []byte("700 ")),
					rawEl(t, 0x19, 0x100E, fdBytes(0, 0.6, 0.8)),
					rawEl(t, 0x29, 0x10, []byte("SIEMENS CSA HEADER")),
					rawEl(t, 0x29, 0x1010, csa),
				}
			},
			found: true, b: 1000, source: "csa", grad: []float64{0.6, -0.8, 0}, mosaic: 30,
		},
		{
			name: "a zero gradient is no direction",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{
					rawEl(t, 0x19, 0x10, []byte("SIEMENS MR HEADER")),
					rawEl(t, 0x19, 0x100C, []byte("0 ")),
					rawEl(t, 0x19, 0x100E, fdBytes(0, 0, 0)),
				}
			},
			found: true, b: 0, source: "mr-header",
		},
		{
			name: "a creator without its CSA element (anonymised) is no CSA header",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{rawEl(t, 0x29, 0x10, []byte("SIEMENS CSA HEADER"))}
			},
			found: false,
		},
		{
			name: "a malformed CSA header is an error",
			elems: func(t testing.TB) []*dicom.Element {
				return []*dicom.Element{rawEl(t, 0x29, 0x10, []byte("SIEMENS CSA HEADER")), rawEl(t, 0x29, 0x1010, csa[:100])}
			},
			found: true, wantErr: ErrCSA,
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d, found, err := ReadSiemens(c.elems(t), binary.LittleEndian)
			if !errors.Is(err, c.wantErr) || found != c.found {
				t.Fatalf("found %v, error %v; want %v, %v", found, err, c.found, c.wantErr)
			}
			if !found || err != nil {
				return
			}
			if !d.HasBValue || d.BValue != c.b || d.BValueSource != c.source {
				t.Errorf("b %v %v from %q, want %v from %q", d.BValue, d.HasBValue, d.BValueSource, c.b, c.source)
			}
			if d.HasGradient != (c.grad != nil) || c.grad != nil && !slices.Equal(d.Gradient[:], c.grad) {
				t.Errorf("gradient %v %v, want %v", d.Gradient, d.HasGradient, c.grad)
			}
			if d.MosaicImages != c.mosaic {
				t.Errorf("mosaic images %d, want %d", d.MosaicImages, c.mosaic)
			}
		})
	}
}

func TestMosaicGeometry(t *testing.T) {
	t.Run("the grid is ceil(sqrt(n)) tiles per side", func(t *testing.T) {
		for n, want := range map[int]int{1: 1, 2: 2, 4: 2, 5: 3, 9: 3, 10: 4, 30: 6, 36: 6, 37: 7, 48: 7, 49: 7, 50: 8} {
			if g := MosaicGrid(n); g != want {
				t.Errorf("MosaicGrid(%d) = %d, want %d", n, g, want)
			}
		}
	})
	t.Run("an image the grid does not divide, or without geometry, is refused", func(t *testing.T) {
		good := dwi.Geometry{Rows: 96, Columns: 96, PixelSpacing: [2]float64{1, 1}, Orientation: [6]float64{1, 0, 0, 0, 1, 0}, SliceThickness: 3, Known: true}
		for _, c := range []struct {
			name   string
			g      dwi.Geometry
			images int
		}{
			{"rows not a multiple of the grid", dwi.Geometry{Rows: 100, Columns: 96, Known: true, SliceThickness: 3}, 9},
			{"no images", good, 0},
			{"a negative count", good, -1},
			{"more images than the cap", good, maxMosaicImages + 1},
			{"an empty image", dwi.Geometry{Known: true, SliceThickness: 3}, 4},
			{"no position and orientation", dwi.Geometry{Rows: 96, Columns: 96, SliceThickness: 3}, 4},
			{"no slice distance", dwi.Geometry{Rows: 96, Columns: 96, Known: true}, 4},
		} {
			if _, err := MosaicLayout(c.g, c.images, [3]float64{}, false); !errors.Is(err, ErrMosaic) {
				t.Errorf("%s: %v, want ErrMosaic", c.name, err)
			}
		}
		if _, err := MosaicLayout(good, 9, [3]float64{}, false); err != nil {
			t.Errorf("a good mosaic: %v", err)
		}
	})
	t.Run("the CSA slice normal decides the order of the slices", func(t *testing.T) {
		ori := [6]float64{1, 0, 0, 0, 1, 0}
		if n := SliceNormal(ori, [3]float64{}, false); n != [3]float64{0, 0, 1} {
			t.Errorf("without a CSA normal: %v, want row x column (PS3.3 C.7.6.2.1.1)", n)
		}
		if n := SliceNormal(ori, [3]float64{0, 0, -1}, true); n != [3]float64{0, 0, -1} {
			t.Errorf("with a reversed CSA normal: %v", n)
		}
	})
	t.Run("a non-square tile moves its corner by half the size difference on each axis", func(t *testing.T) {
		// 2x2 tiles of 20x30 in a 40x60 image; rows along y (column
		// cosine), columns along x (row cosine), row spacing 2 mm,
		// column spacing 1 mm, slices 5 mm apart (Spacing Between
		// Slices wins over Slice Thickness).
		g := dwi.Geometry{Rows: 40, Columns: 60, PixelSpacing: [2]float64{2, 1}, Orientation: [6]float64{1, 0, 0, 0, 1, 0},
			SliceThickness: 4, SpacingBetweenSlices: 5, Known: true}
		m, err := MosaicLayout(g, 4, [3]float64{0, 0, 1}, true)
		if err != nil {
			t.Fatal(err)
		}
		if m.Slices != 4 || m.TilesAcross != 2 || m.TileRows != 20 || m.TileColumns != 30 {
			t.Errorf("layout %+v", m)
		}
		// x: (60-30)/2 columns of 1 mm; y: (40-20)/2 rows of 2 mm.
		want := [][3]float64{{15, 20, 0}, {15, 20, 5}, {15, 20, 10}, {15, 20, 15}}
		if !slices.Equal(m.Positions, want) {
			t.Errorf("positions %v, want %v", m.Positions, want)
		}
		m, _ = MosaicLayout(g, 4, [3]float64{0, 0, -1}, true)
		if m.Positions[1] != [3]float64{15, 20, -5} {
			t.Errorf("a reversed CSA normal puts slice 1 at %v, want (15, 20, -5)", m.Positions[1])
		}
	})
}
