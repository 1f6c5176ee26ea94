package header

import (
	"bytes"
	"cmp"
	"compress/flate"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"github.com/suyashkumar/dicom/pkg/tag"
	"github.com/suyashkumar/dicom/pkg/uid"

	"dwiaudit/audit/dwi"
	"dwiaudit/scp/part10"
)

// Limits of extraction.
const (
	// maxFrames caps Number of Frames (0028,0008). A large multi-frame
	// diffusion acquisition holds a few tens of thousands of frames (80
	// slices x 256 directions is 20480, common practice); a bigger count
	// is a broken or hostile header, and each frame costs a dwi.Frame value
	// before any pixel is read.
	maxFrames = 1 << 16

	// maxInflatedDataSet caps the inflated size of a Deflated Explicit VR
	// Little Endian data set (PS3.5 A.5), which has to be inflated into
	// memory to be walked and parsed. 512 MiB holds a large multi-frame
	// DWI (60 slices x 65 volumes x 256 x 256 x 16 bits is about 510 MB,
	// common practice) and stops a deflate bomb (about 1000:1, from
	// memory) short of exhausting memory.
	maxInflatedDataSet = 512 << 20
)

// dwi.Frame.BValueSource values for the standard attribute.
const (
	sourceStandard = "standard"  // (0018,9087) at the top level, or in a top-level MR Diffusion Sequence
	sourcePerFrame = "per-frame" // MR Diffusion Sequence in the Per-frame Functional Groups
	sourceShared   = "shared"    // MR Diffusion Sequence in the Shared Functional Groups
	sourcePrivate  = "private:"  // followed by PrivateSource.Name
)

// Transfer syntaxes whose pixel data is native (PS3.5 A.1, A.2, A.3,
// A.5); every other one the parser knows is encapsulated (A.4).
func nativeSyntax(ts string) bool {
	switch ts {
	case uid.ImplicitVRLittleEndian, uid.ExplicitVRLittleEndian, uid.ExplicitVRBigEndian, uid.DeflatedExplicitVRLittleEndian:
		return true
	}
	return false
}

// ExtractFile reads the diffusion header model of every image in the
// Part 10 file at path: one dwi.Frame for a classic image, one per frame of a
// multi-frame instance, none for an instance without images. It never
// panics and never lets the data-set parser allocate from a length the
// file does not hold. Errors wrap ErrNotPart10,
// ErrUnknownTransferSyntax, ErrMalformed, ErrPixelData,
// ErrPrivateSource or ErrInvalidOptions, or are I/O errors. Missing
// geometry is not an error here (dwi.Geometry.Known is false); assembly needs
// geometry and says so. Encapsulated (compressed) pixel data gives frames
// with Encapsulated set and no pixels.
func ExtractFile(path string, opt ExtractOptions) ([]dwi.Frame, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	info, err := f.Stat()
	if err != nil {
		return nil, err
	}
	return extract(f, info.Size(), opt)
}

// Extract is ExtractFile over the bytes of a Part 10 file.
func Extract(data []byte, opt ExtractOptions) ([]dwi.Frame, error) {
	return extract(bytes.NewReader(data), int64(len(data)), opt)
}

