package part10

import (
	"errors"
	"fmt"
)

// Sentinel errors. Callers test for them with errors.Is; the reader wraps them
// in an *elementError when the fault belongs to one element.
var (
	// ErrNotPart10 means the input has no 128-byte preamble followed by
	// "DICM" (PS3.10 7.1), so it is not a DICOM Part 10 file. Input shorter
	// than preamble plus prefix is reported the same way: nothing in it can
	// tell a cut file from a short file of another kind.
	ErrNotPart10 = errors.New("part10: not a DICOM Part 10 file")

	// ErrTruncated means the input ended inside the File Meta Information.
	ErrTruncated = errors.New("part10: file meta information truncated")

	// errBadVR means an element header in group 0002 does not carry an
	// explicit VR we know; the group is always Explicit VR Little Endian
	// (PS3.10 7.1), so this is a damaged or non-conformant file.
	errBadVR = errors.New("part10: invalid value representation in file meta information")

	// ErrValueTooLong means an element's value length is above the limit
	// this package accepts for its VR (see maxValueLength and
	// maxBinaryValueLength).
	ErrValueTooLong = errors.New("part10: file meta element value too long")

	// errUndefinedLength means an element in group 0002 has undefined
	// length (FFFFFFFFH); no File Meta Element may (PS3.10 7.1 Table 7.1-1
	// lists no sequences).
	errUndefinedLength = errors.New("part10: undefined length in file meta information")

	// errMetaTooLong means the File Meta Information is longer than
	// maxMetaLength, by its group length or by what was read.
	errMetaTooLong = errors.New("part10: file meta information too long")

	// errBadGroupLength means (0002,0000) is present but is not a 4-byte UL.
	errBadGroupLength = errors.New("part10: malformed file meta information group length")

	// ErrNoTransferSyntax means the File Meta Information has no Transfer
	// Syntax UID (0002,0010), without which the data set cannot be read.
	ErrNoTransferSyntax = errors.New("part10: file meta information has no transfer syntax UID")

	// errInvalidMeta means WriteHeader was given a Meta it cannot encode
	// conformantly (missing Type 1 UID, value too long, bad characters).
	errInvalidMeta = errors.New("part10: invalid file meta information")
)

// elementError reports a fault in one File Meta Element, with the byte offset
// of the element's tag in the file.
type elementError struct {
	Tag    Tag
	Offset int64
	Err    error
}

func (e *elementError) Error() string {
	return fmt.Sprintf("%v (element %v at offset %d)", e.Err, e.Tag, e.Offset)
}

// Unwrap returns the sentinel the fault is an instance of.
func (e *elementError) Unwrap() error { return e.Err }
