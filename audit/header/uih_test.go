package header

import (
	"slices"
	"testing"

	"dwiaudit/audit/dwi"
)

// uihImage is a UIH multi-slice single frame as the public UIH reference
// series writes it (docs/makers.md): creator "Image Private Header" in
// group 0065, (0065,xx09) FD b-value, (0065,xx37) FD gradient in image
// axes, (0065,xx50) DS slices, (0065,xx51) SQ their Image Position
// (Patient); no position of its own.
func uihImage(b float64, g [3]float64, positions [][3]float64) img {
	var items [][]el
	for _, p := range positions {
		items = append(items, []el{ds(tIPP, p[:]...)})
	}
	return img{plain: true, extra: []el{
		txt(0x00650010, "LO", "Image Private Header"),
		fd(0x00651009, b), fd(0x00651037, g[:]...),
		ds(0x00651050, float64(len(positions))), sq(0x00651051, items...),
	}}
}

func TestUIHReader(t *testing.T) {
	// 5 slices of 4x4 in an 8x12 image: ceil(sqrt 5) = 3 tiles across
	// (the mosaic rule, common practice) and as many rows of tiles as
	// the slices fill, 2 (the reference series: 20 slices of 64x64 in
	// 256x320).
	var pos [][3]float64
	for k := range 5 {
		pos = append(pos, [3]float64{-3, -3, float64(4 * k)})
	}
	s := newSeries("uih", uihImage(1000, [3]float64{1, 0, 0}, pos))
	s.manufacturer = "UIH"
	s.rows, s.cols = 8, 12
	s.noGeometry = true
	s.images[0].extra = append(s.images[0].extra, ds(tIOP, 0, 1, 0, 1, 0, 0)) // orientation only
	frames := extractOne(t, s.classic(t, tsExplicitLE)[0], ExtractOptions{LoadPixels: true})
	if len(frames) != 5 {
		t.Fatalf("%d frames, want the 5 slices", len(frames))
	}
	for k, f := range frames {
		r0, c0 := k/3*4, k%3*4
		var want []float32
		for r := range 4 {
			for c := range 4 {
				want = append(want, float32(s.pixel(0, r0+r, c0+c)))
			}
		}
		if f.Tile != k+1 || !f.Geometry.Known || f.Geometry.Position != pos[k] || f.Geometry.Rows != 4 || f.Geometry.Columns != 4 {
			t.Errorf("slice %d: tile %d known %v at %v, %dx%d", k+1, f.Tile, f.Geometry.Known, f.Geometry.Position, f.Geometry.Rows, f.Geometry.Columns)
		}
		// Image axes (rows +y, columns +x): (1,0,0) along the rows is
		// patient +y.
		if f.BValue != 1000 || f.BValueSource != "maker:uih" || !near3(f.Gradient, [3]float64{0, 1, 0}, 1e-12) || f.Directionality != dwi.DirectionalityDirectional {
			t.Errorf("slice %d: b %v from %q, gradient %v, %v", k+1, f.BValue, f.BValueSource, f.Gradient, f.Directionality)
		}
		if !slices.Equal(f.Pixels, want) {
			t.Errorf("slice %d pixels %v, want %v", k+1, f.Pixels, want)
		}
	}
	t.Run("a slice count without as many positions is an error", func(t *testing.T) {
		m := uihImage(0, [3]float64{}, pos)
		m.extra[3] = ds(0x00651050, 6)
		s := newSeries("uihbad", m)
		s.manufacturer, s.rows, s.cols = "UIH", 8, 12
		if _, err := Extract(s.classic(t, tsExplicitLE)[0], ExtractOptions{}); err == nil {
			t.Error("no error for 6 slices with 5 positions")
		}
	})
}
