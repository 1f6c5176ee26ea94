package codec

import "fmt"

// Transfer syntax UIDs of encapsulated pixel data (PS3.6 Table A-1).
const (
	RLELossless        = "1.2.840.10008.1.2.5"
	JPEGBaseline       = "1.2.840.10008.1.2.4.50"
	JPEGExtended       = "1.2.840.10008.1.2.4.51"
	JPEGLossless       = "1.2.840.10008.1.2.4.57"
	JPEGLosslessSV1    = "1.2.840.10008.1.2.4.70"
	JPEGLSLossless     = "1.2.840.10008.1.2.4.80"
	JPEGLSNearLossless = "1.2.840.10008.1.2.4.81"
	JPEG2000Lossless   = "1.2.840.10008.1.2.4.90"
	JPEG2000           = "1.2.840.10008.1.2.4.91"
)

// syntaxNames are the PS3.6 Table A-1 names of the encapsulated syntaxes
// that messages mention, decodable or not.
var syntaxNames = map[string]string{
	RLELossless:               "RLE Lossless",
	JPEGBaseline:              "JPEG Baseline (Process 1)",
	JPEGExtended:              "JPEG Extended (Process 2 & 4)",
	JPEGLossless:              "JPEG Lossless, Non-Hierarchical (Process 14)",
	JPEGLosslessSV1:           "JPEG Lossless, Non-Hierarchical, First-Order Prediction (Process 14, Selection Value 1)",
	JPEGLSLossless:            "JPEG-LS Lossless",
	JPEGLSNearLossless:        "JPEG-LS Lossy (Near-Lossless)",
	JPEG2000Lossless:          "JPEG 2000 (Lossless Only)",
	JPEG2000:                  "JPEG 2000",
	"1.2.840.10008.1.2.4.92":  "JPEG 2000 Part 2 Multi-component (Lossless Only)",
	"1.2.840.10008.1.2.4.93":  "JPEG 2000 Part 2 Multi-component",
	"1.2.840.10008.1.2.4.100": "MPEG2 Main Profile / Main Level",
	"1.2.840.10008.1.2.4.102": "MPEG-4 AVC/H.264 High Profile / Level 4.1",
	"1.2.840.10008.1.2.4.201": "High-Throughput JPEG 2000 (Lossless Only)",
	"1.2.840.10008.1.2.4.203": "High-Throughput JPEG 2000",
}

// Name is the PS3.6 name of a transfer syntax followed by its UID, or the
// UID alone when the syntax is not one of the encapsulated ones above.
func Name(ts string) string {
	if n, ok := syntaxNames[ts]; ok {
		return n + " (" + ts + ")"
	}
	return ts
}

// CanDecode reports whether Decode decodes pixel data of transfer
// syntax ts.
func CanDecode(ts string) bool {
	switch ts {
	case RLELossless, JPEGBaseline, JPEGExtended, JPEGLossless, JPEGLosslessSV1,
		JPEGLSLossless, JPEGLSNearLossless:
		return true
	}
	return false
}

// Lossless reports whether ts is a syntax whose decoded samples equal the
// encoder's input (PS3.5 8.2: RLE, JPEG Process 14, JPEG-LS lossless).
func Lossless(ts string) bool {
	switch ts {
	case RLELossless, JPEGLossless, JPEGLosslessSV1, JPEGLSLossless, JPEG2000Lossless:
		return true
	}
	return false
}

// Image is what the DICOM header says of a frame (PS3.3 C.7.6.3). Decode
// checks the compressed stream against it.
type Image struct {
	Rows, Columns   int
	SamplesPerPixel int // 1 or 3
	BitsAllocated   int // 8 or 16
	BitsStored      int // 1..BitsAllocated; 0 means BitsAllocated
	// Signed is Pixel Representation 1. The codecs code the stored bit
	// pattern, and Decode returns it as coded: the caller sign-extends
	// from BitsStored (PS3.5 8.1.1), as for native data.
	Signed bool
	// Photometric is Photometric Interpretation (0028,0004). Lossy JPEG
	// with YBR_FULL or YBR_FULL_422 is returned as RGB (see DecodeJPEG).
	Photometric string
}

// MaxFrameBytes caps one decoded frame: 64 MiB is far beyond any MR
// frame (1024 x 1024 x 3 samples x 2 bytes is 6 MiB) and keeps a hostile
// header from making the decoder allocate gigabytes (the JPEG decoders
// also hold one 32-bit working sample per sample: at most 4 x this).
const MaxFrameBytes = 64 << 20

// frameBytes checks img and returns the decoded size of one frame.
func (img Image) frameBytes() (int, error) {
	if img.Rows <= 0 || img.Columns <= 0 || img.Rows > 65535 || img.Columns > 65535 {
		return 0, corruptf("Rows %d and Columns %d", img.Rows, img.Columns)
	}
	if img.SamplesPerPixel != 1 && img.SamplesPerPixel != 3 {
		return 0, unsupportedf("%d samples per pixel (1 or 3 are decoded)", img.SamplesPerPixel)
	}
	if img.BitsAllocated != 8 && img.BitsAllocated != 16 {
		return 0, unsupportedf("Bits Allocated %d (8 or 16 are decoded)", img.BitsAllocated)
	}
	if img.BitsStored < 0 || img.BitsStored > img.BitsAllocated {
		return 0, corruptf("Bits Stored %d with Bits Allocated %d", img.BitsStored, img.BitsAllocated)
	}
	n := int64(img.Rows) * int64(img.Columns) * int64(img.SamplesPerPixel) * int64(img.BitsAllocated/8)
	if n > MaxFrameBytes {
		return 0, unsupportedf("a frame of %d bytes is more than the %d this decoder allows", n, MaxFrameBytes)
	}
	return int(n), nil
}

func (img Image) bitsStored() int {
	if img.BitsStored == 0 {
		return img.BitsAllocated
	}
	return img.BitsStored
}

// Decode decodes one frame of transfer syntax ts into native
// little-endian samples, colour-by-pixel. frame is the frame's
// compressed bytes as Frames returns them.
func Decode(ts string, img Image, frame []byte) ([]byte, error) {
	size, err := img.frameBytes()
	if err != nil {
		return nil, err
	}
	out := make([]byte, size)
	switch ts {
	case RLELossless:
		err = decodeRLE(out, img, frame)
	case JPEGBaseline, JPEGExtended, JPEGLossless, JPEGLosslessSV1:
		err = decodeJPEG(out, img, frame)
	case JPEGLSLossless, JPEGLSNearLossless:
		err = decodeJPEGLS(out, img, frame)
	default:
		return nil, unsupportedf("transfer syntax %s", Name(ts))
	}
	if err != nil {
		return nil, fmt.Errorf("decoding %s: %w", Name(ts), err)
	}
	return out, nil
}
