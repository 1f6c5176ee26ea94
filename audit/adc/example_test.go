package adc_test

import (
	"fmt"
	"math"

	"dwiaudit/audit/adc"
)

// A b0 and three orthogonal b = 1000 s/mm² images of two voxels become a
// trace image, an ADC map and an eADC map. The signals are made from
// known ADCs (0.0008 mm²/s, about brain tissue, and 0.003 mm²/s, about
// water at body temperature; common practice), so the maps give them back.
func Example() {
	const b = 1000.0
	s0 := []float32{1000, 800}
	trueADC := []float64{0.0008, 0.003}
	// Equal diffusion along x, y and z: each direction decays alike.
	dir := make([]float32, len(s0))
	for i := range s0 {
		dir[i] = float32(float64(s0[i]) * math.Exp(-b*trueADC[i]))
	}

	trace := make([]float32, len(s0))
	adc.GeometricMean(trace, dir, dir, dir)
	adcMap := make([]float32, len(s0))
	adc.TwoPoint(adcMap, s0, trace, b, 0)
	eadc := make([]float32, len(s0))
	adc.EADC(eadc, s0, trace)

	for i := range s0 {
		fmt.Printf("voxel %d: ADC %.4f mm²/s, eADC %.3f\n", i, adcMap[i], eadc[i])
	}
	// Output:
	// voxel 0: ADC 0.0008 mm²/s, eADC 0.449
	// voxel 1: ADC 0.0030 mm²/s, eADC 0.050
}

// A voxel at the noise floor has no ADC: the logarithm of noise says
// nothing about diffusion.
func ExampleTwoPointValue() {
	fmt.Printf("%.5f\n", adc.TwoPointValue(1000, 449.329, 1000, 20))
	fmt.Println(adc.TwoPointValue(1000, 15, 1000, 20))
	// Output:
	// 0.00080
	// NaN
}

// A weighted fit over b = 0, 500 and 1000 s/mm² recovers the ADC the
// signals were made with, and the fitted S0.
func ExampleFitWLS() {
	bs := []float64{0, 500, 1000}
	signals := make([][]float32, len(bs))
	for k, b := range bs {
		signals[k] = []float32{float32(1200 * math.Exp(-b*0.0011))}
	}
	dst := make([]float32, 1)
	s0 := make([]float32, 1)
	adc.FitWLS(dst, s0, signals, bs, 0)
	fmt.Printf("ADC %.4f mm²/s, S0 %.0f\n", dst[0], s0[0])
	// Output:
	// ADC 0.0011 mm²/s, S0 1200
}

// Percentiles skip the voxels that have no value.
func ExamplePercentile() {
	vals := []float32{0.0007, float32(math.NaN()), 0.0008, 0.0009, 0.003}
	fmt.Printf("median %.5f, 95th %.5f\n", adc.Percentile(vals, 50), adc.Percentile(vals, 95))
	// Output:
	// median 0.00085, 95th 0.00268
}
