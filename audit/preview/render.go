package preview

import (
	"bufio"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"io"
	"math"
	"slices"
	"strings"

	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/analysis"
	"dwiaudit/rules"
)

// Colours and scales of the picture (see doc.go).
var (
	// OutlineColor outlines finding regions: pure magenta, which no grey
	// (R = G = B) and no viridis entry (G >= 1, R <= 253) can be.
	OutlineColor = color.RGBA{0xFF, 0x00, 0xFF, 0xFF}
	// noTissueColor fills eADC and ADC voxels outside the tissue mask.
	noTissueColor = color.RGBA{0, 0, 0, 0xFF}
	// undefinedColor fills voxels whose value is undefined (NaN).
	undefinedColor = color.RGBA{0x30, 0x30, 0x30, 0xFF}

	backgroundColor = color.RGBA{0x18, 0x18, 0x18, 0xFF}
	textColor       = color.RGBA{0xE8, 0xE8, 0xE8, 0xFF}
	dimTextColor    = color.RGBA{0xA8, 0xA8, 0xA8, 0xFF}
)

// Scales and sizes.
const (
	// adcMax (mm²/s) is the top of the ADC colour scale: a little above
	// free water at body temperature (3.04e-3, Holz 2000; docs/references.md#holz-2000) so
	// CSF is inside the scale and only what no tissue reaches is clipped
	// (the free-water ceiling is 3.4e-3, docs/references.md#free-water-ceiling).
	adcMax = 3.5e-3
	// adcLegendUnit is the unit of the colour bar's labels, mm²/s.
	adcLegendUnit = 1e-3
	// On the b0 and DWI panels zero signal is drawn black (or the
	// windowLow percentile of the tissue, if that is below zero:
	// magnitude images have none), and windowWhite times the median of
	// the parenchyma white: the brain's typical signal sits at mid
	// grey, with room above it for what is brighter (CSF on the b0, a
	// lesion or an artifact). Percentiles are robust to a few extreme
	// voxels and the median to an artifact covering up to half of the
	// brain (common practice for display windows; the factor 2 is our
	// choice).
	windowLow, windowWhite = 1.0, 2.0
	// minWindowVoxels: a mask with fewer voxels (in the sample) does
	// not set a window; the next wider set of voxels does.
	minWindowVoxels = 64
	// minPanelPixels is the width a panel is enlarged to at least: a
	// 64x64 slice becomes 256 pixels (four pixels per voxel), about the
	// size a technologist reads a slice at on a report page.
	minPanelPixels = 256
	// maxScale bounds the enlargement (a 16x16 matrix is already 256).
	maxScale = 16
	// outlineWidth is the width of a region's outline, in pixels.
	outlineWidth = 2
)

// Layout, in pixels.
const (
	margin     = 12
	gap        = 14 // between panels; more than outlineWidth so outlines never touch a neighbour
	lineHeight = 18
	headerH    = 24
	titleH     = 22
	keysH      = 58 // scale bar, colour bars and their labels under the panels
	footerH    = 2*lineHeight + 6
	fontSize   = 13
	barH       = 10
)

// PanelKind names the four panels, left to right.
type PanelKind int

const (
	PanelB0 PanelKind = iota
	PanelDWI
	PanelEADC
	PanelADC
	numPanels
)

func (k PanelKind) String() string {
	switch k {
	case PanelB0:
		return "b0"
	case PanelDWI:
		return "DWI"
	case PanelEADC:
		return "eADC"
	case PanelADC:
		return "ADC"
	}
	return fmt.Sprintf("PanelKind(%d)", int(k))
}

// Panel is where one map was drawn.
type Panel struct {
	Kind  PanelKind
	Title string
	// Rect holds the map: voxel (row r, column c) is the Scale x Scale
	// square at Rect.Min + (c*Scale, r*Scale).
	Rect  image.Rectangle
	Scale int
}

// voxel returns the pixels of voxel (row, col) in the panel.
func (p Panel) voxel(row, col int) image.Rectangle {
	x, y := p.Rect.Min.X+col*p.Scale, p.Rect.Min.Y+row*p.Scale
	return image.Rect(x, y, x+p.Scale, y+p.Scale)
}

// box returns the pixels of a box of voxels (row0, col0, row1, col1,
// inclusive, as rules.Region.BoxPixels), clipped to the panel.
func (p Panel) box(box [4]int) image.Rectangle {
	return p.voxel(box[0], box[1]).Union(p.voxel(box[2], box[3])).Intersect(p.Rect)
}

