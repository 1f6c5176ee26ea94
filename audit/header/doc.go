// Package header reads what the audit needs from the header of a stored
// DICOM Part 10 file, without its pixel data.
//
// Today that is the Identity of an instance: the UIDs, numbers and
// descriptions the store indexes it by (study, series, instance, scanner).
// The diffusion header model (b-values, directions, Enhanced MR functional
// groups, private-tag sources) will grow here too, on the same reader.
//
// The data set is parsed by github.com/suyashkumar/dicom, which has two
// habits a node fed by the network cannot afford: it panics on transfer
// syntaxes it does not know, and it allocates a value's declared length
// before checking that the file holds that many bytes. So ReadFile first
// checks the transfer syntax named in the file meta, then walks the element
// headers itself (bounds.go), refusing any length that runs past its
// container, and only then hands the header region to the library, under
// recover. The region ends at the first top-level element after group
// 0020, so the pixel data and the large functional-group sequences of an
// Enhanced MR object are never read at all.
package header
