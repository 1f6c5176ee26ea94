package phantom

import (
	"fmt"
	"path/filepath"
	"slices"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/synth"
)

// instanceOut is one Enhanced MR instance: the frames of some volumes of a
// series that share Image Type.
type instanceOut struct {
	kind   volKind // volB0 stands for "original" (b0 and directional frames)
	vols   []*volume
	frames []frameOut
}

// frameOut is one frame: slice s of vol, the series' k-th volume.
type frameOut struct {
	vol *volume
	k   int
	s   int
}

// original reports whether the instance holds acquired (ORIGINAL) frames.
func (in *instanceOut) original() bool { return in.kind == volB0 || in.kind == volDirectional }

// instances splits a series into Enhanced MR instances: acquired frames
// (ORIGINAL), trace frames and ADC frames (DERIVED), so that Image Type
// and Frame Type agree within an instance and no instance needs MIXED.
func (so *seriesOut) instances() []*instanceOut {
	var out []*instanceOut
	find := func(k volKind) *instanceOut {
		if k == volDirectional {
			k = volB0
		}
		for _, in := range out {
			if in.kind == k {
				return in
			}
		}
		in := &instanceOut{kind: k}
		out = append(out, in)
		return in
	}
	for k, v := range so.vols {
		in := find(v.kind)
		in.vols = append(in.vols, v)
		for s := range v.missing {
			if v.present(s) {
				in.frames = append(in.frames, frameOut{vol: v, k: k, s: s})
			}
		}
	}
	return out
}

// writeEnhancedSeries writes the series as Enhanced MR Image Storage
// instances.
func (w *writer) writeEnhancedSeries(so *seriesOut) (*SeriesInfo, error) {
	info := &SeriesInfo{UID: so.uid, Number: so.number, Description: so.description, Role: so.role, SOPClassUID: EnhancedMRImageStorage}
	for n, in := range so.instances() {
		if len(in.frames) == 0 {
			continue
		}
		ds, err := w.enhanced(so, in, n+1)
		if err != nil {
			return nil, err
		}
		path := filepath.Join(w.dir, so.folder, fmt.Sprintf("mf%02d.dcm", n+1))
		if err := synth.WriteFile(path, ds); err != nil {
			return nil, err
		}
		info.Files = append(info.Files, path)
		info.Images += len(in.frames)
	}
	return info, nil
}

// diffusionKey is what the MR Diffusion Sequence of a frame says.
type diffusionKey struct {
	b    float64
	kind volKind
	dir  [3]float64
}

func keyOf(v *volume) diffusionKey {
	k := diffusionKey{b: v.bHeader, kind: v.kind}
	if v.kind == volDirectional {
		k.dir = v.dir
	}
	return k
}

// dimension is one item of the Dimension Index Sequence (PS3.3 C.7.6.17).
type dimension struct {
	pointer, group tag.Tag
	label          string
	index          func(f frameOut) int // 1-based Dimension Index Value of a frame
}