// Picture is one rendered preview.
type Picture struct {
	Image  *image.RGBA
	Slice  int             // index on the series' slice grid, 0-based
	Panels []Panel         // b0, DWI, eADC, ADC
	Legend image.Rectangle // the ADC colour bar: left edge 0, right edge adcMax
	// Outlined lists the findings outlined (their rules, in order).
	Outlined []string
}

// EncodePNG writes the picture as PNG.
func (p *Picture) EncodePNG(w io.Writer) error {
	bw := bufio.NewWriter(w)
	enc := png.Encoder{CompressionLevel: png.BestSpeed}
	if err := enc.Encode(bw, p.Image); err != nil {
		return err
	}
	return bw.Flush()
}

// Renderer draws previews. It holds the parsed font and the colour
// table, and is safe for concurrent use.
type Renderer struct {
	font    *opentype.Font
	viridis *Viridis
}

// NewRenderer parses the embedded font and builds the colour table.
func NewRenderer() (*Renderer, error) {
	f, err := opentype.Parse(goregular.TTF)
	if err != nil {
		return nil, fmt.Errorf("preview: font: %w", err)
	}
	return &Renderer{font: f, viridis: newViridis()}, nil
}

// Viridis returns the renderer's ADC colour table.
func (r *Renderer) Viridis() *Viridis { return r.viridis }

// DefaultSlice is the slice a preview shows when none is asked for: the
// first slice of the first finding with a region, else the middle slice.
func DefaultSlice(res *analysis.Result, findings []rules.Finding) int {
	n := 0
	if res != nil && res.B0 != nil {
		n = res.B0.Slices
	}
	for _, f := range findings {
		if f.Region != nil && len(f.Region.Slices) > 0 && f.Region.Slices[0] >= 0 && f.Region.Slices[0] < n {
			return f.Region.Slices[0]
		}
	}
	return n / 2
}

// Slices is the number of slices a preview of res can show (0 when
// nothing was computed).
func Slices(res *analysis.Result) int {
	if checkMaps(res) != nil {
		return 0
	}
	return res.B0.Slices
}

// checkMaps says why res cannot be drawn, or nil.
func checkMaps(res *analysis.Result) error {
	switch {
	case res == nil:
		return fmt.Errorf("%w: the series was not computed", ErrNoMaps)
	case res.CannotCompute != "":
		return fmt.Errorf("%w: %s", ErrNoMaps, res.CannotCompute)
	case res.B0 == nil || res.ADC == nil || res.EADC == nil || len(res.HighB) == 0 || res.HighB[len(res.HighB)-1].Trace == nil:
		return fmt.Errorf("%w: the computation left no b0, DWI, eADC and ADC", ErrNoMaps)
	case res.B0.Rows < 1 || res.B0.Cols < 1 || res.B0.Slices < 1:
		return fmt.Errorf("%w: the maps are empty", ErrNoMaps)
	}
	n := len(res.B0.Data)
	for _, v := range []*adc.Volume3{res.ADC, res.EADC, res.HighB[len(res.HighB)-1].Trace} {
		if v.Rows != res.B0.Rows || v.Cols != res.B0.Cols || v.Slices != res.B0.Slices || len(v.Data) != n {
			return fmt.Errorf("%w: the maps differ in size", ErrNoMaps)
		}
	}
	if len(res.Mask) != n {
		return fmt.Errorf("%w: no tissue mask", ErrNoMaps)
	}
	return nil
}

