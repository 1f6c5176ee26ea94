package codec

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/synth"
	"dwiaudit/scp/part10"
	"dwiaudit/scp/scptest"
)

// dicomFile is what the tests read back from a Part 10 file: the image
// attributes, the transfer syntax and the pixel data value.
type dicomFile struct {
	ts       string
	img      Image
	frames   int
	planar   int
	pixel    []byte // the Pixel Data value: native samples, or the encapsulated items
	encapsed bool
}

// readDICOM reads a Part 10 file in Explicit VR Little Endian (all that
// DCMTK's codecs write): the file meta with part10, then the Image Pixel
// module (PS3.3 C.7.6.3) and the pixel data by a walk of the top-level
// elements. (Package header's reader imports this package, so its tests
// cannot use it.)
func readDICOM(t testing.TB, path string) dicomFile {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(raw))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	f := dicomFile{ts: meta.TransferSyntaxUID, frames: 1}
	us := map[uint32]int{}
	strs := map[uint32]string{}
	start, end, undefined := walkTop(t, raw[off:], us, strs)
	if start < 0 {
		t.Fatalf("%s: no pixel data", path)
	}
	f.img = Image{
		Rows: us[0x00280010], Columns: us[0x00280011], SamplesPerPixel: us[0x00280002],
		BitsAllocated: us[0x00280100], BitsStored: us[0x00280101], Signed: us[0x00280103] == 1,
		Photometric: strs[0x00280004],
	}
	f.planar = us[0x00280006]
	if s, ok := strs[0x00280008]; ok {
		if f.frames, err = strconv.Atoi(s); err != nil {
			t.Fatalf("%s: Number of Frames %q", path, s)
		}
	}
	f.encapsed = undefined
	f.pixel = raw[off+int64(start) : off+int64(end)]
	return f
}

// longVR are the VRs with a 4-byte length in explicit VR (PS3.5 7.1.2).
var longVR = map[string]bool{"OB": true, "OD": true, "OF": true, "OL": true, "OV": true, "OW": true,
	"SQ": true, "SV": true, "UC": true, "UN": true, "UR": true, "UT": true, "UV": true}

// walkTop records the US and string values of the top-level elements of
// group 0028 in an Explicit VR Little Endian data set (DCMTK's output,
// trusted by these tests), and returns where the Pixel Data value lies
// (start -1 when there is none).
func walkTop(t testing.TB, b []byte, us map[uint32]int, strs map[uint32]string) (start, end int, undefined bool) {
	pos := 0
	for pos+8 <= len(b) {
		tg := uint32(binary.LittleEndian.Uint16(b[pos:]))<<16 | uint32(binary.LittleEndian.Uint16(b[pos+2:]))
		vr := string(b[pos+4 : pos+6])
		var n, hdr int
		if longVR[vr] {
			n, hdr = int(binary.LittleEndian.Uint32(b[pos+8:])), 12
		} else {
			n, hdr = int(binary.LittleEndian.Uint16(b[pos+6:])), 8
		}
		if longVR[vr] && binary.LittleEndian.Uint32(b[pos+8:]) == 0xFFFFFFFF {
			next := skipUndefined(t, b, pos+hdr)
			if tg == 0x7FE00010 {
				return pos + hdr, next, true
			}
			pos = next
			continue
		}
		if pos+hdr+n > len(b) {
			t.Fatalf("element (%04X,%04X) runs past the file", tg>>16, tg&0xFFFF)
		}
		v := b[pos+hdr : pos+hdr+n]
		switch {
		case tg == 0x7FE00010:
			return pos + hdr, pos + hdr + n, false
		case tg>>16 == 0x0028 && vr == "US" && n >= 2:
			us[tg] = int(binary.LittleEndian.Uint16(v))
		case tg>>16 == 0x0028:
			strs[tg] = string(bytes.TrimRight(v, " \x00"))
		}
		pos += hdr + n
	}
	return -1, -1, false
}