// enhanced is the data set of one instance: the Enhanced MR Image IOD
// (PS3.3 A.36.2): the common modules, Image Pixel (C.7.6.3), Multi-frame
// Functional Groups (C.7.6.16), Multi-frame Dimension (C.7.6.17),
// Acquisition Context (C.7.6.14), Enhanced MR Image (C.8.13.1), MR Pulse
// Sequence (C.8.13.4, for original frames), and the functional group
// macros of Table A.36-2.
func (w *writer) enhanced(so *seriesOut, in *instanceOut, number int) (dicom.Dataset, error) {
	a, o := w.a, w.o
	sop := synth.NewUID(w.uids)
	b := &builder{}
	it := b.item()
	w.fileMeta(it, EnhancedMRImageStorage, sop)
	w.common(it, so, EnhancedMRImageStorage, sop)

	first := so.imageTime(in.frames[0].k)
	last := so.imageTime(in.frames[len(in.frames)-1].k)
	typ := imageType(in.kind)
	it.str(tag.ImageType, typ...)
	it.is(tag.InstanceNumber, number)
	it.str(tag.ContentDate, da(first))
	it.str(tag.ContentTime, tm(first))
	it.is(tag.NumberOfFrames, len(in.frames))

	w.imagePixel(it, a.rows, a.cols)
	it.str(tag.PresentationLUTShape, "IDENTITY")
	it.str(tag.LossyImageCompression, "00")
	it.str(tag.BurnedInAnnotation, "NO")

	// Enhanced MR Image module with the MR Image and Spectroscopy Instance
	// Macro (C.8.13.2), the Common CT/MR Image Description Macro
	// (C.8.16.2) and the MR Image Description Macro (C.8.13.3).
	it.str(tag.ContentQualification, "PRODUCT")
	it.str(tag.PixelPresentation, "MONOCHROME")
	it.str(tag.VolumetricProperties, "VOLUME")
	it.str(tag.VolumeBasedCalculationTechnique, "NONE")
	it.str(tag.ComplexImageComponent, "MAGNITUDE")
	it.str(tag.AcquisitionContrast, "DIFFUSION")
	it.str(tag.ApplicableSafetyStandardAgency, "IEC")
	if in.original() {
		it.str(tag.AcquisitionDateTime, dt(first))
		it.fd(tag.AcquisitionDuration, last.Sub(first).Seconds()+repetitionTime.Seconds())
		it.str(tag.ResonantNucleus, "1H")
		it.str(tag.KSpaceFiltering, "NONE")
		it.ds(tag.MagneticFieldStrength, o.Scanner.FieldStrength)
		w.pulseSequence(it)
	}
	it.seq(tag.AcquisitionContextSequence)

	// Multi-frame Dimension module.
	dims := w.dimensions(in)
	org := b.item()
	org.str(tag.DimensionOrganizationUID, w.dimOrg)
	it.seq(tag.DimensionOrganizationSequence, org)
	var dimItems []*item
	for _, d := range dims {
		x := b.item()
		x.num(tag.DimensionIndexPointer, int(d.pointer.Group), int(d.pointer.Element))
		x.num(tag.FunctionalGroupPointer, int(d.group.Group), int(d.group.Element))
		x.str(tag.DimensionOrganizationUID, w.dimOrg)
		x.str(tag.DimensionDescriptionLabel, d.label)
		dimItems = append(dimItems, x)
	}
	it.seq(tag.DimensionIndexSequence, dimItems...)

	// Shared functional groups.
	shared := b.item()
	pm := b.item()
	pm.ds(tag.PixelSpacing, a.spacing, a.spacing)
	pm.ds(tag.SliceThickness, sliceThicknessMM)
	pm.ds(tag.SpacingBetweenSlices, sliceThicknessMM)
	shared.seq(tag.PixelMeasuresSequence, pm)
	po := b.item()
	po.ds(tag.ImageOrientationPatient, orientation()...)
	shared.seq(tag.PlaneOrientationSequence, po)
	fa := b.item()
	if o.Case.iceWater() {
		fa.code(tag.AnatomicRegionSequence, "69536005", "SCT", "Head") // SNOMED CT (from memory)
	} else {
		fa.code(tag.AnatomicRegionSequence, "12738006", "SCT", "Brain") // SNOMED CT (from memory)
	}
	fa.str(tag.FrameLaterality, "U")
	shared.seq(tag.FrameAnatomySequence, fa)
	pvt := b.item()
	pvt.ds(tag.RescaleIntercept, 0)
	pvt.ds(tag.RescaleSlope, 1)
	pvt.str(tag.RescaleType, "US")
	shared.seq(tag.PixelValueTransformationSequence, pvt)
	ft := b.item()
	ft.str(tag.FrameType, typ...)
	ft.str(tag.PixelPresentation, "MONOCHROME")
	ft.str(tag.VolumetricProperties, "VOLUME")
	ft.str(tag.VolumeBasedCalculationTechnique, "NONE")
	ft.str(tag.ComplexImageComponent, "MAGNITUDE")
	ft.str(tag.AcquisitionContrast, "DIFFUSION")
	shared.seq(tag.MRImageFrameTypeSequence, ft)
	if in.original() {
		w.acquisitionMacros(shared)
	}
	if in.kind == volADC {
		shared.seq(tag.RealWorldValueMappingSequence, w.adcMapping(b))
	}
	keys := map[diffusionKey]bool{}
	for _, v := range in.vols {
		keys[keyOf(v)] = true
	}
	diffusionShared := len(keys) == 1 && in.kind != volADC
	if diffusionShared {
		w.mrDiffusion(shared, in.vols[0])
	}
	it.seq(tag.SharedFunctionalGroupsSequence, shared)

	// Per-frame functional groups.
	perFrame := make([]*item, len(in.frames))
	for i, f := range in.frames {
		pf := b.item()
		when := so.imageTime(f.k)
		fc := b.item()
		fc.str(tag.FrameReferenceDateTime, dt(when))
		fc.str(tag.FrameAcquisitionDateTime, dt(when))
		fc.fd(tag.FrameAcquisitionDuration, float64(repetitionTime.Milliseconds()))
		fc.str(tag.StackID, "1")
		fc.num(tag.InStackPositionNumber, f.s+1)
		idx := make([]int, len(dims))
		for j, d := range dims {
			idx[j] = d.index(f)
		}
		fc.num(tag.DimensionIndexValues, idx...)
		pf.seq(tag.FrameContentSequence, fc)
		pp := b.item()
		pp.ds(tag.ImagePositionPatient, w.position(f.vol, f.s)...)
		pf.seq(tag.PlanePositionSequence, pp)
		if !diffusionShared && in.kind != volADC {
			w.mrDiffusion(pf, f.vol)
		}
		perFrame[i] = pf
	}
	it.seq(tag.PerFrameFunctionalGroupsSequence, perFrame...)

	n := a.rows * a.cols
	pixels := make([]byte, 0, 2*n*len(in.frames))
	for _, f := range in.frames {
		pixels = append(pixels, w.sliceBytes(f.vol, f.s)...)
	}
	it.add(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: pixels})
	return it.dataset()
}

