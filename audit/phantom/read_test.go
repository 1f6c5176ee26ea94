package phantom

import (
	"strconv"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// This file reads the phantom's files back, for the tests, with
// suyashkumar's parser: a reader independent of the writer's element
// builder (and of the audit's header extraction, which these tests must
// not depend on).

// image is one classic image or one frame, as read back.
type image struct {
	path           string
	frame          int // 1-based in a multi-frame instance, 0 for classic
	sopClass       string
	series         int
	imageType      []string
	b              float64
	hasB           bool
	directionality string
	dir            [3]float64
	z              float64
	rwvmSlope      float64
	rwvmUnits      string
	pixels         []uint16
}

// kind says what the image is, from Image Type value 4 and the
// directionality.
func (im image) kind() volKind {
	switch {
	case len(im.imageType) == 4 && im.imageType[3] == "ADC":
		return volADC
	case im.directionality == "ISOTROPIC":
		return volTrace
	case im.directionality == "DIRECTIONAL":
		return volDirectional
	}
	return volB0
}

// parse reads a file with suyashkumar's parser, which panics on input it
// does not expect; a panic fails the test instead of the run.
func parse(t testing.TB, path string) (ds dicom.Dataset) {
	t.Helper()
	defer func() {
		if r := recover(); r != nil {
			t.Fatalf("suyashkumar/dicom panicked on %s: %v", path, r)
		}
	}()
	ds, err := dicom.ParseFile(path, nil)
	if err != nil {
		t.Fatalf("suyashkumar/dicom: %s: %v", path, err)
	}
	return ds
}

func find(elems []*dicom.Element, tg tag.Tag) *dicom.Element {
	for _, e := range elems {
		if e.Tag == tg {
			return e
		}
	}
	return nil
}

// items is the items of sequence tg in elems (nil when absent).
func items(elems []*dicom.Element, tg tag.Tag) [][]*dicom.Element {
	e := find(elems, tg)
	if e == nil {
		return nil
	}
	var out [][]*dicom.Element
	for _, it := range e.Value.GetValue().([]*dicom.SequenceItemValue) {
		out = append(out, it.GetValue().([]*dicom.Element))
	}
	return out
}

// nested is the element at the end of a path of one-item sequences.
func nested(elems []*dicom.Element, path ...tag.Tag) *dicom.Element {
	for _, seq := range path[:len(path)-1] {
		its := items(elems, seq)
		if len(its) == 0 {
			return nil
		}
		elems = its[0]
	}
	return find(elems, path[len(path)-1])
}

func strings1(e *dicom.Element) []string {
	if e == nil {
		return nil
	}
	return dicom.MustGetStrings(e.Value)
}

func decimal(t testing.TB, e *dicom.Element, i int) float64 {
	t.Helper()
	s := strings1(e)
	if len(s) <= i {
		t.Fatalf("%v has %d values, want index %d", e, len(s), i)
	}
	f, err := strconv.ParseFloat(strings.TrimSpace(s[i]), 64)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// diffusionInto reads the MR Diffusion Macro attributes found in elems.
func diffusionInto(im *image, elems []*dicom.Element) {
	if e := find(elems, tag.DiffusionBValue); e != nil {
		im.b, im.hasB = dicom.MustGetFloats(e.Value)[0], true
	}
	if e := find(elems, tag.DiffusionDirectionality); e != nil {
		im.directionality = strings1(e)[0]
	}
	if e := nested(elems, tag.DiffusionGradientDirectionSequence, tag.DiffusionGradientOrientation); e != nil {
		g := dicom.MustGetFloats(e.Value)
		im.dir = [3]float64{g[0], g[1], g[2]}
	}
}

func rwvmInto(im *image, elems []*dicom.Element) {
	if m := items(elems, tag.RealWorldValueMappingSequence); len(m) > 0 {
		im.rwvmSlope = dicom.MustGetFloats(find(m[0], tag.RealWorldValueSlope).Value)[0]
		im.rwvmUnits = strings1(nested(m[0], tag.MeasurementUnitsCodeSequence, tag.CodeValue))[0]
	}
}

// readFile returns the images of one file (one for classic, one per
// frame for multi-frame).
func readFile(t testing.TB, path string) []image {
	t.Helper()
	ds := parse(t, path)
	top := ds.Elements
	base := image{path: path}
	base.sopClass = strings1(find(top, tag.SOPClassUID))[0]
	base.series, _ = strconv.Atoi(strings1(find(top, tag.SeriesNumber))[0])
	base.imageType = strings1(find(top, tag.ImageType))
	info := dicom.MustGetPixelDataInfo(find(top, tag.PixelData).Value)
	pix := func(i int) []uint16 {
		raw, ok := info.Frames[i].NativeData.RawDataSlice().([]uint16)
		if !ok {
			t.Fatalf("%s: frame %d pixel data is %T, want []uint16", path, i, info.Frames[i].NativeData.RawDataSlice())
		}
		return raw
	}
	if base.sopClass == MRImageStorage {
		im := base
		diffusionInto(&im, top)
		rwvmInto(&im, top)
		im.z = decimal(t, find(top, tag.ImagePositionPatient), 2)
		im.pixels = pix(0)
		return []image{im}
	}
	shared := items(top, tag.SharedFunctionalGroupsSequence)[0]
	perFrame := items(top, tag.PerFrameFunctionalGroupsSequence)
	if len(perFrame) != len(info.Frames) {
		t.Fatalf("%s: %d per-frame items, %d frames of pixel data", path, len(perFrame), len(info.Frames))
	}
	var out []image
	for i, pf := range perFrame {
		im := base
		im.frame = i + 1
		for _, group := range [][]*dicom.Element{shared, pf} {
			if d := items(group, tag.MRDiffusionSequence); len(d) > 0 {
				diffusionInto(&im, d[0])
			}
			rwvmInto(&im, group)
		}
		im.imageType = strings1(nested(shared, tag.MRImageFrameTypeSequence, tag.FrameType))
		im.z = decimal(t, nested(pf, tag.PlanePositionSequence, tag.ImagePositionPatient), 2)
		im.pixels = pix(i)
		out = append(out, im)
	}
	return out
}

// readStudy reads every file of st.
func readStudy(t testing.TB, st *Study) []image {
	t.Helper()
	var out []image
	for _, f := range st.Files {
		out = append(out, readFile(t, f)...)
	}
	return out
}

// sliceOf is the DWI slice index of patient z, or -1.
func sliceOf(tr *Truth, z float64) int {
	for s, sz := range tr.SliceZ {
		if d := sz - z; d < 1e-3 && d > -1e-3 {
			return s
		}
	}
	return -1
}