// skipUndefined skips a sequence of undefined length starting at its
// first item, returning the offset past its delimiter (PS3.5 7.5).
func skipUndefined(t testing.TB, b []byte, pos int) int {
	depth := 1
	for pos+8 <= len(b) {
		tg := uint32(binary.LittleEndian.Uint16(b[pos:]))<<16 | uint32(binary.LittleEndian.Uint16(b[pos+2:]))
		switch tg {
		case 0xFFFEE0DD, 0xFFFEE00D:
			pos += 8
			if tg == 0xFFFEE0DD {
				depth--
				if depth == 0 {
					return pos
				}
			}
			continue
		case 0xFFFEE000:
			if n := binary.LittleEndian.Uint32(b[pos+4:]); n != 0xFFFFFFFF {
				pos += 8 + int(n)
			} else {
				pos += 8
			}
			continue
		}
		vr := string(b[pos+4 : pos+6])
		if longVR[vr] {
			n := binary.LittleEndian.Uint32(b[pos+8:])
			if n == 0xFFFFFFFF {
				depth++
				pos += 12
				continue
			}
			pos += 12 + int(n)
		} else {
			pos += 8 + int(binary.LittleEndian.Uint16(b[pos+6:]))
		}
	}
	t.Fatalf("sequence of undefined length without its delimiter")
	return 0
}

// decodeFile decodes every frame of a compressed file with this package.
func decodeFile(t testing.TB, f dicomFile) [][]byte {
	t.Helper()
	frames, err := Frames(f.pixel, f.frames, f.ts)
	if err != nil {
		t.Fatalf("Frames: %v", err)
	}
	out := make([][]byte, len(frames))
	for i, fr := range frames {
		if out[i], err = Decode(f.ts, f.img, fr); err != nil {
			t.Fatalf("frame %d: %v", i+1, err)
		}
	}
	return out
}

// samples returns the sample values of a native file's frame i in
// colour-by-pixel order, whatever its planar configuration.
func (f dicomFile) samples(t testing.TB, i int) []int {
	t.Helper()
	size := f.img.Rows * f.img.Columns * f.img.SamplesPerPixel * f.img.BitsAllocated / 8
	if len(f.pixel) < (i+1)*size {
		t.Fatalf("native pixel data of %d bytes, frame %d needs %d", len(f.pixel), i+1, (i+1)*size)
	}
	v := toSamples(f.pixel[i*size:(i+1)*size], f.img.BitsAllocated)
	if f.planar == 1 && f.img.SamplesPerPixel == 3 {
		n := f.img.Rows * f.img.Columns
		p := make([]int, len(v))
		for j := range n {
			for s := range 3 {
				p[3*j+s] = v[s*n+j]
			}
		}
		v = p
	}
	return v
}

func toSamples(b []byte, bitsAllocated int) []int {
	if bitsAllocated == 8 {
		v := make([]int, len(b))
		for i, c := range b {
			v[i] = int(c)
		}
		return v
	}
	v := make([]int, len(b)/2)
	for i := range v {
		v[i] = int(binary.LittleEndian.Uint16(b[2*i:]))
	}
	return v
}

// compare checks got against want sample by sample, allowing tol, and
// reports the first differences.
func compare(t testing.TB, what string, got, want []int, tol int) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d samples, want %d", what, len(got), len(want))
	}
	bad, worst := 0, 0
	for i := range got {
		d := got[i] - want[i]
		if d < 0 {
			d = -d
		}
		if d > tol {
			if bad < 5 {
				t.Errorf("%s: sample %d is %d, want %d (tolerance %d)", what, i, got[i], want[i], tol)
			}
			bad++
		}
		worst = max(worst, d)
	}
	if bad > 0 {
		t.Errorf("%s: %d of %d samples differ by more than %d (largest %d)", what, bad, len(got), tol, worst)
	}
}

// runTool runs a DCMTK tool, failing the test with its output on error.
func runTool(t testing.TB, name string, args ...string) {
	t.Helper()
	path := scptest.NeedDCMTK(t, name)
	out, err := exec.Command(path, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("%s %v: %v\n%s", name, args, err, out)
	}
}

// testImage is a native image the tests write: the phantom's MR images,
// or an invented picture of a given format.
type testImage struct {
	name     string
	img      Image
	frames   int
	signed   bool
	fromFile string // a phantom file, instead of a generated picture
}

