package codec

import (
	"bytes"
	"encoding/binary"
	"errors"
	"strings"
	"testing"
)

// item encodes one item of encapsulated pixel data (PS3.5 A.4).
func item(data []byte) []byte {
	b := []byte{0xFE, 0xFF, 0x00, 0xE0, 0, 0, 0, 0}
	binary.LittleEndian.PutUint32(b[4:], uint32(len(data)))
	return append(b, data...)
}

var seqDelim = []byte{0xFE, 0xFF, 0xDD, 0xE0, 0, 0, 0, 0}

func value(bot []uint32, frags ...[]byte) []byte {
	var t []byte
	for _, o := range bot {
		t = binary.LittleEndian.AppendUint32(t, o)
	}
	v := item(t)
	for _, f := range frags {
		v = append(v, item(f)...)
	}
	return append(v, seqDelim...)
}

func TestFramesSplitsEncapsulatedPixelData(t *testing.T) {
	a, b, c := []byte{0xFF, 0xD8, 1, 2}, []byte{3, 4}, []byte{0xFF, 0xD8, 5, 6, 7, 8}
	tests := []struct {
		name  string
		value []byte
		n     int
		ts    string
		want  [][]byte
		err   string
	}{
		{"one frame is every fragment (PS3.5 A.4)", value(nil, a, b), 1, JPEGLossless, [][]byte{append(bytes.Clone(a), b...)}, ""},
		{"n fragments for n frames are one each", value(nil, a, b), 2, RLELossless, [][]byte{a, b}, ""},
		// PS3.5 A.4: offsets count from the first byte of the first fragment's item tag.
		{"the Basic Offset Table groups fragments into frames", value([]uint32{0, 8 + 4 + 8 + 2}, a, b, c), 2, JPEGLossless, [][]byte{append(bytes.Clone(a), b...), c}, ""},
		{"with an empty table, SOI markers start the frames", value(nil, a, b, c), 2, JPEGBaseline, [][]byte{append(bytes.Clone(a), b...), c}, ""},
		{"RLE with an empty table and more fragments than frames is refused", value(nil, a, b, c), 2, RLELossless, nil, "empty Basic Offset Table"},
		{"a table entry that misses a fragment is refused", value([]uint32{0, 5}, a, b, c), 2, JPEGLossless, nil, "not the start of a fragment"},
		{"a table of the wrong size is refused", value([]uint32{0}, a, c), 2, JPEGLossless, nil, "Basic Offset Table of 4 bytes"},
		{"more frames than fragments are refused", value(nil, a), 2, JPEGLossless, nil, "2 frames in 1 fragments"},
		{"no fragment is refused", value(nil), 1, JPEGLossless, nil, "no fragment"},
		{"an item longer than the value is refused", append(item(nil), 0xFE, 0xFF, 0x00, 0xE0, 0xFF, 0, 0, 0), 1, JPEGLossless, nil, "declares 255 bytes"},
		{"a tag that is not an item is refused", append(item(nil), 0xE0, 0x7F, 0x10, 0x00, 0, 0, 0, 0), 1, JPEGLossless, nil, "where an item was expected"},
		{"a cut item header is refused", append(item(nil), 0xFE, 0xFF), 1, JPEGLossless, nil, "an item header needs 8"},
		{"zero frames are refused", value(nil, a), 0, JPEGLossless, nil, "0 frames"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := Frames(tc.value, tc.n, tc.ts)
			if tc.err != "" {
				if err == nil || !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want ErrCorrupt with %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(tc.want) {
				t.Fatalf("%d frames, want %d", len(got), len(tc.want))
			}
			for i := range got {
				if !bytes.Equal(got[i], tc.want[i]) {
					t.Errorf("frame %d = % x, want % x", i+1, got[i], tc.want[i])
				}
			}
		})
	}
}