// dimensions is the instance's Dimension Index Sequence: the stack and
// the position in it, then the b-value and gradient direction when they
// vary (PS3.3 C.7.6.17.3).
func (w *writer) dimensions(in *instanceOut) []dimension {
	dims := []dimension{
		{tag.StackID, tag.FrameContentSequence, "Stack ID", func(frameOut) int { return 1 }},
		{tag.InStackPositionNumber, tag.FrameContentSequence, "In-Stack Position Number", func(f frameOut) int { return f.s + 1 }},
	}
	if in.kind == volADC {
		return dims
	}
	var bs []float64
	var dirs [][3]float64
	for _, v := range in.vols {
		if !slices.Contains(bs, v.bHeader) {
			bs = append(bs, v.bHeader)
		}
		if v.kind == volDirectional && !slices.Contains(dirs, v.dir) {
			dirs = append(dirs, v.dir)
		}
	}
	if len(bs) > 1 {
		dims = append(dims, dimension{tag.DiffusionBValue, tag.MRDiffusionSequence, "Diffusion b-value",
			func(f frameOut) int { return slices.Index(bs, f.vol.bHeader) + 1 }})
	}
	if len(dirs) > 1 {
		dims = append(dims, dimension{tag.DiffusionGradientOrientation, tag.DiffusionGradientDirectionSequence, "Diffusion Gradient Orientation",
			func(f frameOut) int {
				// A b0 frame has no gradient (PS3.3 C.8.13.5.9); it takes
				// index 1, and its b-value index keeps the frame apart.
				return max(1, slices.Index(dirs, f.vol.dir)+1)
			}})
	}
	return dims
}

// mrDiffusion adds the MR Diffusion Macro (PS3.3 C.8.13.5.9) of v to a
// functional group item.
func (w *writer) mrDiffusion(group *item, v *volume) {
	d := group.b.item()
	w.diffusion(d, v)
	group.seq(tag.MRDiffusionSequence, d)
}

// pulseSequence adds the MR Pulse Sequence module (PS3.3 C.8.13.4):
// single-shot spin-echo EPI with fat suppression.
func (w *writer) pulseSequence(it *item) {
	it.str(tag.PulseSequenceName, "SYN_DWI_EPI")
	it.str(tag.MRAcquisitionType, "2D")
	it.str(tag.EchoPulseSequence, "SPIN")
	it.str(tag.MultipleSpinEcho, "NO")
	it.str(tag.MultiPlanarExcitation, "NO")
	it.str(tag.PhaseContrast, "NO")
	it.str(tag.TimeOfFlightContrast, "NO")
	it.str(tag.SteadyStatePulseSequence, "NONE")
	it.str(tag.EchoPlanarPulseSequence, "YES")
	it.str(tag.SaturationRecovery, "NO")
	it.str(tag.SpectrallySelectedSuppression, "FAT")
	it.str(tag.OversamplingPhase, "NONE")
	it.str(tag.GeometryOfKSpaceTraversal, "RECTILINEAR")
	it.str(tag.RectilinearPhaseEncodeReordering, "LINEAR")
	it.str(tag.SegmentedKSpaceTraversal, "SINGLE")
	it.num(tag.NumberOfKSpaceTrajectories, 1)
}

