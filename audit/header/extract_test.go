package header

import (
	"encoding/binary"
	"errors"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/codec"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/synth"
)

var allSyntaxes = []string{tsExplicitLE, tsImplicitLE, tsExplicitBE, tsDeflated}

func TestExtractReadsTheDiffusionHeader(t *testing.T) {
	bm := [6]float64{500, 500, 0, 500, 0, 0} // b = 1000 along (1,1,0)/sqrt 2: B = b g g^T
	s := newSeries("hdr",
		img{b: 0, slice: 0},
		img{b: 1000, dir: [3]float64{0, 0.6, 0.8}, slice: 1},
		img{b: 1000, directionality: "BMATRIX", bmatrix: &bm, slice: 2},
		img{b: 1000, iso: true, slice: 1},
	)
	s.slope, s.intercept = 2, -10
	want := []struct {
		b              float64
		directionality dwi.Directionality
		gradient       [3]float64
		hasGradient    bool
		hasBMatrix     bool
	}{
		{0, dwi.DirectionalityNone, [3]float64{}, false, false},
		{1000, dwi.DirectionalityDirectional, [3]float64{0, 0.6, 0.8}, true, false},
		{1000, dwi.DirectionalityBMatrix, [3]float64{}, false, true},
		{1000, dwi.DirectionalityIsotropic, [3]float64{}, false, false},
	}
	label := func(sc dwi.Scanner) string { return sc.StationName + "@" + sc.CallingAETitle }
	opt := ExtractOptions{LoadPixels: true, CallingAETitle: "MRI2", ScannerLabel: label}
	for _, ts := range allSyntaxes {
		for _, layout := range []string{"classic", "enhanced"} {
			t.Run(layout+" files in "+ts+" give every diffusion attribute", func(t *testing.T) {
				var files [][]byte
				source := sourceStandard
				if layout == "classic" {
					files = s.classic(t, ts)
				} else {
					files = [][]byte{s.enhanced(t, ts)}
					source = sourcePerFrame
				}
				frames := extractAll(t, files, opt)
				if len(frames) != len(want) {
					t.Fatalf("%d frames, want %d", len(frames), len(want))
				}
				for i, w := range want {
					f := frames[i]
					if f.BValue != w.b || !f.HasBValue || f.BValueSource != source {
						t.Errorf("frame %d: b %v (%v, %q), want %v from %q", i, f.BValue, f.HasBValue, f.BValueSource, w.b, source)
					}
					if f.Directionality != w.directionality || f.HasGradient != w.hasGradient || f.Gradient != w.gradient || f.HasBMatrix != w.hasBMatrix {
						t.Errorf("frame %d: directionality %v gradient %v (%v) b-matrix %v, want %v %v (%v) %v",
							i, f.Directionality, f.Gradient, f.HasGradient, f.HasBMatrix, w.directionality, w.gradient, w.hasGradient, w.hasBMatrix)
					}
					if w.hasBMatrix && f.BMatrix != bm {
						t.Errorf("frame %d: b-matrix %v, want %v", i, f.BMatrix, bm)
					}
					p := s.position(s.images[i])
					g := dwi.Geometry{Rows: 8, Columns: 8, PixelSpacing: [2]float64{1.5, 1.5}, Position: p,
						Orientation: s.orientation, SliceThickness: 4, Known: true}
					if f.Geometry != g {
						t.Errorf("frame %d: geometry %+v, want %+v", i, f.Geometry, g)
					}
					if f.RescaleSlope != 2 || f.RescaleIntercept != -10 {
						t.Errorf("frame %d: rescale %v %v, want 2 -10", i, f.RescaleSlope, f.RescaleIntercept)
					}
					// Rescaled value = slope * stored + intercept (PS3.3 C.11.1.1.2).
					if got, want := f.Pixels[3*8+5], float32(2*float64(s.pixel(i, 3, 5))-10); got != want {
						t.Errorf("frame %d: pixel (3,5) = %v, want %v", i, got, want)
					}
					if f.Kind != dwi.KindAcquired || f.Encapsulated || f.TransferSyntaxUID != ts {
						t.Errorf("frame %d: kind %v encapsulated %v syntax %s", i, f.Kind, f.Encapsulated, f.TransferSyntaxUID)
					}
					wantScanner := dwi.Scanner{StationName: "QOH-MR2", DeviceSerialNumber: "SN-0042", InstitutionName: "Quellvander Ostmire",
						Manufacturer: "Synthetic", ModelName: "Test model", CallingAETitle: "MRI2", Label: "QOH-MR2@MRI2"}
					if f.Scanner != wantScanner {
						t.Errorf("frame %d: scanner %+v, want %+v", i, f.Scanner, wantScanner)
					}
					if f.StudyInstanceUID != s.study || f.SeriesInstanceUID != s.series || f.FrameOfReferenceUID != s.frameOfRef ||
						f.SeriesNumber != 4 || f.ProtocolName != "DWI brain" || f.AccessionNumber != "ACC42" || f.Modality != "MR" {
						t.Errorf("frame %d: identity %+v", i, f)
					}
					if layout == "enhanced" && (f.FrameNumber != i+1 || f.AcquisitionContrast != "DIFFUSION" || f.ID() != f.SOPInstanceUID+"#"+string(rune('1'+i))) {
						t.Errorf("frame %d: frame number %d, contrast %q, ID %s", i, f.FrameNumber, f.AcquisitionContrast, f.ID())
					}
					if layout == "classic" && (f.FrameNumber != 0 || f.ID() != f.SOPInstanceUID) {
						t.Errorf("frame %d: frame number %d, ID %s", i, f.FrameNumber, f.ID())
					}
				}
			})
		}
	}
}

