package phantom

import (
	"fmt"
	"path/filepath"
	"time"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/synth"
)

// The pulse sequence every image claims: single-shot spin-echo EPI with
// fat saturation, as clinical brain DWI is acquired (common practice).
const (
	repetitionTime   = 5 * time.Second
	echoTimeMS       = 80.0
	flipAngleDeg     = 90.0
	pixelBandwidthHz = 1500.0 // per pixel, of the order of EPI readouts (common practice)
	protonMHzPerT    = 42.577 // gyromagnetic ratio of 1H, MHz/T (from memory)
	sequenceName     = "syn_dwi_se_epi"
)

// Image Type (0008,0008) / Frame Type (0008,9007) values (PS3.3 C.8.3.1.1.1
// and C.8.16.1; PS3.17's suggestion DERIVED\PRIMARY\DIFFUSION\ADC for ADC
// maps, docs/references.md#derived-maps). Value 4 is NONE for original images (C.8.16.1.4);
// DIFFUSION marks the derived isotropic (trace) image (value 4 defined
// terms of MR, C.8.13.1.1.1, from memory).
func imageType(k volKind) []string {
	switch k {
	case volTrace:
		return []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION"}
	case volADC:
		return []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}
	}
	return []string{"ORIGINAL", "PRIMARY", "DIFFUSION", "NONE"}
}

// directionality is Diffusion Directionality (0018,9075), PS3.3
// C.8.13.5.9.
func directionality(k volKind) string {
	switch k {
	case volB0:
		return "NONE"
	case volDirectional:
		return "DIRECTIONAL"
	}
	return "ISOTROPIC"
}

// classicImage is what one classic MR image holds: one slice of a
// volume, or for a mosaic every slice of it tiled into one image.
type classicImage struct {
	vol        *volume
	k          int // the volume's index in its series
	slice      int // the slice; the first slice for a mosaic
	instance   int // Instance Number
	rows, cols int
	pos        []float64 // Image Position (Patient)
	pixels     []byte    // little-endian 16-bit pixels, rows*cols
	mosaic     int       // slices tiled into the image, 0 for one slice
}

// writeClassicSeries writes one MR Image Storage file per present image,
// volume after volume, slice after slice.
func (w *writer) writeClassicSeries(so *seriesOut) (*SeriesInfo, error) {
	info := &SeriesInfo{UID: so.uid, Number: so.number, Description: so.description, Role: so.role, SOPClassUID: MRImageStorage}
	instance := 0
	for k, v := range so.vols {
		for s := 0; s < w.a.slices; s++ {
			if !v.present(s) {
				continue
			}
			instance++
			im := classicImage{vol: v, k: k, slice: s, instance: instance, rows: w.a.rows, cols: w.a.cols,
				pos: w.position(v, s), pixels: w.sliceBytes(v, s)}
			if err := w.writeClassicFile(so, info, im); err != nil {
				return nil, err
			}
		}
	}
	return info, nil
}

// writeClassicFile writes im as the next file of the series.
func (w *writer) writeClassicFile(so *seriesOut, info *SeriesInfo, im classicImage) error {
	ds, err := w.classic(so, im)
	if err != nil {
		return err
	}
	path := filepath.Join(w.dir, so.folder, fmt.Sprintf("mr%04d.dcm", im.instance))
	if err := synth.WriteFile(path, ds); err != nil {
		return err
	}
	info.Files = append(info.Files, path)
	info.Images++
	return nil
}

