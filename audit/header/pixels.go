package header

import (
	"fmt"
	"io"
	"math"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/codec"
	"dwiaudit/audit/dwi"
)

// pixelFormat is how native pixel values are stored (PS3.3 C.7.6.3,
// PS3.5 8.1.1).
type pixelFormat struct {
	bytes      int  // per value: 1, 2 or 4 integer; 4 or 8 float
	float      bool // Float Pixel Data (OF) or Double Float Pixel Data (OD)
	bitsStored int
	signed     bool // Pixel Representation 1: two's complement
	frameBytes int64
	offset     int64 // of the first frame's value

	// encapsulated is set for compressed pixel data that package
	// audit/codec decodes; image is what it is decoded against.
	encapsulated bool
	image        codec.Image
}

// minFragmentBytes is the least an encapsulated frame takes: one item
// header (PS3.5 A.4: tag and length, 8 bytes). It bounds Number of Frames
// by the bytes the file really holds.
const minFragmentBytes = 8

// checkPixelData checks the pixel data against the header: present,
// whole, and exactly as long as Rows x Columns x frames x Bits Allocated
// / 8 (PS3.5 8.1.1; one pad byte when that is odd, PS3.5 7.1.1). It
// returns the format to decode with, nil when there is nothing to decode.
func (x *extraction) checkPixelData(rows, cols, n int) (*pixelFormat, error) {
	l := x.layout
	if l.Tag == 0 {
		return nil, nil
	}
	if l.Truncated {
		return nil, fmt.Errorf("%w: pixel data element declares %d bytes, the file ends %d bytes into it", ErrPixelData, l.Length, x.size-l.ValueOffset)
	}
	if !x.native || l.Length < 0 {
		if x.native {
			// PS3.5 A.4: only encapsulated transfer syntaxes have pixel
			// data of undefined length.
			return nil, fmt.Errorf("%w: pixel data of undefined length in native transfer syntax %s", ErrPixelData, x.ts)
		}
		if span := l.End - l.ValueOffset; int64(n) > span/minFragmentBytes {
			return nil, fmt.Errorf("%w: %d frames in %d bytes of encapsulated pixel data", ErrPixelData, n, span)
		}
		if !x.decodes() {
			return nil, nil // reported by Frame.Encapsulated, not decoded
		}
	}
	top, bo := x.top, x.bo
	if spp, ok := top.integer(tag.SamplesPerPixel, ValueUS, bo); ok && spp != 1 {
		return nil, fmt.Errorf("%w: %d samples per pixel; MR images have 1", ErrPixelData, spp)
	}
	// Rows and Columns are US (PS3.3 C.7.6.3): more than 65535 is a
	// broken header, and would overflow the length arithmetic below.
	if rows <= 0 || cols <= 0 || rows > math.MaxUint16 || cols > math.MaxUint16 {
		return nil, fmt.Errorf("%w: Rows %d and Columns %d cannot hold pixel data", ErrPixelData, rows, cols)
	}
	pf := &pixelFormat{offset: l.ValueOffset}
	allocated, _ := top.integer(tag.BitsAllocated, ValueUS, bo)
	switch l.Tag {
	case TagFloatPixelData:
		pf.bytes, pf.float = 4, true
	case TagDoubleFloatPixelData:
		pf.bytes, pf.float = 8, true
	default:
		switch allocated {
		case 8, 16, 32:
			pf.bytes = allocated / 8
		default:
			return nil, fmt.Errorf("%w: Bits Allocated %d (the audit reads 8, 16 or 32)", ErrPixelData, allocated)
		}
		pf.bitsStored = allocated
		if v, ok := top.integer(tag.BitsStored, ValueUS, bo); ok && v >= 1 && v <= allocated {
			pf.bitsStored = v
		}
		rep, _ := top.integer(tag.PixelRepresentation, ValueUS, bo)
		pf.signed = rep == 1
	}
	pf.frameBytes = int64(rows) * int64(cols) * int64(pf.bytes)
	if l.Length < 0 {
		if pf.float || pf.bytes > 2 {
			return nil, fmt.Errorf("%w: Bits Allocated %d in compressed pixel data (the codecs decode 8 or 16)", ErrPixelData, allocated)
		}
		pf.encapsulated = true
		pf.image = codec.Image{Rows: rows, Columns: cols, SamplesPerPixel: 1, BitsAllocated: allocated,
			BitsStored: pf.bitsStored, Signed: pf.signed, Photometric: top.str(tag.PhotometricInterpretation)}
		return pf, nil
	}
	want := pf.frameBytes * int64(n)
	if l.Length != want && !(want%2 == 1 && l.Length == want+1) {
		return nil, fmt.Errorf("%w: pixel data holds %d bytes; %d rows x %d columns x %d frames x %d bytes need %d",
			ErrPixelData, l.Length, rows, cols, n, pf.bytes, want)
	}
	return pf, nil
}

// readChunk is how many pixel bytes are read at a time: small beside a
// frame's float32 pixels, large enough that a frame takes a few reads.
const readChunk = 64 << 10

// decodes reports whether the audit decodes this instance's pixel data:
// native, or compressed in a syntax package audit/codec decodes, with
// one sample per pixel (MR images; PS3.3 C.8.3.1.1.4).
func (x *extraction) decodes() bool { return x.undecoded() == "" }