func TestExtractAgreesWithTheParsersOwnDecoding(t *testing.T) {
	// Files written by the data-set library's writer (audit/synth), read
	// back: our pixel decoding must give the values the library's own
	// native-frame decoder gives, and the geometry synth wrote.
	for _, ts := range []string{synth.ExplicitVRLittleEndian, synth.ImplicitVRLittleEndian} {
		t.Run("synthetic series in "+ts+" decodes like the library", func(t *testing.T) {
			paths, err := synth.WriteSeries(t.TempDir(), synth.Series{Rows: 24, Columns: 20, Slices: 4, BValues: []float64{0, 1000}, Seed: 3, TransferSyntaxUID: ts})
			if err != nil {
				t.Fatal(err)
			}
			for i, p := range paths {
				frames, err := ExtractFile(p, ExtractOptions{LoadPixels: true})
				if err != nil {
					t.Fatal(err)
				}
				if len(frames) != 1 {
					t.Fatalf("%d frames", len(frames))
				}
				f := frames[0]
				if wantB := []float64{0, 1000}[i%2]; f.BValue != wantB || !f.HasBValue {
					t.Errorf("image %d: b %v, want %v", i, f.BValue, wantB)
				}
				ds, err := dicom.ParseFile(p, nil)
				if err != nil {
					t.Fatal(err)
				}
				pe, err := ds.FindElementByTag(tag.PixelData)
				if err != nil {
					t.Fatal(err)
				}
				fr, err := dicom.MustGetPixelDataInfo(pe.Value).Frames[0].GetNativeFrame()
				if err != nil {
					t.Fatal(err)
				}
				if fr.Rows() != 24 || fr.Cols() != 20 || len(f.Pixels) != 24*20 {
					t.Fatalf("library frame %dx%d, ours %d pixels", fr.Rows(), fr.Cols(), len(f.Pixels))
				}
				for r := range 24 {
					for c := range 20 {
						px, err := fr.GetPixel(c, r)
						if err != nil {
							t.Fatal(err)
						}
						if want := float32(px[0]); f.Pixels[r*20+c] != want {
							t.Fatalf("image %d pixel (%d,%d) = %v, library says %v", i, r, c, f.Pixels[r*20+c], want)
						}
					}
				}
				// synth: axial, 230 mm field of view over 24 rows, 4 mm slices
				// centred on the origin (audit/synth/synth.go).
				g := f.Geometry
				if !g.Known || g.Orientation != [6]float64{1, 0, 0, 0, 1, 0} || math.Abs(g.PixelSpacing[0]-230.0/24) > 1e-9 ||
					math.Abs(g.Position[2]-(float64(i)-1.5)*4) > 1e-9 || g.SliceThickness != 4 {
					t.Errorf("image %d: geometry %+v", i, g)
				}
			}
		})
	}
}

