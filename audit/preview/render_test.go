package preview

import (
	"bytes"
	"errors"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"dwiaudit/audit"
	"dwiaudit/audit/adc"
	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// audited is one phantom series as the audit computed it.
type audited struct {
	study    *phantom.Study
	series   *rules.SeriesAudit
	findings []rules.Finding
}

// auditPhantom writes a phantom study, audits it with every shipped rule
// on the default configuration, and returns its computed diffusion
// series with that series' findings.
func auditPhantom(t testing.TB, opt phantom.Options) audited {
	t.Helper()
	st, err := phantom.Write(t.TempDir(), opt)
	if err != nil {
		t.Fatal(err)
	}
	e := audit.NewEngine(rules.All(), rules.DefaultConfig())
	e.KeepStudies = true
	rep, err := e.AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	out := audited{study: st}
	for _, s := range rep.Studies {
		for _, sa := range s.Series {
			if sa.Computed() {
				out.series = sa
			}
		}
	}
	if out.series == nil {
		t.Fatalf("case %s: no computed series in the audit", opt.Case)
	}
	for _, f := range rep.Findings {
		if f.SeriesUID == out.series.Series.SeriesInstanceUID {
			out.findings = append(out.findings, f)
		}
	}
	return out
}

func newTestRenderer(t testing.TB) *Renderer {
	t.Helper()
	r, err := NewRenderer()
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// roundTrip encodes the picture as PNG and decodes it, so the checks
// read what a browser gets.
func roundTrip(t testing.TB, p *Picture) image.Image {
	t.Helper()
	var buf bytes.Buffer
	if err := p.EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

func isOutline(c color.Color) bool {
	r, g, b, a := c.RGBA()
	return r == 0xFFFF && g == 0 && b == 0xFFFF && a == 0xFFFF
}

// outlinePixels counts the pixels of img in the outline colour.
func outlinePixels(img image.Image) int {
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if isOutline(img.At(x, y)) {
				n++
			}
		}
	}
	return n
}

// ring lists the pixels at distance d outside rect (a one-pixel-wide
// rectangle around it), those inside clip.
func ring(rect image.Rectangle, d int, clip image.Rectangle) []image.Point {
	o := rect.Inset(-d)
	var pts []image.Point
	add := func(x, y int) {
		if p := (image.Point{x, y}); p.In(clip) {
			pts = append(pts, p)
		}
	}
	for x := o.Min.X; x < o.Max.X; x++ {
		add(x, o.Min.Y)
		add(x, o.Max.Y-1)
	}
	for y := o.Min.Y + 1; y < o.Max.Y-1; y++ {
		add(o.Min.X, y)
		add(o.Max.X-1, y)
	}
	return pts
}

// hotspotOf returns the b0-only-hotspot finding among fs.
func hotspotOf(t *testing.T, a audited) rules.Finding {
	t.Helper()
	for _, f := range a.findings {
		if f.Rule == rules.HotspotID && f.Region != nil {
			return f
		}
	}
	t.Fatalf("no %s finding with a region on the planted case; findings: %+v", rules.HotspotID, a.findings)
	return rules.Finding{}
}

func TestPreviewOutlinesTheFindingRegionOnEveryPanel(t *testing.T) {
	r := newTestRenderer(t)
	for _, tc := range []struct {
		name  string
		c     phantom.Case
		multi bool
	}{
		{"a b0 aliasing artifact is outlined where the rule found it", phantom.CaseB0ArtifactAliasing, false},
		{"a b0 signal dropout is outlined where the rule found it", phantom.CaseB0ArtifactDropout, false},
		{"a b0 aliasing artifact in Enhanced MR files is outlined too", phantom.CaseB0ArtifactAliasing, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := auditPhantom(t, phantom.Options{Case: tc.c, Matrix: 64, Slices: 12, Seed: 1, MultiFrame: tc.multi})
			f := hotspotOf(t, a)
			z := DefaultSlice(a.series.Result, a.findings)
			if z != f.Region.Slices[0] {
				t.Errorf("default slice %d, want the region's first slice %d", z, f.Region.Slices[0])
			}
			pic, err := r.Render(a.series.Result, z, a.findings)
			if err != nil {
				t.Fatal(err)
			}
			img := roundTrip(t, pic)
			if len(pic.Panels) != 4 || pic.Panels[0].Scale != 4 {
				t.Fatalf("panels %+v, want four at 4 pixels per voxel for a 64 matrix", pic.Panels)
			}
			for _, p := range pic.Panels {
				box := p.box(f.Region.BoxPixels)
				clip := p.Rect.Inset(-outlineWidth)
				for d := 1; d <= outlineWidth; d++ {
					pts := ring(box, d, clip)
					if len(pts) < 4*p.Scale {
						t.Fatalf("%s: only %d ring pixels at distance %d around %v", p.Kind, len(pts), d, box)
					}
					for _, q := range pts {
						if c := img.At(q.X, q.Y); !isOutline(c) {
							t.Errorf("%s: pixel %v at distance %d outside the region box %v is %v, want the outline colour", p.Kind, q, d, box, c)
							break
						}
					}
				}
				// The voxels inside stay visible: no outline pixel in
				// the box, and none beyond the outline's width.
				inside, beyond := 0, 0
				for y := box.Min.Y; y < box.Max.Y; y++ {
					for x := box.Min.X; x < box.Max.X; x++ {
						if isOutline(img.At(x, y)) {
							inside++
						}
					}
				}
				for _, q := range ring(box, outlineWidth+1, clip) {
					if isOutline(img.At(q.X, q.Y)) {
						beyond++
					}
				}
				if inside != 0 || beyond != 0 {
					t.Errorf("%s: %d outline pixels inside the box, %d one pixel beyond the outline; want 0 and 0", p.Kind, inside, beyond)
				}
			}
			// A slice the region does not include has no outline.
			for other := range a.series.Result.B0.Slices {
				if !slices.Contains(f.Region.Slices, other) {
					pic, err := r.Render(a.series.Result, other, a.findings)
					if err != nil {
						t.Fatal(err)
					}
					if n := outlinePixels(roundTrip(t, pic)); n != 0 {
						t.Errorf("slice %d, outside the region's slices %v: %d outline pixels, want 0", other, f.Region.Slices, n)
					}
					break
				}
			}
			if dir := os.Getenv("DWIAUDIT_ARTIFACTS"); dir != "" && !tc.multi {
				saveArtifact(t, dir, "preview-"+string(tc.c)+".png", pic)
			}
		})
	}
}