func extract(ra io.ReaderAt, size int64, opt ExtractOptions) ([]dwi.Frame, error) {
	if err := opt.validate(); err != nil {
		return nil, err
	}
	meta, off, err := part10.ReadMeta(io.NewSectionReader(ra, 0, size))
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrNotPart10, err)
	}
	ts := meta.TransferSyntaxUID
	bo, implicit, err := uid.ParseTransferSyntaxUID(ts)
	if err != nil {
		// The parser would go on with a nil byte order and panic.
		return nil, fmt.Errorf("%w: %q", ErrUnknownTransferSyntax, ts)
	}
	if ts == uid.DeflatedExplicitVRLittleEndian {
		// PS3.5 A.5: after the file meta the data set is raw deflate;
		// inflated, it is Explicit VR Little Endian, and goes on behind a
		// file meta that says so.
		data, n, err := inflate(io.NewSectionReader(ra, off, size-off), meta)
		if err != nil {
			return nil, err
		}
		ra, size, off = bytes.NewReader(data), int64(len(data)), n
	}

	layout, err := FindPixelData(io.NewSectionReader(ra, off, size-off), bo, implicit, off, size)
	if err != nil {
		return nil, err
	}
	regionEnd := size
	if layout.Tag != 0 {
		regionEnd = layout.Offset
	}
	ds, err := parse(io.NewSectionReader(ra, 0, regionEnd), regionEnd)
	if err != nil {
		return nil, err
	}
	x := &extraction{
		top: level(ds.Elements), bo: bo, ts: ts, opt: opt, makers: opt.makers(),
		native: nativeSyntax(ts), layout: layout, ra: ra, size: size,
	}
	return x.frames()
}

// inflate inflates a deflated data set behind a rewritten file meta and
// returns the whole and the offset of the data set in it.
func inflate(r io.Reader, meta part10.Meta) ([]byte, int64, error) {
	meta.TransferSyntaxUID = uid.ExplicitVRLittleEndian
	var b bytes.Buffer
	if err := part10.WriteHeader(&b, meta); err != nil {
		return nil, 0, fmt.Errorf("%w: %w", ErrNotPart10, err)
	}
	n := int64(b.Len())
	m, err := b.ReadFrom(io.LimitReader(flate.NewReader(r), maxInflatedDataSet+1))
	var corrupt flate.CorruptInputError
	switch {
	case errors.As(err, &corrupt), errors.Is(err, io.ErrUnexpectedEOF):
		return nil, 0, fmt.Errorf("%w: deflated data set: %v", ErrMalformed, err)
	case err != nil:
		return nil, 0, err
	case m > maxInflatedDataSet:
		return nil, 0, fmt.Errorf("%w: deflated data set inflates past %d bytes", ErrMalformed, maxInflatedDataSet)
	}
	return b.Bytes(), n, nil
}

// extraction is the state of reading one file's frames.
type extraction struct {
	top    level
	bo     binary.ByteOrder
	ts     string
	opt    ExtractOptions
	makers []MakerReader
	native bool
	layout PixelDataLayout
	ra     io.ReaderAt
	size   int64
	kind   dwi.MapKind // of the instance (dwi.Classify); a map not audited is read for its header only
}

func (x *extraction) frames() ([]dwi.Frame, error) {
	top := x.top
	rows, _ := top.integer(tag.Rows, ValueUS, x.bo)
	cols, _ := top.integer(tag.Columns, ValueUS, x.bo)
	perFrame := top.items(tag.PerFrameFunctionalGroupsSequence)
	nfElem := top.find(tag.NumberOfFrames)
	multi := nfElem != nil || perFrame != nil
	n := 1
	if nfElem != nil {
		v, ok := top.integer(tag.NumberOfFrames, ValueIS, x.bo)
		if !ok || v < 1 || v > maxFrames {
			return nil, fmt.Errorf("%w: Number of Frames %q (want 1..%d)", ErrMalformed, top.str(tag.NumberOfFrames), maxFrames)
		}
		n = v
	} else if perFrame != nil {
		n = len(perFrame)
	}
	if perFrame != nil && len(perFrame) != n {
		// PS3.3 C.7.6.16: one Per-frame Functional Groups item per frame.
		return nil, fmt.Errorf("%w: %d per-frame functional group items for %d frames", ErrMalformed, len(perFrame), n)
	}
	if x.layout.Tag == 0 {
		switch {
		case rows == 0 && cols == 0 && perFrame == nil:
			return nil, nil // not an image (a report, a presentation state)
		case x.opt.LoadPixels:
			return nil, fmt.Errorf("%w: no pixel data", ErrPixelData)
		case n > 1 && perFrame == nil:
			return nil, fmt.Errorf("%w: Number of Frames %d and no pixel data", ErrPixelData, n)
		}
	}
	// Derived maps the audit does not use (FA, colour FA, tensor b0) are
	// read for their header only: their pixels may be of a kind the
	// audit does not decode (RGB), and are never computed on.
	spp, _ := top.integer(tag.SamplesPerPixel, ValueUS, x.bo)
	x.kind = dwi.Classify(dwi.ClassifyInput{SOPClassUID: top.str(tag.SOPClassUID), SamplesPerPixel: spp, ImageType: top.strs(tag.ImageType)})
	var pf *pixelFormat
	if x.kind.Audited() {
		var err error
		if pf, err = x.checkPixelData(rows, cols, n); err != nil {
			return nil, err
		}
	}

	shared := top.item(tag.SharedFunctionalGroupsSequence)
	base := x.common()
	frames := make([]dwi.Frame, n)
	mosaics := make([]*Mosaic, n)
	for i := range frames {
		var per level
		if perFrame != nil {
			per = perFrame[i]
		}
		f := &frames[i]
		*f = base
		if multi {
			f.FrameNumber = i + 1
		}
		var err error
		if mosaics[i], err = x.frame(f, per, shared, rows, cols); err != nil {
			return nil, err
		}
	}
	if x.opt.LoadPixels && pf != nil {
		if err := x.loadPixels(frames, pf); err != nil {
			return nil, err
		}
	}
	return splitMosaics(frames, mosaics), nil
}