func TestExtractDecodesEveryPixelEncoding(t *testing.T) {
	le := encFor(tsExplicitLE).bo
	base := func(extra ...el) []el {
		s := newSeries("px", img{b: 0})
		els := s.common(mrImage, "2.25.9")
		p := s.position(s.images[0])
		els = append(els, ds(tIPP, p[:]...), ds(tIOP, s.orientation[:]...), ds(tPixelSpacing, 1, 1))
		// The tests below replace the pixel format elements.
		els = slices.DeleteFunc(els, func(e el) bool {
			return e.tag == tBitsAllocated || e.tag == tBitsStored || e.tag == tHighBit || e.tag == tPixelRep || e.tag == tRows || e.tag == tColumns
		})
		return append(append(els, us(tRows, 1), us(tColumns, 4)), extra...)
	}
	u16 := func(v ...uint16) []byte {
		var b []byte
		for _, x := range v {
			b = le.AppendUint16(b, x)
		}
		return b
	}
	f32 := func(v ...float32) []byte {
		var b []byte
		for _, x := range v {
			b = le.AppendUint32(b, math.Float32bits(x))
		}
		return b
	}
	tests := []struct {
		name string
		els  []el
		want []float32
	}{
		{"8-bit unsigned", base(us(tBitsAllocated, 8), us(tBitsStored, 8), us(tPixelRep, 0), raw(tPixelData, "OB", []byte{0, 1, 200, 255})),
			[]float32{0, 1, 200, 255}},
		// PS3.5 8.1.1: bits above Bits Stored are not part of the value;
		// 12-bit two's complement 0xFFF is -1, 0x800 is -2048.
		{"12-bit signed in 16 with junk high bits", base(us(tBitsAllocated, 16), us(tBitsStored, 12), us(tPixelRep, 1), raw(tPixelData, "OW", u16(0xFFFF, 0x0800, 0xF7FF, 0x0005))),
			[]float32{-1, -2048, 2047, 5}},
		{"16-bit signed", base(us(tBitsAllocated, 16), us(tBitsStored, 16), us(tPixelRep, 1), raw(tPixelData, "OW", u16(0xFFFF, 0x8000, 0x7FFF, 3))),
			[]float32{-1, -32768, 32767, 3}},
		{"16-bit unsigned rescaled", base(us(tBitsAllocated, 16), us(tBitsStored, 16), us(tPixelRep, 0), ds(tRescaleSlope, 0.5), ds(tRescaleInt, 1), raw(tPixelData, "OW", u16(0, 2, 4, 65535))),
			[]float32{1, 2, 3, 32768.5}},
		{"32-bit float pixel data (PS3.3 C.7.6.24)", base(raw(tFloatPixelData, "OF", f32(0.5, -1.25, 3e-3, 0))),
			[]float32{0.5, -1.25, 3e-3, 0}},
	}
	for _, tt := range tests {
		t.Run(tt.name+" decodes to the stored values", func(t *testing.T) {
			frames, err := Extract(part10File(t, tsExplicitLE, mrImage, "2.25.9", tt.els), ExtractOptions{LoadPixels: true})
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(frames[0].Pixels, tt.want) {
				t.Errorf("pixels %v, want %v", frames[0].Pixels, tt.want)
			}
		})
	}
}

