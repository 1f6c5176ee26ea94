// Package dwi turns the stored instances of a diffusion-weighted MR study
// into the model the audit computes on and the rules judge: images with
// their diffusion header (Frame), grouped into volumes of one b-value and
// one gradient direction on a common slice grid (Series), with what
// assembly found wrong kept as data (Facts).
//
// Its parts:
//
//   - model.go: the types, shared with audit/adc and the rules; no I/O.
//   - extract.go, attrs.go, pixels.go: ExtractFile and Extract read one
//     Part 10 file, classic MR Image Storage (one image) or Enhanced MR
//     multi-frame (one Frame per frame, attributes from the Per-frame and
//     Shared Functional Groups, PS3.3 C.7.6.16), with the b-value from
//     Diffusion b-value (0018,9087) or, failing that, from configured
//     private sources (PrivateSource). Pixel values are decoded here,
//     rescaled, into float32.
//   - assemble.go: AssembleSeries groups one series' frames into volumes
//     and maps; study.go: AssembleStudy does every series of a study and
//     links a series without b0 to a b0 in a sibling series, and map-only
//     series to the series they were derived from.
//   - options.go: ExtractOptions, PrivateSource, Tolerances and their
//     defaults, with the reasons for the values.
//
// Safety of the reader: the data-set parser (github.com/suyashkumar/dicom)
// panics on transfer syntaxes it does not know and allocates a value's
// declared length before checking the file holds it. So extraction
// checks the transfer syntax named in the file meta first, then walks
// every element length with audit/header's bounds walker
// (header.FindPixelData), which also says where the pixel data lies; the
// parser is then given only the header region before the pixel data,
// under recover, and the pixel values are read here, after their length
// has been checked against Rows x Columns x Number of Frames. Compressed
// (encapsulated) pixel data is flagged and never decoded: the audit says
// "cannot compute" rather than guess.
package dwi
