package dwi

import (
	"slices"
	"strings"
)

// ClassifyInput is what a reader knows of an image when it classifies
// it: the instance's SOP Class UID and Samples per Pixel (0028,0002), and
// the image's own Image Type (0008,0008) or Frame Type (0008,9007) and
// Real World Value Mapping.
type ClassifyInput struct {
	SOPClassUID     string
	SamplesPerPixel int // 0 when absent (then 1, PS3.3 C.7.6.3)
	ImageType       []string
	RealWorld       []RealWorldValue
}

// imageStorage are the storage SOP Classes whose instances the audit
// reads as images (PS3.4 B.5): MR Image, Enhanced MR Image,
// Enhanced MR Color Image, Legacy Converted Enhanced MR Image,
// Parametric Map, Secondary Capture and the multi-frame Secondary
// Captures.
var imageStorage = []string{
	"1.2.840.10008.5.1.4.1.1.4", "1.2.840.10008.5.1.4.1.1.4.1", "1.2.840.10008.5.1.4.1.1.4.3", "1.2.840.10008.5.1.4.1.1.4.4",
	"1.2.840.10008.5.1.4.1.1.30",
	"1.2.840.10008.5.1.4.1.1.7", "1.2.840.10008.5.1.4.1.1.7.1", "1.2.840.10008.5.1.4.1.1.7.2",
	"1.2.840.10008.5.1.4.1.1.7.3", "1.2.840.10008.5.1.4.1.1.7.4",
}

// Classify says what an image is, for the readers (audit/header) to set
// Frame.Kind and to skip decoding the pixels of what is not audited
// (MapKind.Audited):
//
//   - KindNonImage: an SOP Class that is no image storage class the
//     audit reads (a private non-image object such as a maker's raw
//     header, 1.3.12.2.1107.5.9.1 from memory; a structured report). An
//     empty SOP Class UID is not judged.
//   - Image Type or Frame Type value 4 (Derived Pixel Contrast, PS3.3
//     C.8.16.1, and the Enhanced MR defined terms of C.8.13.1.1.1: ADC,
//     DIFFUSION_ATTNTD, DIFFUSION_ANISO): KindADC, KindEADC (also EXP,
//     common practice), KindFA (also FA, common practice).
//   - Samples per Pixel 3 (an RGB image, PS3.3 C.7.6.3.1.1): KindColourFA
//     when a value of its Image Type names FA (common practice: colour FA
//     maps are the RGB images of a diffusion series), else
//     KindOtherDerived. The audit computes on one sample per pixel.
//   - Image Type naming TENSOR_B0 (common practice, from memory):
//     KindTensorB0.
//   - A Real World Value Mapping in units of a diffusion coefficient
//     (UCUM mm2/s, um2/s, 10-6.mm2/s; PS3.16 CID 7181, from memory):
//     KindADC.
//   - Anything else is KindAcquired: a b0, a diffusion-weighted image or
//     the scanner's trace (TRACEW).
func Classify(in ClassifyInput) MapKind {
	if in.SOPClassUID != "" && !slices.Contains(imageStorage, in.SOPClassUID) {
		return KindNonImage
	}
	names := func(terms ...string) bool {
		for i, v := range in.ImageType {
			if i < 2 {
				continue // values 1 and 2: ORIGINAL/DERIVED, PRIMARY/SECONDARY
			}
			for _, t := range terms {
				if strings.EqualFold(strings.TrimSpace(v), t) {
					return true
				}
			}
		}
		return false
	}
	if in.SamplesPerPixel > 1 {
		if names("FA", "COLFA", "COLOR_FA", "DIFFUSION_ANISO") {
			return KindColourFA
		}
		return KindOtherDerived
	}
	if len(in.ImageType) >= 4 {
		switch strings.ToUpper(strings.TrimSpace(in.ImageType[3])) {
		case "ADC":
			return KindADC
		case "DIFFUSION_ATTNTD", "EXP":
			return KindEADC
		case "DIFFUSION_ANISO", "FA":
			return KindFA
		}
	}
	if names("TENSOR_B0") {
		return KindTensorB0
	}
	if names("FA", "DIFFUSION_ANISO") {
		return KindFA
	}
	for _, m := range in.RealWorld {
		switch m.Units {
		case "mm2/s", "um2/s", "10-6.mm2/s":
			return KindADC
		}
	}
	return KindAcquired
}