func TestExtractRefusesBrokenFilesWithAClearError(t *testing.T) {
	s := newSeries("bad", img{b: 0}, img{b: 1000, dir: [3]float64{1, 0, 0}})
	good := s.enhanced(t, tsExplicitLE)
	short := s
	short.pixelFrames = 1
	shortPixels := short.enhanced(t, tsExplicitLE)
	classicEls := func() []el {
		els := s.common(mrImage, "2.25.7")
		p := s.position(s.images[0])
		return append(els, ds(tIPP, p[:]...), ds(tIOP, s.orientation[:]...), fd(tBValue, 0))
	}
	with := func(els []el, extra ...el) []el { return append(slices.Clone(els), extra...) }
	pix := s.pixelBytes(encFor(tsExplicitLE).bo, 0)
	big := uint32(1 << 30)
	// An encapsulated-looking value in a native syntax (PS3.5 A.4 framing).
	frag := func() []byte {
		b := le32(nil, 0xE000FFFE)
		b = le32(b, 0)
		b = le32(b, 0xE000FFFE)
		b = le32(b, 4)
		b = append(b, 1, 2, 3, 4)
		b = le32(b, 0xE0DDFFFE)
		return le32(b, 0)
	}()
	tests := []struct {
		name string
		file []byte
		opt  ExtractOptions
		want error
	}{
		{"a file without the DICM prefix", make([]byte, 300), ExtractOptions{}, ErrNotPart10},
		{"an empty file", nil, ExtractOptions{}, ErrNotPart10},
		{"a transfer syntax the parser does not know", part10File(t, "1.2.826.0.1.3680043.99.1", mrImage, "2.25.7", classicEls()), ExtractOptions{}, ErrUnknownTransferSyntax},
		{"rows and columns that do not match the pixel data", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(slices.DeleteFunc(classicEls(), func(e el) bool { return e.tag == tRows }), us(tRows, 9), raw(tPixelData, "OW", pix))), ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"rows and columns that do not match, header only", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(slices.DeleteFunc(classicEls(), func(e el) bool { return e.tag == tColumns }), us(tColumns, 7), raw(tPixelData, "OW", pix))), ExtractOptions{}, ErrPixelData},
		{"Rows and Columns of 100000 written as UL", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(slices.DeleteFunc(classicEls(), func(e el) bool { return e.tag == tRows || e.tag == tColumns }),
				el{tag: tRows, vr: "UL", u32: []uint32{100000}}, el{tag: tColumns, vr: "UL", u32: []uint32{100000}}, raw(tPixelData, "OW", pix))), ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"zero rows", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(slices.DeleteFunc(classicEls(), func(e el) bool { return e.tag == tRows }), us(tRows, 0), raw(tPixelData, "OW", pix))), ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"Number of Frames larger than the per-frame functional groups", bytesReplace(t, good, "\x08\x00IS\x02\x002 ", "\x08\x00IS\x02\x003 "), ExtractOptions{LoadPixels: true}, ErrMalformed},
		{"pixel data for fewer frames than Number of Frames", shortPixels, ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"Number of Frames not matching pixel data in a classic image", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), is(tNumberOfFrames, 3), raw(tPixelData, "OW", pix))), ExtractOptions{}, ErrPixelData},
		{"Number of Frames that is not a number", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), txt(tNumberOfFrames, "IS", "x"), raw(tPixelData, "OW", pix))), ExtractOptions{}, ErrMalformed},
		{"Number of Frames of two billion", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), txt(tNumberOfFrames, "IS", "2000000000"), raw(tPixelData, "OW", pix))), ExtractOptions{}, ErrMalformed},
		{"a pixel data element cut short by the end of the file", good[:len(good)-10], ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"a pixel data element claiming 1 GiB", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), el{tag: tPixelData, vr: "OW", raw: pix, lie: &big})), ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"no pixel data when pixels are wanted", part10File(t, tsExplicitLE, mrImage, "2.25.7", classicEls()), ExtractOptions{LoadPixels: true}, ErrPixelData},
		{"undefined-length pixel data in a native syntax", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), el{tag: tPixelData, vr: "OB", raw: frag, undefined: true})), ExtractOptions{}, ErrPixelData},
		{"a header string claiming 3 GiB", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(classicEls(), el{tag: tProtocol + 2, vr: "UT", strs: []string{"x"}, lie: ptr(uint32(3 << 30))})), ExtractOptions{}, ErrMalformed},
		{"a per-frame functional group count that is not the frame count", bytesReplace(t, good, "\x08\x00IS\x02\x002 ", "\x08\x00IS\x02\x001 "), ExtractOptions{}, ErrMalformed},
		{"a private source whose element is missing", part10File(t, tsExplicitLE, mrImage, "2.25.7",
			with(slices.DeleteFunc(classicEls(), func(e el) bool { return e.tag == tBValue }), txt(0x00190010, "LO", "ACME DIFFUSION 1"), raw(tPixelData, "OW", pix))),
			ExtractOptions{PrivateSources: []PrivateSource{{Name: "acme", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0C, Read: ValueIS}}}, ErrPrivateSource},
		{"a private source in an even group", good, ExtractOptions{PrivateSources: []PrivateSource{{Name: "even", Creator: "X", Group: 0x0018, Read: ValueFD}}}, ErrInvalidOptions},
	}
	for _, tt := range tests {
		t.Run(tt.name+" is refused without panic or big allocation", func(t *testing.T) {
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			frames, err := Extract(tt.file, tt.opt)
			runtime.ReadMemStats(&after)
			if !errors.Is(err, tt.want) {
				t.Errorf("error %v, want %v", err, tt.want)
			}
			if frames != nil {
				t.Errorf("%d frames with an error", len(frames))
			}
			if grew := after.TotalAlloc - before.TotalAlloc; grew > 8<<20 {
				t.Errorf("allocated %d bytes for a %d-byte file", grew, len(tt.file))
			}
		})
	}

	t.Run("the private source error names the source and the element", func(t *testing.T) {
		_, err := Extract(tests[len(tests)-2].file, tests[len(tests)-2].opt)
		var pe *PrivateSourceError
		if !errors.As(err, &pe) || pe.Source != "acme" || pe.Tag != "(0019,100C)" {
			t.Errorf("error %v, want a PrivateSourceError for acme at (0019,100C)", err)
		}
	})
}