// Render draws slice z of res with the regions of findings that include
// z outlined. Findings without a region, or whose region lies on other
// slices, are not drawn. Errors: ErrNoMaps (wrapped, with the reason)
// and *SliceRangeError.
func (r *Renderer) Render(res *analysis.Result, z int, findings []rules.Finding) (*Picture, error) {
	if err := checkMaps(res); err != nil {
		return nil, err
	}
	rows, cols, nz := res.B0.Rows, res.B0.Cols, res.B0.Slices
	if z < 0 || z >= nz {
		return nil, &SliceRangeError{Slice: z, Slices: nz}
	}
	face, err := opentype.NewFace(r.font, &opentype.FaceOptions{Size: fontSize, DPI: 72, Hinting: font.HintingFull})
	if err != nil {
		return nil, fmt.Errorf("preview: font face: %w", err)
	}
	defer face.Close()

	scale := max(1, min(maxScale, (minPanelPixels+max(rows, cols)-1)/max(rows, cols)))
	pw, ph := cols*scale, rows*scale
	// Each panel sits at the left of a slot at least minPanelPixels
	// wide, so that a narrow matrix (fewer columns than rows) still
	// leaves room for the titles and keys.
	slot := max(pw, minPanelPixels)
	width := 2*margin + int(numPanels)*slot + (int(numPanels)-1)*gap
	height := margin + headerH + titleH + ph + keysH + footerH + margin
	img := image.NewRGBA(image.Rect(0, 0, width, height))
	draw.Draw(img, img.Bounds(), image.NewUniform(backgroundColor), image.Point{}, draw.Src)
	pic := &Picture{Image: img, Slice: z}
	top := margin + headerH + titleH
	dwi := res.HighB[len(res.HighB)-1]
	titles := [numPanels]string{
		fmt.Sprintf("b0 (b=%g)", res.B0Value),
		fmt.Sprintf("DWI b=%g", dwi.B),
		"eADC",
		"ADC",
	}
	if res.B0Value == 0 {
		titles[PanelB0] = "b0"
	}
	for k := range numPanels {
		x := margin + int(k)*(slot+gap)
		pic.Panels = append(pic.Panels, Panel{Kind: k, Title: titles[k], Rect: image.Rect(x, top, x+pw, top+ph), Scale: scale})
	}

	plane := rows * cols
	mask := res.Mask[z*plane : (z+1)*plane]
	b0 := res.B0.Slice(z)
	trace := dwi.Trace.Slice(z)
	b0Lo, b0Hi := window(res.B0, res.Mask, res.Parenchyma)
	dLo, dHi := window(dwi.Trace, res.Mask, res.Parenchyma)
	eadc := res.EADC.Slice(z)
	adcs := res.ADC.Slice(z)
	vir := r.viridis
	paint(img, pic.Panels[PanelB0], rows, cols, func(i int) color.RGBA { return grey(b0[i], b0Lo, b0Hi) })
	paint(img, pic.Panels[PanelDWI], rows, cols, func(i int) color.RGBA { return grey(trace[i], dLo, dHi) })
	paint(img, pic.Panels[PanelEADC], rows, cols, func(i int) color.RGBA {
		if !mask[i] {
			return noTissueColor
		}
		return grey(eadc[i], 0, 1)
	})
	paint(img, pic.Panels[PanelADC], rows, cols, func(i int) color.RGBA {
		v := adcs[i]
		switch {
		case !mask[i]:
			return noTissueColor
		case v != v:
			return undefinedColor
		}
		return vir.At(float64(v) / adcMax)
	})

	// Outlines last but one, text last: nothing covers an outline but
	// the text of the margins, which it never reaches.
	for _, f := range findings {
		if f.Region == nil || !slices.Contains(f.Region.Slices, z) {
			continue
		}
		box := f.Region.BoxPixels
		box[0], box[2] = max(0, min(box[0], box[2])), min(rows-1, max(box[0], box[2]))
		box[1], box[3] = max(0, min(box[1], box[3])), min(cols-1, max(box[1], box[3]))
		if box[0] > box[2] || box[1] > box[3] {
			continue
		}
		for _, p := range pic.Panels {
			outline(img, p.box(box), p.Rect.Inset(-outlineWidth))
		}
		if !slices.Contains(pic.Outlined, f.Rule) {
			pic.Outlined = append(pic.Outlined, f.Rule)
		}
	}

	t := &writer{img: img, face: face}
	// Header: which series and slice; no description, no patient data.
	head := fmt.Sprintf("slice %d of 0-%d", z, nz-1)
	if res.Series != nil {
		head = fmt.Sprintf("Series %d  ·  %s", res.Series.SeriesNumber, head)
	}
	if res.Series != nil && len(res.Series.Grid) == nz {
		head += fmt.Sprintf("  ·  position %.1f mm", res.Series.Grid[z])
	}
	if len(pic.Outlined) > 0 {
		head += "  ·  outlined: " + strings.Join(pic.Outlined, ", ")
	} else {
		head += "  ·  no finding region on this slice"
	}
	t.text(margin, margin+fontSize+2, head, textColor)
	for _, p := range pic.Panels {
		t.text(p.Rect.Min.X, top-7, p.Title, textColor)
	}

	// Keys under the panels.
	keyTop := top + ph + 8
	r.scaleBar(t, pic.Panels[PanelB0], res, keyTop)
	t.text(pic.Panels[PanelDWI].Rect.Min.X, keyTop+barH+2, "b0, DWI: black = no signal,", dimTextColor)
	t.text(pic.Panels[PanelDWI].Rect.Min.X, keyTop+barH+2+lineHeight, fmt.Sprintf("white = %g x median of brain without CSF", windowWhite), dimTextColor)
	greyBar := image.Rect(pic.Panels[PanelEADC].Rect.Min.X, keyTop, pic.Panels[PanelEADC].Rect.Max.X, keyTop+barH)
	colourBar(img, greyBar, func(f float64) color.RGBA { return grey(float32(f), 0, 1) })
	t.ticks(greyBar, []float64{0, 0.5, 1}, 1, "%g")
	pic.Legend = image.Rect(pic.Panels[PanelADC].Rect.Min.X, keyTop, pic.Panels[PanelADC].Rect.Max.X, keyTop+barH)
	colourBar(img, pic.Legend, func(f float64) color.RGBA { return vir.At(f) })
	t.ticks(pic.Legend, []float64{0, 1, 2, 3, 3.5}, adcMax/adcLegendUnit, "%g")
	t.text(pic.Legend.Min.X, keyTop+barH+2+2*lineHeight-2, "ADC in 1e-3 mm²/s", dimTextColor)

	foot := top + ph + keysH + fontSize
	t.text(margin, foot, "Magenta outline: region of a finding on this slice.  Black: outside the tissue mask (eADC, ADC).  Dark grey: value undefined.", dimTextColor)
	t.text(margin, foot+lineHeight, "dwiaudit checks acquisitions; it does not diagnose. Clinical decisions rest with the radiologist and local policy.", dimTextColor)
	return pic, nil
}