// saveArtifact writes the picture for a person to look at.
func saveArtifact(t *testing.T, dir, name string, pic *Picture) {
	t.Helper()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := pic.EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("preview written to %s", path)
}

func TestACleanPhantomHasNoOutlineColouredPixel(t *testing.T) {
	r := newTestRenderer(t)
	a := auditPhantom(t, phantom.Options{Case: phantom.CaseClean, Matrix: 64, Slices: 12, Seed: 1})
	for _, f := range a.findings {
		if f.Region != nil {
			t.Fatalf("the clean phantom has a finding with a region: %+v", f)
		}
	}
	// Every slice: grey scales, the colour scale, text and keys never
	// come out in the outline colour.
	for z := range a.series.Result.B0.Slices {
		pic, err := r.Render(a.series.Result, z, a.findings)
		if err != nil {
			t.Fatal(err)
		}
		if n := outlinePixels(roundTrip(t, pic)); n != 0 {
			t.Errorf("slice %d: %d pixels in the outline colour, want none", z, n)
		}
		if len(pic.Outlined) != 0 {
			t.Errorf("slice %d: outlined %v, want nothing", z, pic.Outlined)
		}
	}
}

// lightness is CIE L* of an 8-bit sRGB colour (D65): the sRGB transfer
// function of IEC 61966-2-1, Y from the sRGB primaries (ITU-R BT.709
// coefficients 0.2126, 0.7152, 0.0722), L* = 116 f(Y) - 16 (CIE 15).
func lightness(c color.Color) float64 {
	r, g, b, _ := c.RGBA()
	lin := func(v uint32) float64 {
		x := float64(v) / 0xFFFF
		if x <= 0.04045 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	y := 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
	if y > 216.0/24389 {
		return 116*math.Cbrt(y) - 16
	}
	return 24389.0 / 27 * y
}

func TestTheADCLegendIsViridisFromEndToEnd(t *testing.T) {
	r := newTestRenderer(t)
	res := syntheticResult(64, 64, 3)
	pic, err := r.Render(res, 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	img := roundTrip(t, pic)
	y := pic.Legend.Min.Y + pic.Legend.Dy()/2
	first, last := img.At(pic.Legend.Min.X, y), img.At(pic.Legend.Max.X-1, y)
	// viridis' first and last entries, #440154 and #FDE725: the
	// published table (van der Walt & Smith 2015, CC0; matplotlib
	// _cm_listed.py _viridis_data[0] = 0.267004, 0.004874, 0.329415 and
	// [255] = 0.993248, 0.906157, 0.143936, times 255, rounded).
	if want := (color.RGBA{0x44, 0x01, 0x54, 0xFF}); color.RGBAModel.Convert(first) != want {
		t.Errorf("legend's left end %v, want viridis' first entry %v", first, want)
	}
	if want := (color.RGBA{0xFD, 0xE7, 0x25, 0xFF}); color.RGBAModel.Convert(last) != want {
		t.Errorf("legend's right end %v, want viridis' last entry %v", last, want)
	}
	// Perceptually uniform: L* rises from left to right (viridis'
	// design: lightness monotonic from dark to light; van der Walt &
	// Smith 2015). Rounding to 8 bits may set a pixel back by a fraction
	// of a unit (one step of one channel moves L* by at most about 0.4),
	// never more.
	const quantum = 0.4
	prev := -1.0
	for x := pic.Legend.Min.X; x < pic.Legend.Max.X; x++ {
		l := lightness(img.At(x, y))
		if l < prev-quantum {
			t.Fatalf("L* falls at legend pixel %d: %.2f after %.2f", x-pic.Legend.Min.X, l, prev)
		}
		prev = max(prev, l)
	}
	lo, hi := lightness(first), lightness(last)
	if !(lo < 35 && hi > 85) {
		t.Errorf("L* from %.1f to %.1f, want a span from below 35 to above 85", lo, hi)
	}
	// The table itself: every step of 8 entries is lighter.
	v := r.Viridis()
	for i := 8; i < 256; i += 8 {
		if !(lightness(v[i]) > lightness(v[i-8])) {
			t.Errorf("viridis entry %d (L* %.2f) is not lighter than entry %d (L* %.2f)", i, lightness(v[i]), i-8, lightness(v[i-8]))
		}
	}
}

// syntheticResult is a hand-made computation: b0 1000 and DWI 368
// everywhere (ADC 1e-3, eADC 0.368 by the worked example of docs/references.md#worked-example),
// a square mask in the middle, and on the middle slice an ADC ramp
// along the columns from 0 to 3.5e-3 and one NaN voxel at (rows/2, 2).
func syntheticResult(rows, cols, slices int) *analysis.Result {
	n := rows * cols * slices
	vol := func(v float32) *adc.Volume3 {
		x := adc.NewVolume3(rows, cols, slices)
		for i := range x.Data {
			x.Data[i] = v
		}
		return x
	}
	res := &analysis.Result{
		Series: &dwi.Series{SeriesNumber: 2, Grid: make([]float64, slices),
			Reference: dwi.Geometry{Rows: rows, Columns: cols, PixelSpacing: [2]float64{2, 2}}},
		B0:    vol(1000),
		HighB: []analysis.BImage{{B: 1000, Trace: vol(367.879)}},
		ADC:   vol(1e-3),
		EADC:  vol(0.367879),
		Mask:  make([]bool, n),
	}
	for z := range slices {
		res.Series.Grid[z] = 5 * float64(z)
		for r := rows / 4; r < 3*rows/4; r++ {
			for c := cols / 4; c < 3*cols/4; c++ {
				res.Mask[(z*rows+r)*cols+c] = true
			}
		}
	}
	mid := res.ADC.Slice(slices / 2)
	for r := range rows {
		for c := range cols {
			mid[r*cols+c] = float32(adcMax * float64(c) / float64(cols-1))
		}
	}
	mid[(rows/2)*cols+cols/2] = float32(math.NaN())
	return res
}

func TestVoxelColoursFollowTheDocumentedScales(t *testing.T) {
	r := newTestRenderer(t)
	const rows, cols, slices = 32, 32, 3
	res := syntheticResult(rows, cols, slices)
	pic, err := r.Render(res, slices/2, nil)
	if err != nil {
		t.Fatal(err)
	}
	img := roundTrip(t, pic)
	at := func(k PanelKind, row, col int) color.RGBA {
		q := pic.Panels[k].voxel(row, col)
		// Every pixel of the enlarged voxel has the same colour.
		c := color.RGBAModel.Convert(img.At(q.Min.X, q.Min.Y)).(color.RGBA)
		if d := color.RGBAModel.Convert(img.At(q.Max.X-1, q.Max.Y-1)).(color.RGBA); d != c {
			t.Errorf("%s voxel (%d,%d): corners %v and %v differ", k, row, col, c, d)
		}
		return c
	}
	v := r.Viridis()
	for _, tc := range []struct {
		name     string
		k        PanelKind
		row, col int
		want     color.RGBA
	}{
		{"ADC outside the tissue mask is black", PanelADC, 1, 1, noTissueColor},
		{"eADC outside the tissue mask is black", PanelEADC, 1, 1, noTissueColor},
		{"an undefined ADC inside the mask is dark grey", PanelADC, rows / 2, cols / 2, undefinedColor},
		{"ADC takes the viridis entry of its share of 3.5e-3", PanelADC, rows / 2, 10, v[int(math.Round(255*10.0/(cols-1)))]},
		{"eADC 0.368 is grey 94 of 255", PanelEADC, rows / 2, 10, color.RGBA{94, 94, 94, 255}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := at(tc.k, tc.row, tc.col); got != tc.want {
				t.Errorf("voxel (%d,%d) on %s: %v, want %v", tc.row, tc.col, tc.k, got, tc.want)
			}
		})
	}
	t.Run("a matrix with fewer columns than rows keeps its panels apart and its keys readable", func(t *testing.T) {
		pic, err := r.Render(syntheticResult(128, 48, 1), 0, nil)
		if err != nil {
			t.Fatal(err)
		}
		if w := pic.Image.Bounds().Dx(); w < 4*minPanelPixels {
			t.Errorf("picture %d pixels wide, want at least four %d-pixel slots", w, minPanelPixels)
		}
		for i := 1; i < len(pic.Panels); i++ {
			a, b := pic.Panels[i-1].Rect, pic.Panels[i].Rect
			if b.Min.X-a.Max.X < minPanelPixels-a.Dx() {
				t.Errorf("panels %v and %v: %d pixels apart, want the rest of a %d-pixel slot", a, b, b.Min.X-a.Max.X, minPanelPixels)
			}
		}
	})
	for _, tc := range []struct {
		matrix, scale int
	}{{16, 16}, {32, 8}, {64, 4}, {100, 3}, {128, 2}, {256, 1}, {512, 1}} {
		t.Run("a "+strconv.Itoa(tc.matrix)+" matrix is drawn at "+strconv.Itoa(tc.scale)+" pixels per voxel", func(t *testing.T) {
			pic, err := r.Render(syntheticResult(tc.matrix, tc.matrix, 1), 0, nil)
			if err != nil {
				t.Fatal(err)
			}
			if got := pic.Panels[PanelADC].Scale; got != tc.scale || pic.Panels[PanelADC].Rect.Dx() != tc.matrix*tc.scale {
				t.Errorf("scale %d, panel %v; want %d", got, pic.Panels[PanelADC].Rect, tc.scale)
			}
		})
	}
}

func TestRenderRefusesWhatItCannotDraw(t *testing.T) {
	r := newTestRenderer(t)
	res := syntheticResult(16, 16, 4)
	for _, z := range []int{-1, 4, 100} {
		t.Run("slice "+strconv.Itoa(z)+" out of 0..3 is refused with the valid range", func(t *testing.T) {
			_, err := r.Render(res, z, nil)
			var se *SliceRangeError
			if !errors.As(err, &se) || !errors.Is(err, errSliceRange) || se.Slice != z || se.Slices != 4 {
				t.Errorf("Render(slice %d) = %v, want a SliceRangeError for 4 slices", z, err)
			}
		})
	}
	t.Run("a series that could not be computed is refused with the reason", func(t *testing.T) {
		_, err := r.Render(&analysis.Result{CannotCompute: "no b0 image"}, 0, nil)
		if !errors.Is(err, ErrNoMaps) || !bytes.Contains([]byte(err.Error()), []byte("no b0 image")) {
			t.Errorf("Render = %v, want ErrNoMaps with the reason", err)
		}
	})
	t.Run("an empty computation is refused", func(t *testing.T) {
		empty := adc.NewVolume3(0, 0, 1)
		res := &analysis.Result{B0: empty, ADC: empty, EADC: empty, HighB: []analysis.BImage{{B: 1000, Trace: empty}}}
		if _, err := r.Render(res, 0, nil); !errors.Is(err, ErrNoMaps) {
			t.Errorf("Render(0x0) = %v, want ErrNoMaps", err)
		}
	})
	t.Run("a missing result is refused", func(t *testing.T) {
		if _, err := r.Render(nil, 0, nil); !errors.Is(err, ErrNoMaps) {
			t.Errorf("Render(nil) = %v, want ErrNoMaps", err)
		}
	})
}

// BenchmarkRender draws one 256x256 slice (render only, no PNG).
func BenchmarkRender(b *testing.B) {
	r := newTestRenderer(b)
	a := auditPhantom(b, phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 256, Slices: 8, Seed: 1})
	z := DefaultSlice(a.series.Result, a.findings)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := r.Render(a.series.Result, z, a.findings); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkEncodePNG encodes one rendered 256x256 preview.
func BenchmarkEncodePNG(b *testing.B) {
	r := newTestRenderer(b)
	a := auditPhantom(b, phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 256, Slices: 8, Seed: 1})
	pic, err := r.Render(a.series.Result, DefaultSlice(a.series.Result, a.findings), a.findings)
	if err != nil {
		b.Fatal(err)
	}
	var buf bytes.Buffer
	b.ReportAllocs()
	for b.Loop() {
		buf.Reset()
		if err := pic.EncodePNG(&buf); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(buf.Len())/1024, "KiB/png")
}
