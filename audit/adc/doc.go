// Package adc is the arithmetic of diffusion imaging on plain slices:
// trace images, apparent diffusion coefficient (ADC) maps, exponential
// ADC (eADC), a noise estimate, a tissue mask and order statistics. It
// knows nothing of DICOM, files or series; package audit feeds it the
// volumes that package audit/dwi assembled.
//
// Units are those of docs/references.md#units: b in s/mm², ADC in mm²/s, signals in
// rescaled pixel units. Maps are float32 (the storage of a volume) but
// every per-voxel computation runs in float64 and is rounded once, on
// store.
//
// The model is mono-exponential, S(b) = S0·exp(-b·ADC)
// (docs/references.md#mono-exponential):
//
//   - GeometricMean makes the trace-weighted image of three orthogonal
//     directions, (Sx·Sy·Sz)^(1/3) = S0·exp(-b·Tr(D)/3) (Basser &
//     Pierpaoli; docs/references.md#basser-pierpaoli).
//   - TwoPoint is ln(S0/Sb)/b; FitWLS is the log-linear fit over several
//     b-values weighted by S², because the logarithm amplifies the noise
//     of weak signals (Chad & Pasternak, ISMRM 2020 #4415; docs/references.md#chad-pasternak-2020).
//   - EADC is Sb/S0 = exp(-b·ADC) (docs/references.md#eadc).
//   - BackgroundNoise and NoiseFromDifference estimate the noise standard
//     deviation in the two ways of NEMA MS 1-2008 (background region,
//     difference of two repeats; see noise.go).
//   - TissueMask thresholds the b0 at a multiple of that noise above the
//     background and cleans the result with morphology (see mask.go).
//   - Percentile and Median ignore NaN and never reorder the caller's
//     data; PercentileInPlace does, to spare a copy.
//
// No function allocates per voxel; the slice kernels allocate nothing,
// the mask allocates a few volume-sized buffers per call. A voxel that
// cannot be computed (a signal at or below the floor, a missing slice
// stored as NaN) is NaN in the map, and every statistic here skips NaN.
// Length mismatches between slices are programming errors and panic,
// as they do in the standard library's slice kernels.
package adc