// window returns the grey window of v: black at zero or at the
// windowLow percentile of the tissue (mask) if lower, white at windowWhite times the
// median of the parenchyma (brain tissue without CSF), so that bright
// CSF and scalp fat do not push the brain into the dark end. Both come from the
// whole volume, so every slice of a series is drawn on one scale and an
// artifact on a few slices does not move the window; without
// parenchyma the tissue serves, without tissue every voxel.
func window(v *adc.Volume3, mask, parenchyma []bool) (lo, hi float32) {
	// A regular sample of about windowSample voxels: percentiles of
	// it are as good for display, and a 256x256x60 volume is not copied
	// for every picture.
	const windowSample = 1 << 16
	stride := max(1, len(v.Data)/windowSample)
	var buf []float32
	pick := func(m []bool) []float32 {
		if m != nil && len(m) != len(v.Data) {
			return nil
		}
		buf = buf[:0]
		for i := 0; i < len(v.Data); i += stride {
			if x := v.Data[i]; x == x && (m == nil || m[i]) {
				buf = append(buf, x)
			}
		}
		if len(buf) < minWindowVoxels && m != nil {
			return nil
		}
		return buf
	}
	vals := pick(mask)
	if vals == nil {
		vals = pick(nil)
	}
	if len(vals) == 0 {
		return 0, 1
	}
	lo = min(0, adc.PercentileInPlace(vals, windowLow))
	if vals = pick(parenchyma); vals == nil {
		if vals = pick(mask); vals == nil {
			vals = pick(nil)
		}
	}
	hi = windowWhite * adc.PercentileInPlace(vals, 50)
	if !(hi > lo) {
		hi = lo + 1
	}
	return lo, hi
}

// grey maps v in lo..hi to black..white (clipped); NaN is undefinedColor.
func grey(v, lo, hi float32) color.RGBA {
	if v != v {
		return undefinedColor
	}
	g := unit8(float64((v - lo) / (hi - lo)))
	return color.RGBA{g, g, g, 0xFF}
}

// paint fills a panel: voxel i (row-major) gets col(i), enlarged to a
// Scale x Scale square.
func paint(img *image.RGBA, p Panel, rows, cols int, col func(i int) color.RGBA) {
	s := p.Scale
	for r := range rows {
		y0 := p.Rect.Min.Y + r*s
		line := img.Pix[img.PixOffset(p.Rect.Min.X, y0):img.PixOffset(p.Rect.Max.X, y0)]
		for c := range cols {
			v := col(r*cols + c)
			for k := range s {
				o := 4 * (c*s + k)
				line[o], line[o+1], line[o+2], line[o+3] = v.R, v.G, v.B, v.A
			}
		}
		for k := 1; k < s; k++ {
			off := img.PixOffset(p.Rect.Min.X, y0+k)
			copy(img.Pix[off:off+len(line)], line)
		}
	}
}