// common reads what every frame of the instance shares.
func (x *extraction) common() dwi.Frame {
	t := x.top
	s := dwi.Scanner{
		StationName:        t.str(tag.StationName),
		DeviceSerialNumber: t.str(tag.DeviceSerialNumber),
		InstitutionName:    t.str(tag.InstitutionName),
		Manufacturer:       t.str(tag.Manufacturer),
		ModelName:          t.str(tag.ManufacturerModelName),
		CallingAETitle:     x.opt.CallingAETitle,
	}
	if x.opt.ScannerLabel != nil {
		s.Label = x.opt.ScannerLabel(s)
	}
	series, _ := t.integer(tag.SeriesNumber, ValueIS, x.bo)
	instance, _ := t.integer(tag.InstanceNumber, ValueIS, x.bo)
	return dwi.Frame{
		SOPInstanceUID:      t.str(tag.SOPInstanceUID),
		SOPClassUID:         t.str(tag.SOPClassUID),
		TransferSyntaxUID:   x.ts,
		InstanceNumber:      instance,
		StudyInstanceUID:    t.str(tag.StudyInstanceUID),
		SeriesInstanceUID:   t.str(tag.SeriesInstanceUID),
		FrameOfReferenceUID: t.str(tag.FrameOfReferenceUID),
		SeriesNumber:        series,
		SeriesDescription:   t.str(tag.SeriesDescription),
		ProtocolName:        t.str(tag.ProtocolName),
		BodyPartExamined:    t.str(tag.BodyPartExamined),
		StudyDate:           t.str(tag.StudyDate),
		AccessionNumber:     t.str(tag.AccessionNumber),
		Modality:            t.str(tag.Modality),
		AcquisitionContrast: t.str(tag.AcquisitionContrast),
		Scanner:             s,
		Encapsulated:        x.layout.Tag != 0 && (!x.native || x.layout.Length < 0),
	}
}

// macro returns the item of functional group sequence t that applies to
// a frame: its own (Per-frame Functional Groups) first, then the Shared
// Functional Groups (PS3.3 C.7.6.16), with the label of where it came
// from.
func macro(per, shared level, t tag.Tag) (level, string) {
	if it := per.item(t); it != nil {
		return it, sourcePerFrame
	}
	if it := shared.item(t); it != nil {
		return it, sourceShared
	}
	return nil, ""
}

