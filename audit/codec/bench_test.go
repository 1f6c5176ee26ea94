package codec

import (
	"path/filepath"
	"testing"

	"dwiaudit/audit/phantom"
)

// Benchmarks decode one 256 x 256 phantom MR frame (16 bits allocated,
// 12 stored) per codec, compressed by DCMTK (RLE by this package's test
// encoder, so that one benchmark needs no outside tool).

func benchFrame(b *testing.B, tool string, args ...string) (dicomFile, []byte) {
	b.Helper()
	dir := b.TempDir()
	st, err := phantom.Write(filepath.Join(dir, "p"), phantom.Options{Matrix: 256, Slices: 1, Seed: 5})
	if err != nil {
		b.Fatal(err)
	}
	src := st.Files[0]
	if tool == "" {
		f := readDICOM(b, src)
		f.ts = RLELossless
		return f, encodeRLE(f.pixel, f.img)
	}
	enc := filepath.Join(dir, "c.dcm")
	runTool(b, tool, append(args, src, enc)...)
	f := readDICOM(b, enc)
	frames, err := Frames(f.pixel, 1, f.ts)
	if err != nil {
		b.Fatal(err)
	}
	return f, frames[0]
}

func benchDecode(b *testing.B, tool string, args ...string) {
	f, frame := benchFrame(b, tool, args...)
	size, _ := f.img.frameBytes()
	b.SetBytes(int64(size))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Decode(f.ts, f.img, frame); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeRLE(b *testing.B)             { benchDecode(b, "") }
func BenchmarkDecodeJPEGLosslessSV1(b *testing.B) { benchDecode(b, "dcmcjpeg", "+e1") }
func BenchmarkDecodeJPEGLosslessSV7(b *testing.B) { benchDecode(b, "dcmcjpeg", "+el", "+sv", "7") }
func BenchmarkDecodeJPEGBaseline(b *testing.B)    { benchDecode(b, "dcmcjpeg", "+eb") }
func BenchmarkDecodeJPEGExtended(b *testing.B)    { benchDecode(b, "dcmcjpeg", "+ee") }
func BenchmarkDecodeJPEGLS(b *testing.B)          { benchDecode(b, "dcmcjpls", "+el") }
func BenchmarkDecodeJPEGLSNear(b *testing.B)      { benchDecode(b, "dcmcjpls", "+en", "+md", "2") }
