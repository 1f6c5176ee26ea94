// Package dwi is the model of a diffusion-weighted MR study that the audit
// computes on and the rules judge: images with their diffusion header
// (Frame), grouped into volumes of one b-value and one gradient direction
// on a common slice grid (Series), with what assembly found wrong kept as
// data (Facts).
//
// Its parts:
//
//   - model.go: the types, shared with audit/header (which fills Frames
//     from DICOM files), audit/adc and the rules; no I/O.
//   - assemble.go: AssembleSeries groups one series' frames into volumes
//     and maps; study.go: AssembleStudy does every series of a study and
//     links a series without b0 to a b0 in a sibling series, and map-only
//     series to the series they were derived from, and lists series of
//     derived maps it does not use (Study.Derived).
//   - b-values: values within the b-value tolerance are one b-value; a
//     volume's BValue is its nominal value (0 within the tolerance of 0,
//     else the whole number most of its images carry) and BValueMeasured
//     the mean the images carry. b up to Tolerances.B0Max (50 s/mm²,
//     common practice) is the reference weighting.
//   - repeats: images of one b-value, direction and slice are repeats
//     (averages): kept in Volume.Images and averaged into the slice the
//     ADC uses (Volume.Combined). Weighted images that give no direction
//     and no isotropic label, several per slice, are combined as a trace
//     (their geometric mean) and reported (Facts.UnknownDirections; rule
//     unknown-directions). Nothing acquired is dropped silently.
//   - classify.go: Classify, what an image is (acquired, scanner ADC or
//     eADC, FA, colour FA, tensor b0, not an image), from SOP Class,
//     Samples per Pixel, Image Type and Real World Value Mapping; the
//     readers call it.
//   - table.go: Series.GradientTable, one row per acquired volume, for
//     `check --format json` and the study page.
//   - options.go: Tolerances and their defaults, with the reasons for the
//     values.
//
// The package reads no DICOM: it imports no DICOM library and nothing of
// dwiaudit/scp, so the rules that import it do not either
// (rules/deps_test.go). Reading files is package audit/header's.
package dwi
