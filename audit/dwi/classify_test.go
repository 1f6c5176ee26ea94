package dwi

import "testing"

func TestClassify(t *testing.T) {
	const mr = "1.2.840.10008.5.1.4.1.1.4" // MR Image Storage (PS3.4 B.5)
	tests := []struct {
		name string
		in   ClassifyInput
		want MapKind
	}{
		{"a diffusion-weighted image", ClassifyInput{SOPClassUID: mr, ImageType: []string{"ORIGINAL", "PRIMARY", "DIFFUSION", "NONE"}}, KindAcquired},
		{"the scanner's trace (TRACEW, common practice)", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "TRACEW"}}, KindAcquired},
		// PS3.3 C.8.13.1.1.1 value 4 defined terms; PS3.17's DERIVED\PRIMARY\DIFFUSION\ADC.
		{"an ADC map", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}}, KindADC},
		{"an eADC map (DIFFUSION_ATTNTD)", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ATTNTD"}}, KindEADC},
		{"an FA map (DIFFUSION_ANISO)", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ANISO"}}, KindFA},
		{"an FA map (FA, common practice)", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "FA", "ND"}}, KindFA},
		// PS3.3 C.7.6.3.1.1: Samples per Pixel 3 is a colour image.
		{"a colour FA map (RGB)", ClassifyInput{SOPClassUID: mr, SamplesPerPixel: 3, ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "FA"}}, KindColourFA},
		{"another RGB image", ClassifyInput{SOPClassUID: mr, SamplesPerPixel: 3, ImageType: []string{"DERIVED", "SECONDARY"}}, KindOtherDerived},
		{"a tensor b0 (TENSOR_B0, from memory)", ClassifyInput{SOPClassUID: mr, ImageType: []string{"DERIVED", "PRIMARY", "TENSOR_B0"}}, KindTensorB0},
		{"a map in mm2/s (Real World Value Mapping)", ClassifyInput{SOPClassUID: "1.2.840.10008.5.1.4.1.1.30", RealWorld: []RealWorldValue{{Slope: 1, Units: "mm2/s"}}}, KindADC},
		// A maker's private non-image storage class (from memory), and a
		// Comprehensive SR (PS3.4 B.5): not images.
		{"a private non-image object", ClassifyInput{SOPClassUID: "1.3.12.2.1107.5.9.1"}, KindNonImage},
		{"a structured report", ClassifyInput{SOPClassUID: "1.2.840.10008.5.1.4.1.1.88.33"}, KindNonImage},
		{"an instance without SOP Class", ClassifyInput{ImageType: []string{"ORIGINAL", "PRIMARY"}}, KindAcquired},
	}
	for _, tt := range tests {
		t.Run(tt.name+" is "+tt.want.String(), func(t *testing.T) {
			got := Classify(tt.in)
			if got != tt.want {
				t.Errorf("Classify = %v", got)
			}
			if audited := got == KindAcquired || got == KindADC || got == KindEADC; got.Audited() != audited {
				t.Errorf("%v: Audited() = %v", got, got.Audited())
			}
		})
	}
}