// acquisitionMacros adds to the shared functional groups the macros
// Table A.36-2 requires for original frames: MR Timing and Related
// Parameters (C.8.13.5.2), MR FOV/Geometry (C.8.13.5.3), MR Echo
// (C.8.13.5.4), MR Modifier (C.8.13.5.5), MR Imaging Modifier
// (C.8.13.5.6), MR Receive Coil (C.8.13.5.7), MR Transmit Coil
// (C.8.13.5.8) and MR Averages (C.8.13.5.10).
func (w *writer) acquisitionMacros(shared *item) {
	b, o, m := shared.b, w.o, w.a.rows
	t := b.item()
	t.ds(tag.RepetitionTime, float64(repetitionTime.Milliseconds()))
	t.ds(tag.FlipAngle, flipAngleDeg)
	t.is(tag.EchoTrainLength, m)
	t.num(tag.RFEchoTrainLength, 1)
	t.num(tag.GradientEchoTrainLength, m)
	// IEC 60601-2-33 operating mode and SAR, what the safety attributes
	// of C.8.13.5.2 record (invented, normal-mode values).
	var modes []*item
	for _, mode := range []string{"STATIC FIELD", "RF", "GRADIENT"} {
		om := b.item()
		om.str(tag.OperatingModeType, mode)
		om.str(tag.OperatingMode, "IEC_NORMAL")
		modes = append(modes, om)
	}
	t.seq(tag.OperatingModeSequence, modes...)
	sar := b.item()
	sar.str(tag.SpecificAbsorptionRateDefinition, "IEC_WHOLE_BODY")
	sar.fd(tag.SpecificAbsorptionRateValue, 0.8)
	t.seq(tag.SpecificAbsorptionRateSequence, sar)
	shared.seq(tag.MRTimingAndRelatedParametersSequence, t)

	g := b.item()
	g.str(tag.InPlanePhaseEncodingDirection, "COLUMN")
	g.num(tag.MRAcquisitionFrequencyEncodingSteps, m)
	g.num(tag.MRAcquisitionPhaseEncodingStepsInPlane, m)
	g.ds(tag.PercentSampling, 100)
	g.ds(tag.PercentPhaseFieldOfView, 100)
	shared.seq(tag.MRFOVGeometrySequence, g)

	e := b.item()
	e.fd(tag.EffectiveEchoTime, echoTimeMS)
	shared.seq(tag.MREchoSequence, e)

	mod := b.item()
	mod.str(tag.InversionRecovery, "NO")
	mod.str(tag.FlowCompensation, "NONE")
	mod.str(tag.Spoiling, "NONE")
	mod.str(tag.T2Preparation, "NO")
	mod.str(tag.SpectrallySelectedExcitation, "NONE")
	mod.str(tag.SpatialPresaturation, "NONE")
	mod.str(tag.PartialFourier, "NO")
	mod.str(tag.ParallelAcquisition, "NO")
	shared.seq(tag.MRModifierSequence, mod)

	im := b.item()
	im.str(tag.MagnetizationTransfer, "NONE")
	im.str(tag.BloodSignalNulling, "NO")
	im.str(tag.Tagging, "NONE")
	im.fd(tag.TransmitterFrequency, protonMHzPerT*o.Scanner.FieldStrength)
	im.ds(tag.PixelBandwidth, pixelBandwidthHz)
	shared.seq(tag.MRImagingModifierSequence, im)

	rc := b.item()
	rc.str(tag.ReceiveCoilName, "HEAD")
	rc.str(tag.ReceiveCoilManufacturerName, "")
	rc.str(tag.ReceiveCoilType, "VOLUME")
	rc.str(tag.QuadratureReceiveCoil, "NO")
	shared.seq(tag.MRReceiveCoilSequence, rc)

	tc := b.item()
	tc.str(tag.TransmitCoilName, "BODY")
	tc.str(tag.TransmitCoilManufacturerName, "")
	tc.str(tag.TransmitCoilType, "BODY")
	shared.seq(tag.MRTransmitCoilSequence, tc)

	av := b.item()
	av.ds(tag.NumberOfAverages, 1)
	shared.seq(tag.MRAveragesSequence, av)
}