// undecoded says why the pixel data is not decoded, naming the transfer
// syntax; "" when it is (or when there is none).
func (x *extraction) undecoded() string {
	l := x.layout
	switch {
	case l.Tag == 0 || (x.native && l.Length >= 0):
		return ""
	case x.native:
		return "" // undefined length in a native syntax: checkPixelData reports it
	case l.Length >= 0:
		// PS3.5 A.4: encapsulated pixel data has undefined length.
		return fmt.Sprintf("pixel data of defined length in %s, a compressed transfer syntax: not decoded", codec.Name(x.ts))
	case !codec.CanDecode(x.ts):
		return fmt.Sprintf("compressed pixel data in %s: the audit cannot decode this transfer syntax", codec.Name(x.ts))
	}
	if spp, ok := x.top.integer(tag.SamplesPerPixel, ValueUS, x.bo); ok && spp != 1 {
		return fmt.Sprintf("compressed pixel data in %s with %d samples per pixel: the audit decodes single-sample (MR) images", codec.Name(x.ts), spp)
	}
	return ""
}

// loadPixels decodes every frame into one slab of float32, rescaled.
func (x *extraction) loadPixels(frames []dwi.Frame, pf *pixelFormat) error {
	if pf.encapsulated {
		return x.loadEncapsulated(frames, pf)
	}
	npix := int(pf.frameBytes) / pf.bytes
	slab := make([]float32, npix*len(frames))
	chunk := min(int(pf.frameBytes), readChunk/pf.bytes*pf.bytes)
	buf := make([]byte, chunk)
	for i := range frames {
		f := &frames[i]
		f.Pixels = slab[i*npix : (i+1)*npix : (i+1)*npix]
		start := pf.offset + int64(i)*pf.frameBytes
		for done := 0; done < npix; {
			n := min(chunk, (npix-done)*pf.bytes)
			if _, err := x.ra.ReadAt(buf[:n], start+int64(done*pf.bytes)); err != nil {
				if err == io.EOF {
					return fmt.Errorf("%w: pixel data of frame %d cut short", ErrPixelData, i+1)
				}
				return err
			}
			x.decode(f.Pixels[done:done+n/pf.bytes], buf[:n], pf, f.RescaleSlope, f.RescaleIntercept)
			done += n / pf.bytes
		}
	}
	return nil
}

// decode turns stored values into rescaled values: slope*stored +
// intercept (PS3.3 C.11.1.1.2). Bits above Bits Stored are ignored and a
// signed value is sign-extended from its stored width (PS3.5 8.1.1, with
// High Bit = Bits Stored - 1 as the Enhanced MR IOD requires; PS3.3
// C.8.13.1).
func (x *extraction) decode(dst []float32, src []byte, pf *pixelFormat, slope, intercept float64) {
	bo := x.bo
	identity := slope == 1 && intercept == 0
	out := func(i int, v float64) {
		if !identity {
			v = slope*v + intercept
		}
		dst[i] = float32(v)
	}
	if pf.float {
		for i := range dst {
			if pf.bytes == 4 {
				out(i, float64(math.Float32frombits(bo.Uint32(src[4*i:]))))
			} else {
				out(i, math.Float64frombits(bo.Uint64(src[8*i:])))
			}
		}
		return
	}
	bits := uint(pf.bitsStored)
	mask := uint64(1)<<bits - 1
	sign := uint64(1) << (bits - 1)
	value := func(u uint64) float64 {
		u &= mask
		if pf.signed && u&sign != 0 {
			return float64(int64(u | ^mask))
		}
		return float64(u)
	}
	switch pf.bytes {
	case 1:
		for i := range dst {
			out(i, value(uint64(src[i])))
		}
	case 2:
		if !pf.signed && bits == 16 && identity {
			// The common case, kept free of the closures: 16-bit
			// unsigned, no rescale.
			for i := range dst {
				dst[i] = float32(bo.Uint16(src[2*i:]))
			}
			return
		}
		for i := range dst {
			out(i, value(uint64(bo.Uint16(src[2*i:]))))
		}
	case 4:
		for i := range dst {
			out(i, value(uint64(bo.Uint32(src[4*i:]))))
		}
	}
}

// loadEncapsulated decodes every compressed frame (PS3.5 A.4: the items
// of the Pixel Data value, split into frames by codec.Frames) into one
// slab of float32, rescaled as native frames are.
func (x *extraction) loadEncapsulated(frames []dwi.Frame, pf *pixelFormat) error {
	l := x.layout
	value := make([]byte, l.End-l.ValueOffset) // within the file: FindPixelData checked End against its size
	if _, err := x.ra.ReadAt(value, l.ValueOffset); err != nil && err != io.EOF {
		return err
	}
	coded, err := codec.Frames(value, len(frames), x.ts)
	if err != nil {
		return fmt.Errorf("%w: %w", ErrPixelData, err)
	}
	npix := int(pf.frameBytes) / pf.bytes
	slab := make([]float32, npix*len(frames))
	for i := range frames {
		f := &frames[i]
		native, err := codec.Decode(x.ts, pf.image, coded[i])
		if err != nil {
			return fmt.Errorf("%w: frame %d: %w", ErrPixelData, i+1, err)
		}
		f.Pixels = slab[i*npix : (i+1)*npix : (i+1)*npix]
		x.decode(f.Pixels, native, pf, f.RescaleSlope, f.RescaleIntercept)
	}
	return nil
}
