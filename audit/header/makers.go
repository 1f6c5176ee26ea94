package header

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/dwi"
)

// A MakerReader reads one maker's private diffusion encoding: what an
// image's b-value and gradient direction are when the scanner did not
// (or not only) fill the MR Diffusion Macro (PS3.3 C.8.13.5.9), and, for
// an image that holds several slices side by side (a mosaic), how to
// split it into its slices.
//
// Extraction runs the readers that apply to an image after the standard
// attributes and the configured private sources (PrivateSource) are read,
// and takes from a reader only what those left unknown: standard
// attributes win, then the site's configuration, then the built-in
// reader. Every reader that applies is run, in list order, until the
// b-value and the direction are both known.
//
// A reader applies to an image when the image's Manufacturer (0008,0070)
// contains one of Manufacturers (case-insensitively; an empty list
// matches any) and, when Creators is not empty, one of Creators reserves a
// private block in the image (PS3.5 7.8.1), at the top level or in the
// frame's functional groups. A reader must name at least one of the two.
type MakerReader struct {
	// Name labels the reader: Frame.BValueSource is "maker:<Name>" for
	// a b-value it gave, and errors name it.
	Name string
	// Manufacturers are substrings of Manufacturer (0008,0070) that
	// select the reader ("GE" matches "GE MEDICAL SYSTEMS").
	Manufacturers []string
	// Creators are private creator values (compared without padding)
	// one of which must be present.
	Creators []string
	// Read says what the maker's elements give for the image. An element
	// that is present but unreadable is an error (a *PrivateSourceError,
	// through MakerImage.Fail), which fails the image unless its b-value
	// is already known from the standard attributes or a configured
	// source; an absent element is not an error.
	Read func(im *MakerImage) (MakerDiffusion, error)
	// Split, optional, says whether the image is a mosaic and how it is
	// laid out; ok false leaves the image whole.
	Split func(im *MakerImage) (m Mosaic, ok bool, err error)
}

// MakerDiffusion is what a maker reader found for one image. Only the
// parts whose Has field is set (or, for Directionality, that are not
// DirectionalityUnknown) are used.
type MakerDiffusion struct {
	BValue    float64 // s/mm^2, offsets already removed
	HasBValue bool
	// Gradient is the unit gradient direction in patient coordinates
	// (the LPS axes of PS3.3 C.7.6.2.1.1, as Diffusion Gradient
	// Orientation (0018,9089) is); a reader whose maker stores it in
	// image axes converts it with ImageToPatient.
	Gradient    [3]float64
	HasGradient bool
	// Directionality is what the maker's elements say the image is: a
	// b0 (DirectionalityNone), one direction, or the scanner's
	// isotropic (trace) image.
	Directionality dwi.Directionality
}

// Mosaic is an image holding Slices slices as tiles in a grid of
// TilesAcross tiles per row, filled row by row from the top left (the
// Siemens mosaic layout, common practice). The frame is split into
// Slices frames of TileRows x TileColumns pixels.
type Mosaic struct {
	Slices                int
	TilesAcross           int
	TileRows, TileColumns int
	// Positions are the Image Position (Patient) of each slice's first
	// pixel (PS3.3 C.7.6.2.1.1), in tile order; the orientation and
	// pixel spacing are the mosaic's.
	Positions [][3]float64
}

// validate checks the layout against the image it splits.
func (m Mosaic) validate(rows, cols int) error {
	switch {
	case m.Slices < 1 || m.TilesAcross < 1 || m.TileRows < 1 || m.TileColumns < 1:
		return fmt.Errorf("mosaic of %d slices, %d tiles across, %dx%d tiles", m.Slices, m.TilesAcross, m.TileRows, m.TileColumns)
	case len(m.Positions) != m.Slices:
		return fmt.Errorf("mosaic of %d slices with %d positions", m.Slices, len(m.Positions))
	}
	down := (m.Slices + m.TilesAcross - 1) / m.TilesAcross
	if m.TilesAcross*m.TileColumns > cols || down*m.TileRows > rows {
		return fmt.Errorf("mosaic of %d x %d tiles of %dx%d does not fit a %dx%d image", m.TilesAcross, down, m.TileRows, m.TileColumns, rows, cols)
	}
	return nil
}