// classic is the data set of one classic image: the MR Image IOD (PS3.3
// A.4): the common modules, General Image (C.7.6.1), Image Plane
// (C.7.6.2), Image Pixel (C.7.6.3), MR Image (C.8.3.1), plus the
// diffusion encoding of the layout (for the standard layout the MR
// Diffusion Macro's attributes (C.8.13.5.9) at top level, where scanners
// put them in classic images, docs/references.md#diffusion-attributes), and for ADC maps a Real World
// Value Mapping (C.7.6.16.2.11).
func (w *writer) classic(so *seriesOut, im classicImage) (dicom.Dataset, error) {
	a, o, v := w.a, w.o, im.vol
	sop := synth.NewUID(w.uids)
	it := (&builder{}).item()
	w.fileMeta(it, MRImageStorage, sop)
	w.common(it, so, MRImageStorage, sop)

	when := so.imageTime(im.k)
	typ := imageType(v.kind)
	if im.mosaic > 0 {
		typ = append(typ, "MOSAIC")
	}
	it.str(tag.ImageType, typ...)
	it.is(tag.InstanceNumber, im.instance)
	it.str(tag.ContentDate, da(when))
	it.str(tag.ContentTime, tm(when))
	it.is(tag.AcquisitionNumber, 1)
	it.str(tag.AcquisitionDate, da(when))
	it.str(tag.AcquisitionTime, tm(when))

	it.ds(tag.PixelSpacing, a.spacing, a.spacing)
	it.ds(tag.ImageOrientationPatient, orientation()...)
	it.ds(tag.ImagePositionPatient, im.pos...)
	it.ds(tag.SliceThickness, sliceThicknessMM)
	it.ds(tag.SpacingBetweenSlices, sliceThicknessMM)
	it.ds(tag.SliceLocation, im.pos[2])

	w.imagePixel(it, im.rows, im.cols)

	it.str(tag.ScanningSequence, "SE", "EP")
	it.str(tag.SequenceVariant, "NONE")
	it.str(tag.ScanOptions, "FS")
	it.str(tag.MRAcquisitionType, "2D")
	it.str(tag.SequenceName, sequenceName)
	it.ds(tag.RepetitionTime, float64(repetitionTime.Milliseconds()))
	it.ds(tag.EchoTime, echoTimeMS)
	it.is(tag.EchoTrainLength, a.rows) // single-shot EPI: every phase-encoding line from one excitation
	it.ds(tag.NumberOfAverages, 1)
	it.ds(tag.ImagingFrequency, protonMHzPerT*o.Scanner.FieldStrength)
	it.str(tag.ImagedNucleus, "1H")
	it.ds(tag.MagneticFieldStrength, o.Scanner.FieldStrength)
	it.ds(tag.PixelBandwidth, pixelBandwidthHz)
	it.ds(tag.FlipAngle, flipAngleDeg)
	it.str(tag.InPlanePhaseEncodingDirection, "COL")

	if v.kind == volADC {
		it.seq(tag.RealWorldValueMappingSequence, w.adcMapping(it.b))
	}
	w.encodeDiffusion(it, im)

	it.add(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: im.pixels})
	return it.dataset()
}

// encodeDiffusion adds the diffusion encoding of im in the study's
// layout. An ADC map carries none, but a mosaic ADC map still says how
// its slices are tiled.
func (w *writer) encodeDiffusion(it *item, im classicImage) {
	v := im.vol
	switch w.o.Layout {
	case LayoutSiemensMosaic:
		w.siemens(it, im)
		return
	}
	if v.kind == volADC {
		return
	}
	switch w.o.Layout {
	case LayoutGE:
		w.ge(it, v)
	case LayoutPhilips:
		w.philips(it, v)
	case LayoutCanon:
		w.canon(it, v)
	case LayoutUIH:
		w.uih(it, v)
	default:
		w.diffusion(it, v)
	}
}

// diffusion adds the MR Diffusion Macro's attributes (PS3.3 C.8.13.5.9)
// of v to it: b-value, directionality, and for a directional image the
// gradient direction.
func (w *writer) diffusion(it *item, v *volume) {
	it.fd(tag.DiffusionBValue, v.bHeader)
	it.str(tag.DiffusionDirectionality, directionality(v.kind))
	if v.kind == volDirectional {
		g := it.b.item()
		g.fd(tag.DiffusionGradientOrientation, v.dir[0], v.dir[1], v.dir[2])
		it.seq(tag.DiffusionGradientDirectionSequence, g)
	}
}

// adcMapping is the Real World Value Mapping item of the scanner ADC map
// (PS3.3 C.7.6.16.2.11): value = slope * stored + intercept in mm2/s
// (UCUM, docs/references.md#real-world-value-mapping). The misscaled case writes a slope misscaleFactor too
// large.
func (w *writer) adcMapping(b *builder) *item {
	slope := w.a.truth.ADCMapSlope
	m := b.item()
	m.num(tag.RealWorldValueFirstValueMapped, 0)
	m.num(tag.RealWorldValueLastValueMapped, maxPixel)
	m.fd(tag.RealWorldValueIntercept, 0)
	m.fd(tag.RealWorldValueSlope, slope)
	m.str(tag.LUTExplanation, "ADC")
	m.str(tag.LUTLabel, "ADC")
	m.code(tag.MeasurementUnitsCodeSequence, "mm2/s", "UCUM", "mm2/s")
	return m
}
