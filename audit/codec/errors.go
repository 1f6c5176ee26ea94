package codec

import (
	"errors"
	"fmt"
)

// Sentinel errors of package codec. Every error Frames and Decode return
// wraps one of them.
var (
	// ErrUnsupported: the transfer syntax, or a coding option inside the
	// stream (arithmetic coding, progressive DCT, a JPEG-LS mapping
	// table), is one this package does not decode.
	ErrUnsupported = errors.New("codec: not decodable")

	// ErrCorrupt: the compressed data breaks its own syntax or disagrees
	// with the image the DICOM header describes.
	ErrCorrupt = errors.New("codec: corrupt compressed pixel data")
)

func corruptf(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrCorrupt}, args...)...)
}

func unsupportedf(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrUnsupported}, args...)...)
}