// MakerImage is what a maker reader sees of one image: the frame as far
// as it has been read (standard attributes, geometry, scanner) and its
// data set levels.
type MakerImage struct {
	// Frame is the image as read so far; a reader must not change it.
	Frame *dwi.Frame
	// levels are where private elements are looked for, in order (see
	// privateLevels): the frame's functional groups, the shared ones,
	// the top level.
	levels []level
	bo     binary.ByteOrder
	reader string
}

// Private returns the element at offset elem of the block that creator
// reserves in group (PS3.5 7.8.1: (gggg,00xx) holds the creator, the
// block is (gggg,xx00)-(gggg,xxFF)), from the first level where the
// creator is present. found is false when the creator is nowhere; e is
// nil when the creator is present but the element is not.
func (im *MakerImage) Private(creator string, group uint16, elem uint8) (e *PrivateElement, found bool) {
	for _, l := range im.levels {
		block := creatorBlock(l, creator, group)
		if block < 0 {
			continue
		}
		t := tag.Tag{Group: group, Element: uint16(block)<<8 | uint16(elem)}
		d := l.find(t)
		if d == nil {
			return nil, true
		}
		return &PrivateElement{e: d, bo: im.bo, im: im}, true
	}
	return nil, false
}

// Text returns a standard text attribute of the image: from the frame's
// functional groups first, else the top level (joined with a backslash,
// padding removed; "" when absent).
func (im *MakerImage) Text(t tag.Tag) string {
	for _, l := range im.levels {
		if s := l.str(t); s != "" {
			return s
		}
	}
	return ""
}

// Fail is the error a reader returns for a present but unreadable
// element.
func (im *MakerImage) Fail(p *PrivateElement, format string, args ...any) error {
	tagText := ""
	if p != nil {
		tagText = fmt.Sprintf("(%04X,%04X)", p.e.Tag.Group, p.e.Tag.Element)
	}
	return &PrivateSourceError{Source: makerSource + im.reader, Tag: tagText, Reason: fmt.Sprintf(format, args...)}
}

// PrivateElement is one private element found through its creator.
type PrivateElement struct {
	e  *dicom.Element
	bo binary.ByteOrder
	im *MakerImage
}

// Numbers reads the element's values as numbers: typed values as they
// are, text as decimal strings, bytes (an implicit VR private element is
// UN) decoded as kind.
func (p *PrivateElement) Numbers(kind ValueKind) ([]float64, error) {
	return numbers(p.e, kind, p.bo)
}

// Bytes returns the element's value as stored, for a reader that parses
// a maker's own binary layout; nil when the parser typed it (a string or
// number VR).
func (p *PrivateElement) Bytes() []byte {
	if p.e.Value == nil {
		return nil
	}
	b, _ := p.e.Value.GetValue().([]byte)
	return b
}

// Strings returns the element's text values, padding removed.
func (p *PrivateElement) Strings() []string {
	return level{p.e}.strs(p.e.Tag)
}

// items returns the items of a private sequence, nil when the element is
// not a sequence.
func (p *PrivateElement) items() []level {
	return level{p.e}.items(p.e.Tag)
}