// frame fills the per-frame attributes of f, and returns the mosaic
// layout a maker reader gave for it (nil when it is one slice).
func (x *extraction) frame(f *dwi.Frame, per, shared level, rows, cols int) (*Mosaic, error) {
	top, bo := x.top, x.bo

	// Geometry: PS3.3 C.7.6.2 (classic) or the Plane Position, Plane
	// Orientation and Pixel Measures functional groups (C.7.6.16.2.3,
	// .2.4, .2.1).
	g := dwi.Geometry{Rows: rows, Columns: cols}
	pick := func(seq, t tag.Tag, n int) []float64 {
		if it, _ := macro(per, shared, seq); it != nil {
			if v := it.floats(t, ValueDS, bo); len(v) == n {
				return v
			}
		}
		if v := top.floats(t, ValueDS, bo); len(v) == n {
			return v
		}
		return nil
	}
	pos := pick(tag.PlanePositionSequence, tag.ImagePositionPatient, 3)
	ori := pick(tag.PlaneOrientationSequence, tag.ImageOrientationPatient, 6)
	if ori != nil {
		// Kept without a position too: a mosaic's slices get theirs
		// from a maker reader (makers.go).
		copy(g.Orientation[:], ori)
	}
	if pos != nil && ori != nil {
		copy(g.Position[:], pos)
		g.Known = true
	}
	if v := pick(tag.PixelMeasuresSequence, tag.PixelSpacing, 2); v != nil {
		copy(g.PixelSpacing[:], v)
	}
	if v := pick(tag.PixelMeasuresSequence, tag.SliceThickness, 1); v != nil {
		g.SliceThickness = v[0]
	}
	if v := pick(tag.PixelMeasuresSequence, tag.SpacingBetweenSlices, 1); v != nil {
		g.SpacingBetweenSlices = v[0]
	}
	f.Geometry = g

	// Rescale: Pixel Value Transformation (C.7.6.16.2.9) or the top
	// level (C.7.6.3.1 / C.11.1).
	f.RescaleSlope, f.RescaleIntercept = 1, 0
	if v := pick(tag.PixelValueTransformationSequence, tag.RescaleSlope, 1); v != nil {
		f.RescaleSlope = v[0]
	}
	if v := pick(tag.PixelValueTransformationSequence, tag.RescaleIntercept, 1); v != nil {
		f.RescaleIntercept = v[0]
	}

	// Image Type, or Frame Type from the MR Image Frame Type functional
	// group (C.8.13.5.1).
	f.ImageType = top.strs(tag.ImageType)
	if it, _ := macro(per, shared, tag.MRImageFrameTypeSequence); it != nil {
		if v := it.strs(tag.FrameType); v != nil {
			f.ImageType = v
		}
	}

	// Real World Value Mapping (C.7.6.16.2.11, or top level C.7.6.16.2.11.1).
	rwv := per.items(tag.RealWorldValueMappingSequence)
	if rwv == nil {
		rwv = shared.items(tag.RealWorldValueMappingSequence)
	}
	if rwv == nil {
		rwv = top.items(tag.RealWorldValueMappingSequence)
	}
	f.RealWorld = nil
	for _, it := range rwv {
		m := dwi.RealWorldValue{Slope: 1}
		if v, ok := it.float(tag.RealWorldValueSlope, ValueFD, bo); ok {
			m.Slope = v
		}
		if v, ok := it.float(tag.RealWorldValueIntercept, ValueFD, bo); ok {
			m.Intercept = v
		}
		m.Units = it.item(tag.MeasurementUnitsCodeSequence).str(tag.CodeValue)
		f.RealWorld = append(f.RealWorld, m)
	}
	f.Kind = dwi.Classify(dwi.ClassifyInput{SOPClassUID: f.SOPClassUID, ImageType: f.ImageType, RealWorld: f.RealWorld})
	if !x.kind.Audited() {
		f.Kind = x.kind
	}

	x.diffusion(f, per, shared)
	if !f.HasBValue {
		if err := x.private(f, per, shared); err != nil {
			return nil, err
		}
	}
	return x.readMakers(f, per, shared)
}