// outline draws outlineWidth pixels of OutlineColor around box, outside
// it, clipped to clip.
func outline(img *image.RGBA, box, clip image.Rectangle) {
	outer := box.Inset(-outlineWidth)
	src := image.NewUniform(OutlineColor)
	for _, side := range []image.Rectangle{
		image.Rect(outer.Min.X, outer.Min.Y, outer.Max.X, box.Min.Y), // top
		image.Rect(outer.Min.X, box.Max.Y, outer.Max.X, outer.Max.Y), // bottom
		image.Rect(outer.Min.X, box.Min.Y, box.Min.X, box.Max.Y),     // left
		image.Rect(box.Max.X, box.Min.Y, outer.Max.X, box.Max.Y),     // right
	} {
		draw.Draw(img, side.Intersect(clip), src, image.Point{}, draw.Src)
	}
}

// colourBar fills rect left to right with col(0)..col(1).
func colourBar(img *image.RGBA, rect image.Rectangle, col func(f float64) color.RGBA) {
	w := rect.Dx()
	for x := range w {
		f := 0.0
		if w > 1 {
			f = float64(x) / float64(w-1)
		}
		c := col(f)
		for y := rect.Min.Y; y < rect.Max.Y; y++ {
			img.SetRGBA(rect.Min.X+x, y, c)
		}
	}
}

// scaleBar draws a bar of a round length in millimetres under panel p
// (from Pixel Spacing), or says that the spacing is unknown.
func (r *Renderer) scaleBar(t *writer, p Panel, res *analysis.Result, y int) {
	colMM := 0.0
	if res.Series != nil {
		colMM = res.Series.Reference.PixelSpacing[1]
	}
	if !(colMM > 0) || math.IsInf(colMM, 0) {
		t.text(p.Rect.Min.X, y+barH, "no pixel spacing: no scale bar", dimTextColor)
		return
	}
	pxPerMM := float64(p.Scale) / colMM
	length := 0.0
	for _, mm := range []float64{1, 2, 5, 10, 20, 50, 100, 200} {
		if mm*pxPerMM <= float64(p.Rect.Dx())/2 {
			length = mm
		}
	}
	if length == 0 {
		t.text(p.Rect.Min.X, y+barH, fmt.Sprintf("pixel %.3g mm", colMM), dimTextColor)
		return
	}
	n := int(math.Round(length * pxPerMM))
	x0 := p.Rect.Min.X
	bar := image.Rect(x0, y+3, x0+n, y+6)
	draw.Draw(t.img, bar, image.NewUniform(textColor), image.Point{}, draw.Src)
	draw.Draw(t.img, image.Rect(x0, y, x0+1, y+barH), image.NewUniform(textColor), image.Point{}, draw.Src)
	draw.Draw(t.img, image.Rect(x0+n-1, y, x0+n, y+barH), image.NewUniform(textColor), image.Point{}, draw.Src)
	t.text(x0+n+6, y+barH, fmt.Sprintf("%g mm", length), textColor)
}

// writer draws text.
type writer struct {
	img  *image.RGBA
	face font.Face
}

// text draws s with its baseline at y, starting at x.
func (w *writer) text(x, y int, s string, c color.Color) {
	d := font.Drawer{Dst: w.img, Src: image.NewUniform(c), Face: w.face, Dot: fixed.P(x, y)}
	d.DrawString(s)
}

// ticks labels a colour bar: tick marks under rect at each value of at
// (in label units; the bar spans 0..full) with its label centred under
// it, kept inside the bar's width. On a narrow bar a label that would
// touch one already drawn is left out; the ends are drawn first.
func (w *writer) ticks(rect image.Rectangle, at []float64, full float64, format string) {
	order := make([]int, 0, len(at))
	if len(at) > 0 {
		order = append(order, len(at)-1)
	}
	for i := range len(at) - 1 {
		order = append(order, i)
	}
	var drawn [][2]int
	for _, i := range order {
		v := at[i]
		x := rect.Min.X + int(math.Round(v/full*float64(rect.Dx()-1)))
		draw.Draw(w.img, image.Rect(x, rect.Max.Y, x+1, rect.Max.Y+4), image.NewUniform(textColor), image.Point{}, draw.Src)
		label := fmt.Sprintf(format, v)
		lw := font.MeasureString(w.face, label).Round()
		lx := min(max(x-lw/2, rect.Min.X), rect.Max.X-lw)
		if slices.ContainsFunc(drawn, func(d [2]int) bool { return lx < d[1]+4 && d[0] < lx+lw+4 }) {
			continue
		}
		drawn = append(drawn, [2]int{lx, lx + lw})
		w.text(lx, rect.Max.Y+4+fontSize, label, textColor)
	}
}