func TestMissingGeometryFailsAssemblyNotExtraction(t *testing.T) {
	s := newSeries("nogeo", img{b: 0}, img{b: 1000, dir: [3]float64{1, 0, 0}})
	s.noGeometry = true
	for _, layout := range []string{"classic", "enhanced"} {
		t.Run("a "+layout+" series without Image Position and Orientation is refused by assembly", func(t *testing.T) {
			files := s.classic(t, tsExplicitLE)
			if layout == "enhanced" {
				files = [][]byte{s.enhanced(t, tsExplicitLE)}
			}
			frames := extractAll(t, files, ExtractOptions{LoadPixels: true})
			for _, f := range frames {
				if f.Geometry.Known {
					t.Errorf("frame %s: geometry known", f.ID())
				}
			}
			_, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
			if !errors.Is(err, dwi.ErrMissingGeometry) || !strings.Contains(err.Error(), frames[0].SOPInstanceUID) {
				t.Errorf("error %v, want dwi.ErrMissingGeometry naming the image", err)
			}
		})
	}
	t.Run("an orientation that is not two unit vectors is refused by assembly", func(t *testing.T) {
		s := newSeries("badori", img{b: 0})
		s.orientation = [6]float64{1, 0, 0, 1, 0, 0}
		frames := extractAll(t, s.classic(t, tsExplicitLE), ExtractOptions{})
		if _, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances()); !errors.Is(err, dwi.ErrMissingGeometry) {
			t.Errorf("error %v, want dwi.ErrMissingGeometry", err)
		}
	})
}

func TestPrivateSourcesGiveTheBValue(t *testing.T) {
	// The b-value sits only in a private element of an invented creator
	// (PS3.5 7.8.1), in various encodings; the block number is 0x11 in
	// some files to show the source names the creator, not the tag.
	const creator = "ACME DIFFUSION 1"
	le := encFor(tsExplicitLE).bo
	elems := func(block uint32, value el) []el {
		s := newSeries("priv", img{b: 0, noB: true, directionality: "DIRECTIONAL", dir: [3]float64{1, 0, 0}})
		els := s.common(mrImage, "2.25.8")
		p := s.position(s.images[0])
		value.tag = 0x00190000 | block<<8 | 0x0C
		return append(els, ds(tIPP, p[:]...), ds(tIOP, s.orientation[:]...),
			txt(0x00190000|block, "LO", creator), value, raw(tPixelData, "OW", s.pixelBytes(le, 0)))
	}
	src := func(kind ValueKind, index int, scale float64) []PrivateSource {
		return []PrivateSource{
			{Name: "other", Creator: "SOMEONE ELSE", Group: 0x0029, Element: 0x01, Read: ValueFD},
			{Name: "acme", Creator: creator, Group: 0x0019, Element: 0x0C, Read: kind, Index: index, Scale: scale},
		}
	}
	tests := []struct {
		name string
		ts   string
		els  []el
		srcs []PrivateSource
		want float64
	}{
		{"an IS value", tsExplicitLE, elems(0x10, txt(0, "IS", "1000")), src(ValueIS, 0, 0), 1000},
		{"the second value of a DS, scaled from ms/um^2", tsExplicitLE, elems(0x11, txt(0, "DS", "0", "0.9")), src(ValueDS, 1, 1000), 900},
		{"an FD value", tsExplicitLE, elems(0x10, fd(0, 500)), src(ValueFD, 0, 1), 500},
		{"an FD value as UN bytes in implicit VR", tsImplicitLE, elems(0x10, fd(0, 1500)), src(ValueFD, 0, 1), 1500},
		{"a US value as UN bytes in implicit VR", tsImplicitLE, elems(0x12, us(0, 7, 800)), src(ValueUS, 1, 1), 800},
		{"an SL value", tsExplicitLE, elems(0x10, el{vr: "SL", u32: []uint32{2000}}), src(ValueSL, 0, 1), 2000},
		{"a number in free text", tsExplicitLE, elems(0x10, txt(0, "LO", "DWI b=1000 3-scan")), src(ValueText, 0, 1), 1000},
		{"a number in free text as UN bytes", tsImplicitLE, elems(0x10, txt(0, "LO", "ep_b50t")), src(ValueText, 0, 1), 50},
	}
	for _, tt := range tests {
		t.Run(tt.name+" gives the b-value", func(t *testing.T) {
			frames, err := Extract(part10File(t, tt.ts, mrImage, "2.25.8", tt.els), ExtractOptions{PrivateSources: tt.srcs})
			if err != nil {
				t.Fatal(err)
			}
			f := frames[0]
			if !f.HasBValue || f.BValue != tt.want || f.BValueSource != "private:acme" {
				t.Errorf("b %v (%v) from %q, want %v from private:acme", f.BValue, f.HasBValue, f.BValueSource, tt.want)
			}
		})
	}
	t.Run("a standard b-value wins over a private source", func(t *testing.T) {
		els := append(elems(0x10, txt(0, "IS", "1000")), fd(tBValue, 800))
		frames, err := Extract(part10File(t, tsExplicitLE, mrImage, "2.25.8", els), ExtractOptions{PrivateSources: src(ValueIS, 0, 1)})
		if err != nil {
			t.Fatal(err)
		}
		if frames[0].BValue != 800 || frames[0].BValueSource != sourceStandard {
			t.Errorf("b %v from %q, want 800 from the standard attribute", frames[0].BValue, frames[0].BValueSource)
		}
	})
	t.Run("a source whose creator is absent does not apply", func(t *testing.T) {
		frames, err := Extract(part10File(t, tsExplicitLE, mrImage, "2.25.8", elems(0x10, txt(0, "IS", "1000"))),
			ExtractOptions{PrivateSources: src(ValueIS, 0, 1)[:1]})
		if err != nil || frames[0].HasBValue {
			t.Errorf("error %v, b %v (%v): want no b-value and no error", err, frames[0].BValue, frames[0].HasBValue)
		}
	})
	t.Run("an index past the values is a private source error", func(t *testing.T) {
		_, err := Extract(part10File(t, tsExplicitLE, mrImage, "2.25.8", elems(0x10, txt(0, "IS", "1000"))), ExtractOptions{PrivateSources: src(ValueIS, 3, 1)})
		if !errors.Is(err, ErrPrivateSource) {
			t.Errorf("error %v, want ErrPrivateSource", err)
		}
	})
	t.Run("a private b-value in the per-frame functional groups of an enhanced file", func(t *testing.T) {
		s := newSeries("privmf",
			img{b: 0, noB: true, directionality: "NONE", extra: []el{sq(0x00191010, []el{txt(0x00190010, "LO", creator), txt(0x0019100C, "IS", "0")})}},
			img{b: 0, noB: true, directionality: "DIRECTIONAL", dir: [3]float64{1, 0, 0}, extra: []el{sq(0x00191010, []el{txt(0x00190010, "LO", creator), txt(0x0019100C, "IS", "1000")})}},
		)
		frames, err := Extract(s.enhanced(t, tsExplicitLE), ExtractOptions{PrivateSources: src(ValueIS, 0, 1)})
		if err != nil {
			t.Fatal(err)
		}
		if frames[0].BValue != 0 || frames[1].BValue != 1000 || !frames[1].HasBValue {
			t.Errorf("b-values %v %v, want 0 1000", frames[0].BValue, frames[1].BValue)
		}
	})
}

