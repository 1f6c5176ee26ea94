package codec

import "encoding/binary"

// RLE header (PS3.5 G.5): the number of segments and 15 offsets, each a
// 32-bit little-endian value.
const (
	rleHeaderBytes = 64
	rleMaxSegments = 15
)

// decodeRLE decodes one RLE Lossless frame (PS3.5 Annex G) into out.
// Each byte of each sample is a segment of its own, most significant byte
// first, sample by sample (G.2); a segment is PackBits coded (G.3.1).
func decodeRLE(out []byte, img Image, data []byte) error {
	if len(data) < rleHeaderBytes {
		return corruptf("RLE frame of %d bytes is shorter than its %d-byte header", len(data), rleHeaderBytes)
	}
	nseg := int(binary.LittleEndian.Uint32(data))
	bytesPer := img.BitsAllocated / 8
	want := img.SamplesPerPixel * bytesPer
	if nseg != want {
		return corruptf("RLE header declares %d segments; %d samples of %d bytes need %d", nseg, img.SamplesPerPixel, bytesPer, want)
	}
	var offsets [rleMaxSegments + 1]int
	for i := range nseg {
		offsets[i] = int(binary.LittleEndian.Uint32(data[4+4*i:]))
		if offsets[i] < rleHeaderBytes || offsets[i] > len(data) || (i > 0 && offsets[i] < offsets[i-1]) {
			return corruptf("RLE segment %d offset %d outside the %d-byte frame or before the previous segment", i+1, offsets[i], len(data))
		}
	}
	offsets[nseg] = len(data)
	npix := img.Rows * img.Columns
	for s := range nseg {
		sample, byteIndex := s/bytesPer, s%bytesPer // byteIndex 0 is the most significant
		pos := sample*bytesPer + (bytesPer - 1 - byteIndex)
		if err := unpackBits(out, pos, want, npix, data[offsets[s]:offsets[s+1]]); err != nil {
			return corruptf("RLE segment %d: %v", s+1, err)
		}
	}
	return nil
}

// unpackBits decodes a PackBits segment (PS3.5 G.3.1) into n bytes of
// out, written at pos, pos+stride, ... Bytes after the n-th are padding.
func unpackBits(out []byte, pos, stride, n int, seg []byte) error {
	i, done := 0, 0
	for done < n {
		if i >= len(seg) {
			return errShort(done, n)
		}
		c := int(int8(seg[i]))
		i++
		switch {
		case c >= 0: // copy the next c+1 bytes literally
			k := c + 1
			if i+k > len(seg) {
				return errShort(done+len(seg)-i, n)
			}
			if done+k > n {
				return errLong(n)
			}
			for _, b := range seg[i : i+k] {
				out[pos] = b
				pos += stride
			}
			i += k
			done += k
		case c != -128: // repeat the next byte -c+1 times
			if i >= len(seg) {
				return errShort(done, n)
			}
			k := 1 - c
			if done+k > n {
				return errLong(n)
			}
			b := seg[i]
			i++
			for range k {
				out[pos] = b
				pos += stride
			}
			done += k
		}
	}
	return nil
}

func errShort(got, n int) error { return corruptf("decodes to %d of its %d bytes", got, n) }
func errLong(n int) error       { return corruptf("decodes past its %d bytes", n) }