// diffusion reads the MR Diffusion Macro (PS3.3 C.8.13.5.9): from the
// frame's functional groups, else a top-level MR Diffusion Sequence, else
// the same attributes at the top level, where classic MR images put
// them. Each attribute comes from the first of those places that has it.
func (x *extraction) diffusion(f *dwi.Frame, per, shared level) {
	bo := x.bo
	type place struct {
		l      level
		source string
	}
	var places []place
	if it := per.item(tag.MRDiffusionSequence); it != nil {
		places = append(places, place{it, sourcePerFrame})
	}
	if it := shared.item(tag.MRDiffusionSequence); it != nil {
		places = append(places, place{it, sourceShared})
	}
	if it := x.top.item(tag.MRDiffusionSequence); it != nil {
		places = append(places, place{it, sourceStandard})
	}
	places = append(places, place{x.top, sourceStandard})

	for _, p := range places {
		if b, ok := p.l.float(tag.DiffusionBValue, ValueFD, bo); ok && b >= 0 {
			f.BValue, f.HasBValue, f.BValueSource = b, true, p.source
			break
		}
	}
	for _, p := range places {
		if d := p.l.str(tag.DiffusionDirectionality); d != "" {
			f.Directionality = parseDirectionality(d)
			break
		}
	}
	for _, p := range places {
		v := p.l.item(tag.DiffusionGradientDirectionSequence).floats(tag.DiffusionGradientOrientation, ValueFD, bo)
		if len(v) != 3 {
			v = p.l.floats(tag.DiffusionGradientOrientation, ValueFD, bo)
		}
		if len(v) == 3 {
			copy(f.Gradient[:], v)
			f.HasGradient = true
			break
		}
	}
	bm := [6]tag.Tag{tag.DiffusionBValueXX, tag.DiffusionBValueXY, tag.DiffusionBValueXZ,
		tag.DiffusionBValueYY, tag.DiffusionBValueYZ, tag.DiffusionBValueZZ}
	for _, p := range places {
		it := p.l.item(tag.DiffusionBMatrixSequence)
		if it == nil {
			continue
		}
		var m [6]float64
		ok := true
		for i, t := range bm {
			m[i], ok = it.float(t, ValueFD, bo)
			if !ok {
				break
			}
		}
		if ok {
			f.BMatrix, f.HasBMatrix = m, true
			break
		}
	}
}

func parseDirectionality(s string) dwi.Directionality {
	switch strings.ToUpper(s) {
	case "NONE":
		return dwi.DirectionalityNone
	case "DIRECTIONAL":
		return dwi.DirectionalityDirectional
	case "BMATRIX":
		return dwi.DirectionalityBMatrix
	case "ISOTROPIC":
		return dwi.DirectionalityIsotropic
	}
	return dwi.DirectionalityUnknown
}

// private tries the configured private sources, in order, for a frame
// without a standard b-value. A source applies where its private creator
// is present; one that applies but cannot give a value is an error unless
// a later source gives one.
func (x *extraction) private(f *dwi.Frame, per, shared level) error {
	var firstErr error
	for _, src := range x.opt.PrivateSources {
		for _, l := range privateLevels(per, shared, x.top) {
			b, found, err := readPrivate(l, src, x.bo)
			if !found {
				continue
			}
			if err != nil {
				if firstErr == nil {
					firstErr = err
				}
				break
			}
			f.BValue, f.HasBValue, f.BValueSource = b, true, sourcePrivate+src.Name
			if src.Gradient != nil && (!f.HasGradient || f.Gradient == [3]float64{}) {
				g, err := readGradient(l, src, f, x.bo)
				if err != nil {
					return err
				}
				if g != ([3]float64{}) {
					f.Gradient, f.HasGradient = g, true
					if f.Directionality == dwi.DirectionalityUnknown {
						f.Directionality = dwi.DirectionalityDirectional
					}
				}
			}
			return nil
		}
	}
	return firstErr
}