// encapsulatedElements is an Enhanced MR data set of two frames whose
// pixel data is encapsulated (PS3.5 A.4: an empty basic offset table,
// then one fragment per frame), as a JPEG transfer syntax has it.
func encapsulatedElements() []el {
	s := newSeries("jpeg", img{b: 0}, img{b: 1000, dir: [3]float64{1, 0, 0}})
	var frags []byte
	frags = le32(le32(frags, 0xE000FFFE), 0)
	for range 2 {
		frags = le32(le32(frags, 0xE000FFFE), 4)
		frags = append(frags, 0xFF, 0xD8, 0xFF, 0xD9)
	}
	frags = le32(le32(frags, 0xE0DDFFFE), 0)
	els := s.common(enhancedMR, "2.25.6")
	var perFrame [][]el
	for _, m := range s.images {
		p := s.position(m)
		perFrame = append(perFrame, []el{sq(tMRDiffusionSeq, diffusion(m)), sq(tPlanePosSeq, []el{ds(tIPP, p[:]...)})})
	}
	return append(els, is(tNumberOfFrames, 2), sq(tPerFrameFG, perFrame...),
		sq(tSharedFG, []el{sq(tPlaneOriSeq, []el{ds(tIOP, s.orientation[:]...)})}),
		el{tag: tPixelData, vr: "OB", raw: frags, undefined: true})
}

func TestCorruptCompressedPixelDataIsAnError(t *testing.T) {
	// The same fragments labelled JPEG Baseline, which the codecs decode:
	// they are not a JPEG stream, so the file is unreadable, not silently
	// pixel-less.
	file := part10File(t, tsJPEGBase, enhancedMR, "2.25.6", encapsulatedElements())
	_, err := Extract(file, ExtractOptions{LoadPixels: true})
	if !errors.Is(err, ErrPixelData) || !errors.Is(err, codec.ErrCorrupt) {
		t.Fatalf("error %v, want ErrPixelData wrapping codec.ErrCorrupt", err)
	}
	// Without pixels the header is still read.
	if _, err := Extract(file, ExtractOptions{}); err != nil {
		t.Fatalf("header only: %v", err)
	}
}