// phantomFiles writes a small phantom study (classic and multi-frame)
// and returns one classic b0 image and one multi-frame instance.
func phantomFiles(t testing.TB, dir string) (classic, multi string) {
	t.Helper()
	st, err := phantom.Write(filepath.Join(dir, "classic"), phantom.Options{Matrix: 64, Slices: 4, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	mf, err := phantom.Write(filepath.Join(dir, "multi"), phantom.Options{Matrix: 64, Slices: 4, Seed: 3, MultiFrame: true})
	if err != nil {
		t.Fatal(err)
	}
	return st.Files[0], mf.Files[0]
}

// writePicture writes an invented native Secondary Capture image (PS3.3
// A.8.1) of the given format: smooth gradients, edges and noise, so that
// every coding path (runs, large differences, flat areas) is exercised.
func writePicture(t testing.TB, path string, img Image, frames int, seed uint64) []byte {
	t.Helper()
	rnd := rand.New(rand.NewPCG(seed, 7))
	bs := img.bitsStored()
	maxv := 1<<bs - 1
	n := img.Rows * img.Columns * img.SamplesPerPixel
	pix := make([]byte, 0, frames*n*img.BitsAllocated/8)
	for f := range frames {
		for y := range img.Rows {
			for x := range img.Columns {
				for s := range img.SamplesPerPixel {
					var v int
					switch {
					case y < img.Rows/4: // flat band: JPEG-LS run mode
						v = maxv / (2 + s)
					case x < img.Columns/3: // gradient
						v = (x*maxv/img.Columns + y*maxv/(2*img.Rows) + s*maxv/5 + f*7) % (maxv + 1)
					case x < 2*img.Columns/3: // noise
						v = rnd.IntN(maxv + 1)
					default: // edges
						if (x/5+y/7+s)%2 == 0 {
							v = maxv
						}
					}
					if img.BitsAllocated == 8 {
						pix = append(pix, byte(v))
					} else {
						pix = binary.LittleEndian.AppendUint16(pix, uint16(v))
					}
				}
			}
		}
	}
	photometric := "MONOCHROME2"
	if img.SamplesPerPixel == 3 {
		photometric = "RGB"
	}
	const sc = "1.2.840.10008.5.1.4.1.1.7" // Secondary Capture Image Storage (PS3.6 Table A-1)
	sop := fmt.Sprintf("2.25.%d", rnd.Uint64())
	var elems []*dicom.Element
	add := func(tg tag.Tag, v any) {
		e, err := dicom.NewElement(tg, v)
		if err != nil {
			t.Fatalf("element %v: %v", tg, err)
		}
		elems = append(elems, e)
	}
	add(tag.FileMetaInformationVersion, []byte{0, 1})
	add(tag.MediaStorageSOPClassUID, []string{sc})
	add(tag.MediaStorageSOPInstanceUID, []string{sop})
	add(tag.TransferSyntaxUID, []string{"1.2.840.10008.1.2.1"})
	add(tag.ImplementationClassUID, []string{part10.ImplementationClassUID})
	add(tag.SOPClassUID, []string{sc})
	add(tag.SOPInstanceUID, []string{sop})
	add(tag.Modality, []string{"OT"})
	add(tag.ConversionType, []string{"SYN"})
	add(tag.PatientName, []string{"SYNTHETIC^CODEC"})
	add(tag.PatientID, []string{"QOH-SYN-CODEC"})
	add(tag.StudyInstanceUID, []string{sop + ".1"})
	add(tag.SeriesInstanceUID, []string{sop + ".2"})
	add(tag.SamplesPerPixel, []int{img.SamplesPerPixel})
	add(tag.PhotometricInterpretation, []string{photometric})
	if img.SamplesPerPixel == 3 {
		add(tag.PlanarConfiguration, []int{0})
	}
	if frames > 1 {
		add(tag.NumberOfFrames, []string{strconv.Itoa(frames)})
	}
	add(tag.Rows, []int{img.Rows})
	add(tag.Columns, []int{img.Columns})
	add(tag.BitsAllocated, []int{img.BitsAllocated})
	add(tag.BitsStored, []int{bs})
	add(tag.HighBit, []int{bs - 1})
	add(tag.PixelRepresentation, []int{0})
	stored := pix
	if len(stored)%2 == 1 {
		stored = append(stored[:len(stored):len(stored)], 0) // PS3.5 7.1.1: even length
	}
	add(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: stored})
	synth.SortElements(elems)
	if err := synth.WriteFile(path, dicom.Dataset{Elements: elems}); err != nil {
		t.Fatal(err)
	}
	return pix
}
