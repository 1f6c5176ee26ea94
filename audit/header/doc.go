// Package header holds every DICOM reader of the audit: what it needs from
// a stored Part 10 file, read safely.
//
// Its parts:
//
//   - header.go: ReadFile reads the Identity of an instance (the UIDs,
//     numbers and descriptions the store indexes it by), without its
//     pixel data.
//   - extract.go, attrs.go, pixels.go: ExtractFile and Extract read the
//     diffusion header model of every image of one file into dwi.Frames:
//     classic MR Image Storage (one image) or Enhanced MR multi-frame (one
//     Frame per frame, attributes from the Per-frame and Shared Functional
//     Groups, PS3.3 C.7.6.16), with the b-value and gradient from the MR
//     Diffusion Macro (PS3.3 C.8.13.5.9) or, failing that, from a maker's
//     private elements (makers.go) or configured private sources
//     (PrivateSource). Pixel values are decoded here, rescaled, into
//     float32.
//   - makers.go: the maker-reader hook, the list of built-in readers of
//     makers' private diffusion encodings, each matched by Manufacturer
//     and private creator.
//   - siemens.go, csa.go, mosaic.go: the Siemens reader (SiemensReader,
//     built in): the CSA image header (0029,xx10) of private creator
//     "SIEMENS CSA HEADER" in both of its layouts (ParseCSA; the series
//     header (0029,xx20) is read the same way), else the "SIEMENS MR
//     HEADER" elements (0019,xx0C/0D/0E), for b-value, direction and
//     directionality; MOSAIC images laid out as their
//     NumberOfImagesInMosaic slices, each with its own Image Position
//     (MosaicLayout), which extraction cuts into one Frame per slice.
//   - options.go: ExtractOptions, PrivateSource, ValueKind.
//   - bounds.go, layout.go: the bounds walker and FindPixelData.
//
// The data set is parsed by github.com/suyashkumar/dicom (one wrapper,
// parse in header.go), which has two habits a node fed by the network
// cannot afford: it panics on transfer syntaxes it does not know, and it
// allocates a value's declared length before checking that the file holds
// that many bytes. So every reader first checks the transfer syntax named
// in the file meta, then walks the element headers itself (bounds.go),
// refusing any length that runs past its container, and only then hands
// the header region to the library, under recover. ReadFile's region ends
// at the first top-level element after group 0020, so the pixel data and
// the large functional-group sequences of an Enhanced MR object are never
// read at all; extraction's region ends at the pixel data, whose length
// is checked against Rows x Columns x Number of Frames before the values
// are read here. Compressed (encapsulated) pixel data is flagged and not
// decoded: the audit says "cannot compute" rather than guess.
package header
