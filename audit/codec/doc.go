// Package codec decodes compressed (encapsulated) DICOM pixel data into
// native samples, in pure Go.
//
// An encapsulated Pixel Data value is a sequence of items: a Basic Offset
// Table, then fragments, then a sequence delimiter (PS3.5 A.4). Frames
// splits such a value into one byte string per frame; Decode turns one
// frame's compressed bytes into native little-endian samples, pixel by
// pixel (colour-by-pixel, Planar Configuration 0), exactly
// Rows x Columns x Samples per Pixel x Bits Allocated / 8 bytes long.
//
// The transfer syntaxes decoded, each in its own file:
//
//   - rle.go: RLE Lossless, 1.2.840.10008.1.2.5 (PS3.5 Annex G).
//   - jpeg.go, huffman.go: the JPEG frame and scan syntax (ITU T.81
//     Annex B) and its Huffman entropy decoding (T.81 Annex F.2.2), shared
//     by the lossless and the DCT processes.
//   - lossless.go: JPEG Lossless, Process 14, 1.2.840.10008.1.2.4.57 and
//     its selection-value-1 form 1.2.840.10008.1.2.4.70 (T.81 Annex H),
//     2 to 16 bits, predictors 1 to 7, point transform.
//   - dct.go, idct.go, colour.go: JPEG Baseline 1.2.840.10008.1.2.4.50
//     (8-bit) and Extended 1.2.840.10008.1.2.4.51 (12-bit), Huffman coded
//     sequential DCT (T.81 Annex F). The inverse DCT, the chroma
//     upsampling and the YCbCr to RGB transform follow the integer
//     arithmetic of the Independent JPEG Group's library, which DCMTK
//     uses, so that the lossy output equals DCMTK's sample for sample.
//   - jpegls.go: JPEG-LS lossless 1.2.840.10008.1.2.4.80 and
//     near-lossless 1.2.840.10008.1.2.4.81 (ITU T.87), with the default
//     or coded thresholds, 2 to 16 bits, every interleave mode.
//
// JPEG 2000 (1.2.840.10008.1.2.4.90/.91) is not decoded: CanDecode says
// so, and callers report the syntax by name.
//
// Hostile input gives an error, never a panic: every length is checked
// against what holds it, and the only large allocation is the output
// frame, whose size the caller's header fixes (and MaxFrameBytes caps)
// and which the coded frame header must agree with.
package codec