// privateLevels are where private sources are looked for, in order: the
// frame's functional groups item and the first item of each private
// sequence in it (scanners keep private functional groups there), the
// same in the shared functional groups, and the top level.
func privateLevels(per, shared, top level) []level {
	var out []level
	for _, l := range []level{per, shared} {
		if l == nil {
			continue
		}
		out = append(out, l)
		for _, e := range l {
			if e.Tag.Group%2 == 1 {
				if it := l.item(e.Tag); it != nil {
					out = append(out, it)
				}
			}
		}
	}
	return append(out, top)
}

// readPrivate reads source src in one level. found says the creator is
// there (PS3.5 7.8.1: (gggg,0010)-(gggg,00FF) reserve blocks).
func readPrivate(l level, src PrivateSource, bo binary.ByteOrder) (b float64, found bool, err error) {
	block := -1
	for _, e := range l {
		if e.Tag.Group != src.Group || e.Tag.Element < 0x0010 || e.Tag.Element > 0x00FF {
			continue
		}
		if strings.TrimSpace(strings.Join(level{e}.strs(e.Tag), `\`)) == strings.TrimSpace(src.Creator) {
			block = int(e.Tag.Element)
			break
		}
	}
	if block < 0 {
		return 0, false, nil
	}
	t := tag.Tag{Group: src.Group, Element: uint16(block)<<8 | uint16(src.Element)}
	fail := func(format string, args ...any) (float64, bool, error) {
		return 0, true, &PrivateSourceError{Source: src.Name, Tag: fmt.Sprintf("(%04X,%04X)", t.Group, t.Element), Reason: fmt.Sprintf(format, args...)}
	}
	e := l.find(t)
	if e == nil {
		return fail("absent, though its private creator %q is present", src.Creator)
	}
	v, err := numbers(e, src.Read, bo)
	if err != nil {
		return fail("cannot be read as %s: %v", src.Read, err)
	}
	if src.Index >= len(v) {
		return fail("has %d values, the source reads value %d", len(v), src.Index)
	}
	scale := src.Scale
	if scale == 0 {
		scale = 1
	}
	b = (v[src.Index] - src.Offset) * scale
	if b < 0 || math.IsNaN(b) || math.IsInf(b, 0) {
		return fail("gives b-value %v", b)
	}
	return b, true, nil
}

// readGradient reads the gradient source of src in level l for f: a unit
// vector in patient axes, or an error naming the element.
func readGradient(l level, src PrivateSource, f *dwi.Frame, bo binary.ByteOrder) ([3]float64, error) {
	g := src.Gradient
	creator := cmp.Or(g.Creator, src.Creator)
	group := cmp.Or(g.Group, src.Group)
	block := creatorBlock(l, creator, group)
	tagText := func(elem uint8) string {
		return fmt.Sprintf("(%04X,%02X%02X)", group, max(block, 0), elem)
	}
	fail := func(elem uint8, format string, args ...any) ([3]float64, error) {
		return [3]float64{}, &PrivateSourceError{Source: src.Name, Tag: tagText(elem), Reason: fmt.Sprintf(format, args...)}
	}
	if block < 0 {
		return fail(g.Element[0], "gradient: private creator %q absent", creator)
	}
	var v []float64
	for _, elem := range g.Element {
		e := l.find(tag.Tag{Group: group, Element: uint16(block)<<8 | uint16(elem)})
		if e == nil {
			return fail(elem, "gradient element absent")
		}
		n, err := numbers(e, g.Read, bo)
		if err != nil {
			return fail(elem, "gradient cannot be read as %s: %v", g.Read, err)
		}
		v = append(v, n...)
	}
	if len(v) != 3 {
		return fail(g.Element[0], "gradient has %d values, want 3", len(v))
	}
	u, ok := unitVector([3]float64(v))
	if !ok {
		return [3]float64{}, nil // a zero vector: a b0 or a trace, no direction
	}
	if g.ImageAxes {
		p, ok := ImageToPatient(u, f.Geometry)
		if !ok {
			return fail(g.Element[0], "gradient in image axes and the image has no orientation")
		}
		return p, nil
	}
	return u, nil
}