func TestEncapsulatedPixelDataIsFlaggedNotDecoded(t *testing.T) {
	els := encapsulatedElements()
	file := part10File(t, tsJ2K, enhancedMR, "2.25.6", els)

	frames, err := Extract(file, ExtractOptions{LoadPixels: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(frames) != 2 {
		t.Fatalf("%d frames, want 2", len(frames))
	}
	for _, f := range frames {
		if !f.Encapsulated || f.Pixels != nil {
			t.Errorf("frame %s: encapsulated %v, %d pixels; want flagged and none", f.ID(), f.Encapsulated, len(f.Pixels))
		}
		if want := "JPEG 2000 (Lossless Only) (1.2.840.10008.1.2.4.90): the audit cannot decode"; !strings.Contains(f.Undecoded, want) {
			t.Errorf("frame %s: reason %q, want it to say %q", f.ID(), f.Undecoded, want)
		}
	}
	if frames[1].BValue != 1000 {
		t.Errorf("b %v, want 1000: the header is still read", frames[1].BValue)
	}
	series, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	if !series.Facts.Encapsulated {
		t.Error("dwi.Facts.Encapsulated not set")
	}

	t.Run("more frames than the fragments can hold is refused", func(t *testing.T) {
		// Two frames need at least two 8-byte item headers; this
		// fragment sequence holds one header and the delimiter.
		short := le32(le32(le32(le32(nil, 0xE000FFFE), 0), 0xE0DDFFFE), 0)
		els := slices.Clone(els)
		els[len(els)-1] = el{tag: tPixelData, vr: "OB", raw: short, undefined: true}
		els = append(slices.DeleteFunc(els, func(e el) bool { return e.tag == tNumberOfFrames || e.tag == tPerFrameFG }), is(tNumberOfFrames, 3))
		if _, err := Extract(part10File(t, tsJPEGBase, enhancedMR, "2.25.6", els), ExtractOptions{}); !errors.Is(err, ErrPixelData) {
			t.Errorf("error %v, want ErrPixelData", err)
		}
	})
}

// RGB images (Samples per Pixel 3, PS3.3 C.7.6.3.1.1) are derived maps:
// read for their header, never decoded, never an error.
func TestRGBMapsAreReadForTheirHeaderOnly(t *testing.T) {
	s := newSeries("rgb", img{b: 0})
	pix := make([]byte, 8*8*3)
	rgb := func(imageType ...string) []el {
		base := s.common(mrImage, "2.25.7")
		p := s.position(s.images[0])
		base = append(base, ds(tIPP, p[:]...), ds(tIOP, s.orientation[:]...))
		els := slices.DeleteFunc(base, func(e el) bool {
			return e.tag == tSamples || e.tag == tImageType || e.tag == tBitsAllocated || e.tag == tBitsStored || e.tag == tHighBit || e.tag == tPhotometric
		})
		return append(els, us(tSamples, 3), txt(tPhotometric, "CS", "RGB"), us(tBitsAllocated, 8), us(tBitsStored, 8), us(tHighBit, 7),
			txt(tImageType, "CS", imageType...), raw(tPixelData, "OB", pix))
	}
	for _, tt := range []struct {
		name string
		els  []el
		want dwi.MapKind
	}{
		{"a colour FA map", rgb("DERIVED", "PRIMARY", "DIFFUSION", "FA"), dwi.KindColourFA},
		{"another RGB image", rgb("DERIVED", "SECONDARY", "OTHER"), dwi.KindOtherDerived},
	} {
		t.Run(tt.name+" is a "+tt.want.String(), func(t *testing.T) {
			frames, err := Extract(part10File(t, tsExplicitLE, mrImage, "2.25.7", tt.els), ExtractOptions{LoadPixels: true})
			if err != nil || len(frames) != 1 {
				t.Fatalf("%d frames, error %v; want one and no error", len(frames), err)
			}
			if f := frames[0]; f.Kind != tt.want || f.Pixels != nil || f.Kind.Audited() {
				t.Errorf("kind %v, %d pixels; want %v, not decoded, not audited", f.Kind, len(f.Pixels), tt.want)
			}
		})
	}
}

func TestDerivedMapsAreRecognised(t *testing.T) {
	tests := []struct {
		name string
		m    img
		want dwi.MapKind
	}{
		{"Image Type value 4 ADC (PS3.17 DERIVED\\PRIMARY\\DIFFUSION\\ADC)", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}}, dwi.KindADC},
		{"Image Type value 4 DIFFUSION_ATTNTD (eADC)", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ATTNTD"}}, dwi.KindEADC},
		{"Image Type value 4 DIFFUSION_ANISO (FA)", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ANISO"}}, dwi.KindFA},
		// Common practice (from memory): classic FA and tensor b0 maps say so in Image Type.
		{"Image Type FA", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "FA", "DIS2D"}}, dwi.KindFA},
		{"Image Type TENSOR_B0", img{b: 0, imageType: []string{"DERIVED", "PRIMARY", "TENSOR_B0", "DIS2D"}}, dwi.KindTensorB0},
		{"Real World Value Mapping in um2/s", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY"}, rwvUnits: "um2/s"}, dwi.KindADC},
		{"Real World Value Mapping in 10-6.mm2/s", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "OTHER"}, rwvUnits: "10-6.mm2/s"}, dwi.KindADC},
		{"an acquired trace", img{b: 1000, iso: true}, dwi.KindAcquired},
	}
	for _, tt := range tests {
		for _, layout := range []string{"classic", "enhanced"} {
			t.Run(tt.name+" in a "+layout+" file is "+tt.want.String(), func(t *testing.T) {
				s := newSeries("map", tt.m)
				files := s.classic(t, tsExplicitLE)
				if layout == "enhanced" {
					files = [][]byte{s.enhanced(t, tsExplicitLE)}
				}
				f := extractAll(t, files, ExtractOptions{})[0]
				if f.Kind != tt.want {
					t.Errorf("kind %v, want %v", f.Kind, tt.want)
				}
				if tt.m.rwvUnits != "" && (len(f.RealWorld) != 1 || f.RealWorld[0] != dwi.RealWorldValue{Slope: 1, Units: tt.m.rwvUnits}) {
					t.Errorf("real world values %+v", f.RealWorld)
				}
			})
		}
	}
}

