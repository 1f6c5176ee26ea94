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
//     series to the series they were derived from.
//   - options.go: Tolerances and their defaults, with the reasons for the
//     values.
//
// The package reads no DICOM: it imports no DICOM library and nothing of
// dwiaudit/scp, so the rules that import it do not either
// (rules/deps_test.go). Reading files is package audit/header's.
package dwi