func TestDecodeRefusesWhatItCannotOrMustNotDecode(t *testing.T) {
	seed := rleSeeds()[1]
	rle := encodeRLE(seed.native, seed.img)
	tests := []struct {
		name string
		ts   string
		img  Image
		data []byte
		want error
		msg  string
	}{
		{"JPEG 2000 is named, not decoded", JPEG2000Lossless, seed.img, rle, ErrUnsupported, "JPEG 2000 (Lossless Only) (1.2.840.10008.1.2.4.90)"},
		{"a frame beyond MaxFrameBytes is refused before any allocation", RLELossless, Image{Rows: 65535, Columns: 65535, SamplesPerPixel: 3, BitsAllocated: 16}, rle, ErrUnsupported, "this decoder allows"},
		{"Bits Allocated 32 is refused", RLELossless, Image{Rows: 4, Columns: 4, SamplesPerPixel: 1, BitsAllocated: 32}, rle, ErrUnsupported, "Bits Allocated 32"},
		{"zero rows are refused", RLELossless, Image{Rows: 0, Columns: 4, SamplesPerPixel: 1, BitsAllocated: 8}, rle, ErrCorrupt, "Rows 0"},
		{"RLE with the wrong number of segments is refused (PS3.5 G.5)", RLELossless, Image{Rows: 6, Columns: 9, SamplesPerPixel: 1, BitsAllocated: 8}, rle, ErrCorrupt, "declares 2 segments"},
		{"RLE cut short is refused", RLELossless, seed.img, rle[:len(rle)-6], ErrCorrupt, "decodes to"},
		{"RLE shorter than its header is refused", RLELossless, seed.img, rle[:10], ErrCorrupt, "header"},
		{"a JPEG frame of another size than the header says is refused", JPEGLossless, Image{Rows: 12, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 16}, mustSeed(t, "lossless-sv1-gray12.jpg"), ErrCorrupt, "JPEG frame of 13 x 11"},
		{"a JPEG-LS frame with other samples per pixel is refused", JPEGLSLossless, Image{Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 8}, mustSeed(t, "ls-lossless-rgb8-line.jls"), ErrCorrupt, "3 components"},
		{"a JPEG stream without SOI is refused", JPEGBaseline, Image{Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 8}, []byte{1, 2, 3}, ErrCorrupt, "SOI"},
		{"a 12-bit JPEG in 8 bits allocated is refused", JPEGExtended, Image{Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 8}, mustSeed(t, "extended-gray12.jpg"), ErrCorrupt, "precision 12 exceeds"},
		{"progressive JPEG is named unsupported", JPEGExtended, Image{Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 8}, []byte{0xFF, 0xD8, 0xFF, 0xC2, 0, 2}, ErrUnsupported, "0xC2"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Decode(tc.ts, tc.img, tc.data)
			if !errors.Is(err, tc.want) || !strings.Contains(err.Error(), tc.msg) {
				t.Fatalf("error %v, want %v with %q", err, tc.want, tc.msg)
			}
		})
	}
}

func mustSeed(t *testing.T, name string) []byte {
	t.Helper()
	b, err := readSeed(name)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestCanDecodeAndName(t *testing.T) {
	// PS3.6 Table A-1 names and UIDs.
	for ts, want := range map[string]bool{
		RLELossless: true, JPEGBaseline: true, JPEGExtended: true, JPEGLossless: true, JPEGLosslessSV1: true,
		JPEGLSLossless: true, JPEGLSNearLossless: true, JPEG2000Lossless: false, JPEG2000: false,
		"1.2.840.10008.1.2.1": false,
	} {
		if got := CanDecode(ts); got != want {
			t.Errorf("CanDecode(%s) = %v, want %v", ts, got, want)
		}
	}
	if got, want := Name(JPEG2000), "JPEG 2000 (1.2.840.10008.1.2.4.91)"; got != want {
		t.Errorf("Name = %q, want %q", got, want)
	}
}
