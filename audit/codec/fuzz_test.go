package codec

import (
	"bytes"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Fuzz targets. FuzzRLE is seeded from frames encoded by packBits below;
// FuzzJPEG and FuzzJPEGLS from the frames in testdata/seeds, which DCMTK
// encoded from this package's own invented pictures
// (`go test ./audit/codec -run TestWriteSeeds -update` rewrites them).
// Every target asserts that a decode either fails with one of the
// package's errors or returns a frame of exactly the declared size.

const seedDir = "testdata/seeds"

// packBits is a PackBits encoder (PS3.5 G.3.1) for the tests: literal
// runs and replicate runs of at most 128 bytes, never across the end of
// a row.
func packBits(src []byte, rowLen int) []byte {
	var out []byte
	for row := 0; row < len(src); row += rowLen {
		r := src[row:min(row+rowLen, len(src))]
		for i := 0; i < len(r); {
			j := i + 1
			for j < len(r) && j-i < 128 && r[j] == r[i] {
				j++
			}
			if j-i >= 2 {
				out = append(out, byte(int8(1-(j-i))), r[i])
				i = j
				continue
			}
			j = i + 1
			for j < len(r) && j-i < 128 && (j+1 >= len(r) || r[j] != r[j+1]) {
				j++
			}
			out = append(out, byte(j-i-1))
			out = append(out, r[i:j]...)
			i = j
		}
	}
	return out
}

// encodeRLE encodes native little-endian samples as one RLE frame
// (PS3.5 G.2, G.4, G.5).
func encodeRLE(native []byte, img Image) []byte {
	bytesPer := img.BitsAllocated / 8
	nseg := img.SamplesPerPixel * bytesPer
	stride := nseg
	npix := img.Rows * img.Columns
	var segs [][]byte
	for s := range nseg {
		sample, b := s/bytesPer, s%bytesPer
		plane := make([]byte, npix)
		for p := range npix {
			plane[p] = native[p*stride+sample*bytesPer+(bytesPer-1-b)]
		}
		seg := packBits(plane, img.Columns)
		if len(seg)%2 == 1 {
			seg = append(seg, 0x80) // a no-op byte keeps segments even (G.5)
		}
		segs = append(segs, seg)
	}
	out := make([]byte, rleHeaderBytes)
	binary.LittleEndian.PutUint32(out, uint32(nseg))
	for i, s := range segs {
		binary.LittleEndian.PutUint32(out[4+4*i:], uint32(len(out)))
		out = append(out, s...)
	}
	return out
}

// rleSeeds are images for FuzzRLE and the RLE round trip.
func rleSeeds() []struct {
	img    Image
	native []byte
} {
	var seeds []struct {
		img    Image
		native []byte
	}
	for _, img := range []Image{
		{Rows: 5, Columns: 7, SamplesPerPixel: 1, BitsAllocated: 8},
		{Rows: 6, Columns: 9, SamplesPerPixel: 1, BitsAllocated: 16},
		{Rows: 4, Columns: 300, SamplesPerPixel: 3, BitsAllocated: 8},
		{Rows: 3, Columns: 5, SamplesPerPixel: 3, BitsAllocated: 16},
	} {
		size, _ := img.frameBytes()
		native := make([]byte, size)
		for i := range native {
			switch {
			case i < size/3:
				native[i] = 7
			default:
				native[i] = byte(i * 37 >> 2)
			}
		}
		seeds = append(seeds, struct {
			img    Image
			native []byte
		}{img, native})
	}
	return seeds
}

func TestRLERoundTrip(t *testing.T) {
	for _, s := range rleSeeds() {
		got, err := Decode(RLELossless, s.img, encodeRLE(s.native, s.img))
		if err != nil {
			t.Fatalf("%+v: %v", s.img, err)
		}
		// PS3.5 Annex G: lossless.
		if !bytes.Equal(got, s.native) {
			t.Errorf("%+v: decoded samples differ from the encoded ones", s.img)
		}
	}
}

// checkDecode is the property every fuzz target asserts.
func checkDecode(t *testing.T, ts string, img Image, data []byte) {
	out, err := Decode(ts, img, data)
	if err != nil {
		if !errors.Is(err, ErrCorrupt) && !errors.Is(err, ErrUnsupported) {
			t.Fatalf("error wraps neither ErrCorrupt nor ErrUnsupported: %v", err)
		}
		return
	}
	size, _ := img.frameBytes()
	if len(out) != size {
		t.Fatalf("decoded %d bytes, the image needs %d", len(out), size)
	}
}

func FuzzRLE(f *testing.F) {
	for _, s := range rleSeeds() {
		f.Add(uint8(s.img.Rows), uint8(s.img.Columns), s.img.SamplesPerPixel == 3, s.img.BitsAllocated == 16, encodeRLE(s.native, s.img))
	}
	f.Fuzz(func(t *testing.T, rows, cols uint8, rgb, sixteen bool, data []byte) {
		img := Image{Rows: int(rows), Columns: int(cols), SamplesPerPixel: 1, BitsAllocated: 8}
		if rgb {
			img.SamplesPerPixel = 3
		}
		if sixteen {
			img.BitsAllocated = 16
		}
		checkDecode(t, RLELossless, img, data)
	})
}

// imageOf reads the frame header of a JPEG or JPEG-LS stream to make the
// Image a fuzzed stream claims, so that the fuzzer gets past the check of
// the header against the image; it caps the size at 256 x 256.
func imageOf(data []byte) (Image, string, bool) {
	for i := 0; i+10 < len(data); i++ {
		if data[i] != 0xFF {
			continue
		}
		var ts string
		switch data[i+1] {
		case markerSOF0:
			ts = JPEGBaseline
		case markerSOF1:
			ts = JPEGExtended
		case markerSOF3:
			ts = JPEGLossless
		case markerSOF55:
			ts = JPEGLSLossless
		default:
			continue
		}
		p := int(data[i+4])
		img := Image{
			Rows: int(binary.BigEndian.Uint16(data[i+5:])), Columns: int(binary.BigEndian.Uint16(data[i+7:])),
			SamplesPerPixel: int(data[i+9]), BitsAllocated: 8, Photometric: "YBR_FULL_422",
		}
		if p > 8 {
			img.BitsAllocated = 16
		}
		if img.Rows > 256 || img.Columns > 256 {
			return img, ts, false
		}
		return img, ts, true
	}
	return Image{}, "", false
}

func addSeeds(f *testing.F, ext string) {
	paths, err := filepath.Glob(filepath.Join(seedDir, "*"+ext))
	if err != nil || len(paths) == 0 {
		f.Fatalf("no %s seeds in %s: %v", ext, seedDir, err)
	}
	for _, p := range paths {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
}

func FuzzJPEG(f *testing.F) {
	addSeeds(f, ".jpg")
	f.Fuzz(func(t *testing.T, data []byte) {
		img, ts, ok := imageOf(data)
		if !ok || ts == JPEGLSLossless {
			img, ts = Image{Rows: 8, Columns: 8, SamplesPerPixel: 1, BitsAllocated: 8}, JPEGBaseline
		}
		checkDecode(t, ts, img, data)
	})
}

func FuzzJPEGLS(f *testing.F) {
	addSeeds(f, ".jls")
	f.Fuzz(func(t *testing.T, data []byte) {
		img, ts, ok := imageOf(data)
		if !ok || ts != JPEGLSLossless {
			img, ts = Image{Rows: 8, Columns: 8, SamplesPerPixel: 1, BitsAllocated: 8}, JPEGLSLossless
		}
		checkDecode(t, ts, img, data)
	})
}

// TestSeedsDecodeAndEveryTruncationFails decodes each committed seed, then
// every prefix of it and a copy with each byte flipped in turn: none may
// panic, a prefix cut before the last entropy-coded byte must fail, and
// errors must wrap the package's sentinels.
func TestSeedsDecodeAndEveryTruncationFails(t *testing.T) {
	paths, _ := filepath.Glob(filepath.Join(seedDir, "*"))
	if len(paths) == 0 {
		t.Fatalf("no seeds in %s", seedDir)
	}
	for _, p := range paths {
		t.Run(filepath.Base(p)+" decodes, and its damaged copies fail cleanly", func(t *testing.T) {
			data, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			img, ts, ok := imageOf(data)
			if !ok {
				t.Fatalf("no frame header")
			}
			if strings.HasSuffix(p, ".jls") && strings.Contains(p, "near") {
				ts = JPEGLSNearLossless
			}
			if _, err := Decode(ts, img, data); err != nil {
				t.Fatalf("seed does not decode: %v", err)
			}
			for n := range len(data) - 2 { // without its EOI marker, a stream may still be whole
				checkDecode(t, ts, img, data[:n])
				if _, err := Decode(ts, img, data[:n]); err == nil && n < len(data)-16 {
					t.Errorf("cut to %d of %d bytes, the frame still decodes", n, len(data))
				}
			}
			bad := bytes.Clone(data)
			for i := range bad {
				bad[i] ^= 0xFF
				checkDecode(t, ts, img, bad)
				bad[i] ^= 0xFF
			}
		})
	}
}

func readSeed(name string) ([]byte, error) { return os.ReadFile(filepath.Join(seedDir, name)) }