func TestExtractFileReadsFromDisk(t *testing.T) {
	s := newSeries("disk", img{b: 0})
	path := filepath.Join(t.TempDir(), "x.dcm")
	if err := os.WriteFile(path, s.classic(t, tsExplicitLE)[0], 0o644); err != nil {
		t.Fatal(err)
	}
	frames, err := ExtractFile(path, ExtractOptions{LoadPixels: true})
	if err != nil || len(frames) != 1 || len(frames[0].Pixels) != 64 {
		t.Fatalf("frames %d, error %v", len(frames), err)
	}
	if _, err := ExtractFile(filepath.Join(t.TempDir(), "absent.dcm"), ExtractOptions{}); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("error %v, want os.ErrNotExist", err)
	}
}

func TestNonImageInstancesGiveNoFrames(t *testing.T) {
	els := []el{txt(tSOPClass, "UI", "1.2.840.10008.5.1.4.1.1.88.11"), txt(tSOPInstance, "UI", "2.25.5"), txt(tModality, "CS", "SR")}
	frames, err := Extract(part10File(t, tsExplicitLE, "1.2.840.10008.5.1.4.1.1.88.11", "2.25.5", els), ExtractOptions{LoadPixels: true})
	if err != nil || len(frames) != 0 {
		t.Errorf("%d frames, error %v; want none and no error", len(frames), err)
	}
}

func TestValueKindsAndTextNumbers(t *testing.T) {
	for k := ValueFD; k <= ValueText; k++ {
		t.Run(k.String()+" parses back from its name", func(t *testing.T) {
			b, _ := k.MarshalText()
			var got ValueKind
			if err := got.UnmarshalText([]byte(strings.ToLower(string(b)))); err != nil || got != k {
				t.Errorf("got %v, %v", got, err)
			}
		})
	}
	if _, err := ParseValueKind("OB"); !errors.Is(err, ErrInvalidOptions) {
		t.Errorf("OB parsed: %v", err)
	}
	for _, tt := range []struct {
		in   string
		want []float64
	}{
		{"b=1000", []float64{1000}},
		{"DIFF -1.5e3 x.25", []float64{-1500, 0.25}},
		{"ep_b50t 3-scan", []float64{50, 3}},
		{"none", nil},
		{"e5 1e", []float64{5, 1}},
	} {
		t.Run("numbers in "+tt.in+" are found", func(t *testing.T) {
			if got := textNumbers(tt.in); !slices.Equal(got, tt.want) {
				t.Errorf("got %v, want %v", got, tt.want)
			}
		})
	}
}

func TestPrivateSourceValidateReportsEveryProblem(t *testing.T) {
	err := PrivateSource{Group: 0x0018, Index: -1, Scale: math.NaN()}.Validate()
	for _, want := range []string{"Name", "Creator", "Group", "Read", "Index", "Scale"} {
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("error %v does not name %s", err, want)
		}
	}
	if err := (PrivateSource{Name: "a", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0C, Read: ValueIS}).Validate(); err != nil {
		t.Errorf("a good source: %v", err)
	}
}

// helpers

func le32(b []byte, v uint32) []byte { return binary.LittleEndian.AppendUint32(b, v) }

func ptr[T any](v T) *T { return &v }

// bytesReplace replaces the one occurrence of old in b.
func bytesReplace(t *testing.T, b []byte, old, new string) []byte {
	t.Helper()
	s := string(b)
	if strings.Count(s, old) != 1 {
		t.Fatalf("%q occurs %d times", old, strings.Count(s, old))
	}
	return []byte(strings.Replace(s, old, new, 1))
}