// creatorBlock is the block number xx that creator reserves in group of
// l, -1 when none does.
func creatorBlock(l level, creator string, group uint16) int {
	want := strings.TrimSpace(creator)
	for _, e := range l {
		if e.Tag.Group != group || e.Tag.Element < 0x0010 || e.Tag.Element > 0x00FF {
			continue
		}
		if strings.EqualFold(strings.TrimSpace(strings.Join(level{e}.strs(e.Tag), `\`)), want) {
			return int(e.Tag.Element)
		}
	}
	return -1
}

// hasCreator says whether creator reserves a block in any group of l.
func hasCreator(l level, creator string) bool {
	want := strings.TrimSpace(creator)
	for _, e := range l {
		if e.Tag.Group%2 == 1 && e.Tag.Element >= 0x0010 && e.Tag.Element <= 0x00FF &&
			strings.EqualFold(strings.TrimSpace(strings.Join(level{e}.strs(e.Tag), `\`)), want) {
			return true
		}
	}
	return false
}

// applies says whether r reads im.
func (r *MakerReader) applies(im *MakerImage) bool {
	if len(r.Manufacturers) == 0 && len(r.Creators) == 0 {
		return false
	}
	if len(r.Manufacturers) > 0 {
		m := strings.ToUpper(im.Frame.Scanner.Manufacturer)
		ok := false
		for _, want := range r.Manufacturers {
			if strings.Contains(m, strings.ToUpper(want)) {
				ok = true
				break
			}
		}
		if !ok {
			return false
		}
	}
	if len(r.Creators) == 0 {
		return true
	}
	for _, c := range r.Creators {
		for _, l := range im.levels {
			if hasCreator(l, c) {
				return true
			}
		}
	}
	return false
}

// makerSource prefixes Frame.BValueSource for a b-value a maker reader
// gave.
const makerSource = "maker:"

// DefaultMakers returns the built-in maker readers, in the order they are
// tried. Each lives in its own file; docs/makers.md lists the elements
// they read and the sources.
func DefaultMakers() []MakerReader {
	return []MakerReader{
		SiemensReader(),
		geReader(),
		philipsReader(),
		canonReader(),
		uihReader(),
	}
}

// makers are the readers extraction uses: the configured list, or the
// built-in ones when none is configured.
func (o ExtractOptions) makers() []MakerReader {
	if o.Makers == nil {
		return DefaultMakers()
	}
	return o.Makers
}

// validate reports what makes the reader unusable.
func (r *MakerReader) validate() error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%w: maker reader %q: %s", ErrInvalidOptions, r.Name, fmt.Sprintf(format, args...)))
	}
	if r.Name == "" {
		bad("Name is empty")
	}
	if len(r.Manufacturers) == 0 && len(r.Creators) == 0 {
		bad("names neither a manufacturer nor a private creator")
	}
	if r.Read == nil && r.Split == nil {
		bad("has neither Read nor Split")
	}
	return errors.Join(errs...)
}

// readMakers runs the readers that apply to f, filling what the standard
// attributes and the configured sources left unknown, and returns the
// mosaic layout a reader gave (nil for none).
func (x *extraction) readMakers(f *dwi.Frame, per, shared level) (*Mosaic, error) {
	im := &MakerImage{Frame: f, levels: privateLevels(per, shared, x.top), bo: x.bo}
	var mosaic *Mosaic
	for i := range x.makers {
		r := &x.makers[i]
		if !r.applies(im) {
			continue
		}
		im.reader = r.Name
		if r.Read != nil && (!f.HasBValue || !f.HasGradient || f.Directionality == dwi.DirectionalityUnknown) {
			d, err := r.Read(im)
			switch {
			case err != nil && f.HasBValue:
				// The b-value is known from the standard attributes or a
				// configured source, which win: an unreadable private
				// element of the maker's does not make the image
				// unreadable.
			case err != nil:
				return nil, fmt.Errorf("maker reader %s: %w", r.Name, err)
			default:
				merge(f, d, r.Name)
			}
		}
		if r.Split != nil && mosaic == nil {
			m, ok, err := r.Split(im)
			if err != nil {
				return nil, fmt.Errorf("maker reader %s: %w", r.Name, err)
			}
			if ok {
				if err := m.validate(f.Geometry.Rows, f.Geometry.Columns); err != nil {
					return nil, fmt.Errorf("%w: maker reader %s: %v", ErrMalformed, r.Name, err)
				}
				mosaic = &m
			}
		}
	}
	return mosaic, nil
}

// merge takes from d what f does not know yet, or what f holds that is
// not consistent: a zero gradient vector (some scanners fill Diffusion
// Gradient Orientation with 0\0\0 for b0 and trace images) is no
// direction, and a Diffusion Directionality of NONE ("no diffusion
// weighting", PS3.3 C.8.13.5.9) on an image above maxB0 is not what the
// image is.
func merge(f *dwi.Frame, d MakerDiffusion, name string) {
	if !f.HasBValue && d.HasBValue && d.BValue >= 0 && !math.IsNaN(d.BValue) && !math.IsInf(d.BValue, 0) {
		f.BValue, f.HasBValue, f.BValueSource = d.BValue, true, makerSource+name
	}
	if (!f.HasGradient || f.Gradient == [3]float64{}) && d.HasGradient {
		if u, ok := unitVector(d.Gradient); ok {
			f.Gradient, f.HasGradient = u, true
		}
	}
	noneAboveB0 := f.Directionality == dwi.DirectionalityNone && f.HasBValue && f.BValue > maxB0
	if d.Directionality != dwi.DirectionalityUnknown && (f.Directionality == dwi.DirectionalityUnknown || noneAboveB0) {
		f.Directionality = d.Directionality
	}
}

// maxB0 (s/mm^2) is the largest b-value still read as a b0 when a maker's
// elements say whether an image is a b0, a direction or a trace: b-values
// up to 50 are b0 (common practice; scanners report a few s/mm^2 from the
// imaging gradients for a nominal b = 0).
const maxB0 = 50

// directionalityOf is what a maker's b-value and gradient say an image
// is: a b0 up to maxB0, one direction when the gradient is a unit vector,
// else (a b-value with a zero vector) the scanner's isotropic (trace)
// image. Makers that label their images say so more directly and do not
// use it.
func directionalityOf(b float64, hasB bool, g [3]float64, hasG bool) dwi.Directionality {
	switch {
	case !hasB:
		return dwi.DirectionalityUnknown
	case b <= maxB0:
		return dwi.DirectionalityNone
	case hasG:
		if _, ok := unitVector(g); ok {
			return dwi.DirectionalityDirectional
		}
	}
	return dwi.DirectionalityIsotropic
}

// unitVectorTolerance is how far from 1 the length of a stored direction
// may be and still be a direction: makers store them as DS or FL with a
// few digits (common practice); a zero vector (a b0 or trace image on
// some scanners) is no direction.
const unitVectorTolerance = 0.05

// unitVector returns v normalised, false when v is not close to a unit
// vector.
func unitVector(v [3]float64) ([3]float64, bool) {
	n := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
	if math.IsNaN(n) || math.Abs(n-1) > unitVectorTolerance {
		return [3]float64{}, false
	}
	return [3]float64{v[0] / n, v[1] / n, v[2] / n}, true
}

// ImageToPatient turns a vector given in image axes (along the rows,
// along the columns, along the slice normal) into patient coordinates,
// with the image's Image Orientation (Patient) (PS3.3 C.7.6.2.1.1: the
// row and column direction cosines; the normal is their cross product).
// ok is false when the image has no orientation.
func ImageToPatient(v [3]float64, g dwi.Geometry) ([3]float64, bool) {
	if g.Orientation == [6]float64{} {
		return [3]float64{}, false
	}
	o := g.Orientation
	r := [3]float64{o[0], o[1], o[2]}
	c := [3]float64{o[3], o[4], o[5]}
	n := [3]float64{r[1]*c[2] - r[2]*c[1], r[2]*c[0] - r[0]*c[2], r[0]*c[1] - r[1]*c[0]}
	var out [3]float64
	for i := range out {
		out[i] = v[0]*r[i] + v[1]*c[i] + v[2]*n[i]
	}
	return out, true
}

// splitMosaics replaces every frame that has a mosaic layout by its
// slices: the same header, Tile k (1-based), the tile's rows, columns and
// position, and its pixels copied out of the mosaic.
func splitMosaics(frames []dwi.Frame, mosaics []*Mosaic) []dwi.Frame {
	n, any := 0, false
	for _, m := range mosaics {
		if m != nil {
			n, any = n+m.Slices, true
		} else {
			n++
		}
	}
	if !any {
		return frames
	}
	out := make([]dwi.Frame, 0, n)
	for i, f := range frames {
		m := mosaics[i]
		if m == nil {
			out = append(out, f)
			continue
		}
		var slab []float32
		if f.Pixels != nil {
			slab = make([]float32, m.Slices*m.TileRows*m.TileColumns)
		}
		for k := range m.Slices {
			t := f
			t.Tile = k + 1
			t.Geometry.Rows, t.Geometry.Columns = m.TileRows, m.TileColumns
			t.Geometry.Position = m.Positions[k]
			// A mosaic may carry no Image Position (Patient) of its own
			// (the slices' positions are elsewhere): each slice's is now
			// known, and with an orientation the slice is placed.
			t.Geometry.Known = t.Geometry.Orientation != [6]float64{}
			t.Pixels = nil
			if f.Pixels != nil {
				px := slab[k*m.TileRows*m.TileColumns : (k+1)*m.TileRows*m.TileColumns : (k+1)*m.TileRows*m.TileColumns]
				r0, c0 := (k/m.TilesAcross)*m.TileRows, (k%m.TilesAcross)*m.TileColumns
				for r := range m.TileRows {
					src := (r0+r)*f.Geometry.Columns + c0
					copy(px[r*m.TileColumns:(r+1)*m.TileColumns], f.Pixels[src:src+m.TileColumns])
				}
				t.Pixels = px
			}
			out = append(out, t)
		}
	}
	return out
}
